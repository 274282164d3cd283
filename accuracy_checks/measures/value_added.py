"""Forecast value added against naive baselines (docs/measures.md §12).

``FVA = WAPE(baseline) − WAPE(forecast)`` in percentage points, pooled over the rows where the
forecast, the actual and the baseline all exist (positive: the forecast adds value), with the
relative skill ``1 − MAE(forecast)/MAE(baseline)`` in the details (undefined if the baseline is
perfect). Baselines use only the actuals known at each cycle's issue date
(:mod:`accuracy_checks.evaluation.baselines`):

- ``naive``: the last actual before the issue date, repeated over the horizon;
- ``seasonal_naive``: the last ``m`` actuals before the issue date, repeated.
"""

from __future__ import annotations

from collections.abc import Callable, Mapping
from typing import Any

import numpy as np
import pandas as pd

from accuracy_checks.measures.data import MeasureData, result_frame
from accuracy_checks.measures.registry import declare
from accuracy_checks.measures.wording import format_number

__all__ = ["fva_from_data"]


def fva_from_data(data: MeasureData, kind: str) -> pd.DataFrame:
    """FVA in percentage points against the ``kind`` baseline, per group."""
    baseline = data.baseline(kind)
    y = data.actual
    has = ~np.isnan(baseline)
    use = data.usable & has
    with np.errstate(invalid="ignore"):
        abs_forecast = np.abs(data.error)
        abs_baseline = np.where(use, np.abs(y - baseline), 0.0)
    n = data.gsum(mask=use)
    sum_f = data.gsum(abs_forecast, use)
    sum_b = data.gsum(abs_baseline, use)
    sum_y = data.gsum(np.abs(y), use)
    wape_f = np.full(data.n_groups, np.nan)
    wape_b = np.full(data.n_groups, np.nan)
    np.divide(100.0 * sum_f, sum_y, out=wape_f, where=sum_y > 0)
    np.divide(100.0 * sum_b, sum_y, out=wape_b, where=sum_y > 0)
    skill = np.full(data.n_groups, np.nan)
    np.divide(sum_f, sum_b, out=skill, where=sum_b > 0)
    return result_frame(
        data.n_groups, wape_b - wape_f, [(n == 0, "no_data"), (sum_y == 0, "zero_denominator")],
        n_obs=n.astype(np.int64), wape_baseline=wape_b, wape_forecast=wape_f,
        relative_skill=np.where(sum_b > 0, 1.0 - skill, np.nan),
        n_without_baseline=data.gsum(mask=data.usable & ~has).astype(np.int64),
    )


def _compute(kind: str) -> Callable[[MeasureData], pd.DataFrame]:
    def compute(data: MeasureData) -> pd.DataFrame:
        return fva_from_data(data, kind)

    compute.__name__ = f"fva_{kind}"
    return compute


def _fva_facts(details: Mapping[str, Any], unit: str | None) -> str:
    if details.get("wape_baseline") is None:
        return ""
    return (f"Baseline WAPE {format_number(details['wape_baseline'])} % vs forecast "
            f"{format_number(details['wape_forecast'])} %.")


_MEASURES: tuple[dict[str, Any], ...] = tuple(
    dict(id=f"fva_{kind}", label=f"FVA vs {kind.replace('_', ' ')}", unit="pp",
         direction="higher", compute=_compute(kind), needs=frozenset({"history"}),
         facts=_fva_facts)
    for kind in ("naive", "seasonal_naive")
)
_DESCRIPTIONS = {
    "fva_naive": "WAPE(naive) − WAPE(forecast) in percentage points, pooled; naive = the last "
    "actual before each cycle's issue date. > 0: the forecast adds value. Relative skill "
    "1 − MAE(f)/MAE(naive) in details. docs/measures.md §12 (Gilliland 2010; Davydenko & Fildes "
    "2013).",
    "fva_seasonal_naive": "WAPE(seasonal naive) − WAPE(forecast) in percentage points, pooled; "
    "the baseline repeats the last m actuals before each cycle's issue date. docs/measures.md "
    "§12.",
}
declare(_MEASURES, _DESCRIPTIONS)
