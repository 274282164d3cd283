"""Scale-free measures averaged per series: sMAPE (M4 form) and MASE (docs/measures.md §6 and 9).

Both are computed per series within each group (lag × segment), then averaged without weights
over the series whose value is defined, as the M4 competition did; the count of series used
and skipped (with the reason) goes into the result's details.

MASE divides each series' MAE by its in-sample scale ``s = mean |y_t − y_{t−m}|`` from the
actuals *before the issue date of the earliest cycle evaluated* (prepared once by the engine,
:meth:`accuracy_checks.evaluation.baselines.ActualsIndex.scales`), so the figure does not move with
the window's later cycles and every forecast is scaled by what was known when it was made.
"""

from __future__ import annotations

from typing import Any

import numpy as np
import pandas as pd

from accuracy_checks.measures.data import (
    SCALE_OK,
    SCALE_TOO_FEW_ROWS,
    MeasureData,
    result_frame,
    scaled_result,
)
from accuracy_checks.measures.registry import declare
from accuracy_checks.measures.wording import skipped_series_facts

__all__ = ["mase_from_data", "smape_from_data"]


def smape_from_data(data: MeasureData) -> pd.DataFrame:
    """sMAPE in percent per group: per series ``100·mean(2|e|/(|y|+|f|))``, then the mean.

    A row with ``y = f = 0`` scores 0 (project convention); ``y = 0 ≠ f`` scores 200 %.
    """
    y, f, usable = data.actual, data.forecast, data.usable
    with np.errstate(invalid="ignore", divide="ignore"):
        denominator = np.abs(y) + np.abs(f)
        term = np.where(usable & (denominator > 0), 2.0 * np.abs(data.error) / denominator, 0.0)
    units = data.units()
    rows = data.unit_sum(units)
    value = 100.0 * data.unit_sum(units, term) / np.maximum(rows, 1.0)
    mean, used = data.per_unit_mean(units, value, rows > 0)
    n = data.gsum(mask=usable)
    return result_frame(
        data.n_groups, mean, [(n == 0, "no_data")],
        n_obs=n.astype(np.int64), n_series_used=used.astype(np.int64),
        n_series_skipped=np.zeros(data.n_groups, dtype=np.int64),
    )


def mase_from_data(data: MeasureData) -> pd.DataFrame:
    """MASE per group: per series ``MAE / s``, then the unweighted mean over series with a
    defined scale. Series with ``N ≤ m`` history periods (``too_few_rows``, e.g. a seasonal
    period longer than the history) or ``s = 0`` (``zero_scale``) are skipped and counted."""
    units = data.units()
    rows = data.unit_sum(units)
    mae = data.unit_sum(units, np.abs(data.error)) / np.maximum(rows, 1.0)
    reason = data.scale_reason[units.series]
    scale = data.scale[units.series]
    defined = reason == SCALE_OK
    value = np.full(units.n, np.nan)
    np.divide(mae, scale, out=value, where=defined)
    mean, used = data.per_unit_mean(units, value, defined)
    too_few = np.bincount(units.group[reason == SCALE_TOO_FEW_ROWS], minlength=data.n_groups)
    zero = np.bincount(units.group[(reason != SCALE_OK) & (reason != SCALE_TOO_FEW_ROWS)],
                       minlength=data.n_groups)
    n = data.gsum(mask=data.usable)
    return scaled_result(
        data.n_groups, mean, n, used, too_few, zero,
        skipped_too_few_rows=too_few.astype(np.int64),
        skipped_zero_scale=zero.astype(np.int64),
        seasonal_period=np.full(data.n_groups, data.settings.seasonal_period, dtype=np.int64),
    )


_MEASURES: tuple[dict[str, Any], ...] = (
    dict(id="smape", label="sMAPE %", unit="%", direction="lower", compute=smape_from_data,
         order=5, headline=5),
    dict(id="mase", label="MASE", unit="", direction="lower", compute=mase_from_data,
         needs=frozenset({"history"}), facts=skipped_series_facts, order=8, headline=8),
)
_DESCRIPTIONS = {
    "smape": "100·mean(2|e|/(|actual|+|forecast|)) in percent (0–200), per series then the "
    "unweighted mean (M4). y = f = 0 scores 0. docs/measures.md §6 (Makridakis, Spiliotis & "
    "Assimakopoulos 2020).",
    "mase": "MAE / s per series, s = mean|y_t − y_{t−m}| of the actuals before the issue date "
    "of the earliest cycle evaluated; then the unweighted mean. Below 1 beats the in-sample "
    "(seasonal) naive forecast. docs/measures.md §9 (Hyndman & Koehler 2006; M4).",
}
declare(_MEASURES, _DESCRIPTIONS)
