"""Sustained-bias signals: tracking signal and Trigg's smoothed signal (docs/measures.md §10–11).

Both work on a segment's series *summed by period* (the error of the sum is the sum of the
errors) over the tracking window: the ``evaluation.tracking_window`` most recent periods that
have actuals, or fewer where fewer exist. For each group, ``E_t`` is the summed error of period
``t`` over the periods with at least one usable row, in time order.

Tracking signal ``TS = Σ E_t / MAD`` with ``MAD = mean |E_t|`` over the same n periods, so
``|TS| ≤ n``. A constant limit therefore cannot fire on short windows (±4 when n ≤ 4) and fires
far too often on long ones (P(|TS| > 4) = 0.66 at n = 52 on unbiased errors). By default the
limit scales with the window: ``z · 1.25 · √n`` (1.25 ≈ √(π/2), the ratio of the standard
deviation to the mean absolute deviation of normal errors), with z = 1.96 for a nominal 5 %
false-alarm rate; ``evaluation.tracking_limit: constant`` keeps the classic constant limit.

Trigg's signal ``T = E/M`` with ``E_t = α e_t + (1 − α) E_{t−1}`` and
``M_t = α|e_t| + (1 − α) M_{t−1}``, ``E_0 = 0``, ``M_0`` = the window's MAD, reported at the
last period: the closed form ``E_n = Σ α(1 − α)^{n−k} e_k`` (k = 1 … n) and
``M_n = Σ α(1 − α)^{n−k}|e_k| + (1 − α)^n M_0`` is evaluated for all groups at once.
"""

from __future__ import annotations

import math
from collections.abc import Mapping
from typing import Any

import numpy as np
import pandas as pd

from accuracy_checks.measures.data import MeasureData, MeasureSettings, result_frame
from accuracy_checks.measures.registry import Levels, declare

__all__ = ["scaled_limit", "tracking_signal_from_data", "trigg_from_data"]

#: SD / MAD of normal errors, rounded as in docs/measures.md §10 (√(π/2) = 1.2533)
SD_PER_MAD = 1.25
#: default z of the scaled limit: a nominal 5 % two-sided false-alarm rate
DEFAULT_Z = 1.96
#: the practitioner's constant limit (docs/measures.md §10: ±4; texts vary from ±3 to ±8)
DEFAULT_CONSTANT = 4.0


def _period_sums(data: MeasureData) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Per group × period (time order): summed error, usable row count, presence."""
    codes, n_periods = data.period_codes
    width = max(n_periods, 1)
    usable = data.usable
    cell = data.group[usable] * width + codes[usable]
    cells = data.n_groups * width
    errors = np.bincount(cell, weights=data.error[usable], minlength=cells)
    counts = np.bincount(cell, minlength=cells)
    shape = (data.n_groups, width)
    return errors.reshape(shape), counts.reshape(shape), counts.reshape(shape) > 0


def tracking_signal_from_data(data: MeasureData) -> pd.DataFrame:
    """``TS = ΣE_t / mean|E_t|`` per group over its periods in the tracking window; 0 when
    every error is 0; ``sign(e)`` for one period."""
    errors, counts, present = _period_sums(data)
    n = present.sum(axis=1)
    total = errors.sum(axis=1)
    absolute = np.abs(errors).sum(axis=1)
    mad = np.full(data.n_groups, np.nan)
    np.divide(absolute, n, out=mad, where=n > 0)
    value = np.zeros(data.n_groups)
    np.divide(total, mad, out=value, where=absolute > 0)
    return result_frame(
        data.n_groups, value, [(n == 0, "no_data")],
        n_obs=counts.sum(axis=1).astype(np.int64), window_periods=n.astype(np.int64),
        sum_error=total, mad=mad,
    )


def trigg_from_data(data: MeasureData) -> pd.DataFrame:
    """Trigg's ``T = E_n / M_n`` per group (α = ``evaluation.trigg_alpha``, E_0 = 0,
    M_0 = the window's MAD); 0 when M_n = 0."""
    alpha = data.settings.trigg_alpha
    errors, counts, present = _period_sums(data)
    n = present.sum(axis=1)
    rank = np.cumsum(present, axis=1) - 1  # position of each present period in its group
    age = np.where(present, n[:, None] - 1 - rank, 0)
    weight = np.where(present, alpha * (1.0 - alpha) ** age, 0.0)
    absolute = np.abs(errors)
    m0 = np.zeros(data.n_groups)
    np.divide(absolute.sum(axis=1), n, out=m0, where=n > 0)
    smoothed_error = (weight * errors).sum(axis=1)
    smoothed_abs = (weight * absolute).sum(axis=1) + (1.0 - alpha) ** n * m0
    value = np.zeros(data.n_groups)
    np.divide(smoothed_error, smoothed_abs, out=value, where=smoothed_abs > 0)
    return result_frame(
        data.n_groups, value, [(n == 0, "no_data")],
        n_obs=counts.sum(axis=1).astype(np.int64), window_periods=n.astype(np.int64),
        alpha=np.full(data.n_groups, alpha),
    )


def _scale_bound(bound: Any, factor: float) -> Any:
    if bound is None:
        return None
    if isinstance(bound, tuple | list):
        return (float(bound[0]) * factor, float(bound[1]) * factor)
    return float(bound) * factor


def scaled_limit(z: float, n: int) -> float:
    """The tracking-signal limit ``z · 1.25 · √n`` for a window of n periods.

    >>> round(scaled_limit(1.96, 13), 4)
    8.8336
    """
    return z * SD_PER_MAD * math.sqrt(n)


def _tracking_levels(configured: Levels | None, extras: Mapping[str, Any],
                     settings: MeasureSettings) -> Levels | None:
    """The bounds that judge one tracking signal.

    ``constant``: the configured levels as they are (default: warn beyond ±4). ``scaled``: the
    configured levels are z-values, multiplied by ``1.25·√n`` (default: warn at z = 1.96).
    """
    n = int(extras.get("window_periods") or 0)
    if settings.tracking_limit == "constant":
        return configured if configured is not None else (DEFAULT_CONSTANT, None)
    warn, fail = configured if configured is not None else (DEFAULT_Z, None)
    factor = scaled_limit(1.0, n)
    return _scale_bound(warn, factor), _scale_bound(fail, factor)


def _tracking_facts(details: Mapping[str, Any], unit: str | None) -> str:
    periods = details.get("window_periods")
    return f"Summed over {periods} period(s)." if periods else ""


_MEASURES: tuple[dict[str, Any], ...] = (
    dict(id="tracking_signal", label="Tracking signal", unit="", direction="centered",
         compute=tracking_signal_from_data, window="tracking", levels=_tracking_levels,
         facts=_tracking_facts, bias_type=True, order=9, wording="signal"),
    dict(id="trigg", label="Trigg's signal", unit="", direction="centered",
         compute=trigg_from_data, window="tracking", bias_type=True, wording="signal"),
)
_DESCRIPTIONS = {
    "tracking_signal": "Σe / MAD over the tracking window on the segment's series summed by "
    "period; positive = sustained under-forecast. Limit z·1.25·√n (default z = 1.96) or a "
    "constant. docs/measures.md §10 (Brown 1959).",
    "trigg": "Smoothed error / smoothed absolute error (α = evaluation.trigg_alpha, E0 = 0, "
    "M0 = window MAD) at the last period, in [−1, 1]; positive = under-forecast. Simulated "
    "95 %/99 % points of |T|: 0.54/0.67 at α = 0.1. docs/measures.md §11 (Trigg 1964).",
}
declare(_MEASURES, _DESCRIPTIONS)
