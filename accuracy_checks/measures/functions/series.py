"""Reference measures of one series in time order: sMAPE, MASE, the tracking signals, the naive
baselines and forecast value added (docs/measures.md §6, §9–12).

Inputs follow :func:`~accuracy_checks.measures.functions.point.present`: 1-D array-likes of one
length, rows with a NaN dropped, ``nan`` for an undefined value.
"""

from __future__ import annotations

import numpy as np
from numpy.typing import ArrayLike

from accuracy_checks.measures.functions.point import NAN, mean_absolute_error, present

__all__ = [
    "forecast_value_added",
    "mase",
    "mase_scale",
    "naive_baseline",
    "seasonal_naive_baseline",
    "smape",
    "tracking_signal",
    "trigg_signal",
]


def smape(actual: ArrayLike, forecast: ArrayLike) -> float:
    """Symmetric MAPE of one series in percent (M4 form): ``100 · mean(2|e| / (|y| + |f|))``.

    Range 0–200 %. A row with ``y = f = 0`` scores 0 (project convention); ``y = 0 ≠ f`` scores
    200 %. For a segment the engine averages the per-series values (as M4 did).

    Notes
    -----
    docs/measures.md §6; Makridakis, Spiliotis & Assimakopoulos (2020), "The M4
    Competition", IJF 36(1):54–74. No library reference (checked with exact fractions).

    Examples
    --------
    >>> round(smape([200, 200, 200, 200], [100, 300, 100, 100]), 6)
    60.0
    >>> round(smape([0, 4, 0, 1], [1, 2, 0, 0]), 4)
    116.6667
    """
    y, f = present(actual=actual, forecast=forecast)
    if y.size == 0:
        return NAN
    denominator = np.abs(y) + np.abs(f)
    safe = np.where(denominator > 0, denominator, 1.0)
    terms = np.where(denominator > 0, 2.0 * np.abs(y - f) / safe, 0.0)
    return float(100.0 * np.mean(terms))


def mase_scale(history: ArrayLike, m: int = 1) -> float:
    """The in-sample scale of MASE: ``s = Σ_{t=m+1..N} |y_t − y_{t−m}| / (N − m)``.

    The mean absolute error of the (seasonal) naive forecast over the history, in data units.
    Pairs with a NaN are left out. ``nan`` when no pair remains (``N ≤ m``: too few rows).

    Examples
    --------
    >>> mase_scale([95, 105, 100, 90, 120])
    13.75
    >>> mase_scale([1, 2, 3], m=4)
    nan
    """
    h = np.asarray(history, dtype=np.float64)
    if m < 1:
        raise ValueError(f"the seasonal period must be at least 1; got {m}")
    if h.size <= m:
        return NAN
    diff = np.abs(h[m:] - h[:-m])
    diff = diff[~np.isnan(diff)]
    return float(np.mean(diff)) if diff.size else NAN


def scaled(value: float, history: ArrayLike, m: int) -> float:
    """``value / s`` with ``s`` the :func:`mase_scale` of ``history``; ``nan`` when the history
    is too short (``N ≤ m``) or ``s = 0`` (zero scale)."""
    scale = mase_scale(history, m)
    return float(value / scale) if np.isfinite(scale) and scale > 0 else NAN


def mase(actual: ArrayLike, forecast: ArrayLike, history: ArrayLike, m: int = 1) -> float:
    """Mean absolute scaled error of one series: ``MAE / s`` (:func:`mase_scale` of the history
    before the forecast origin). Below 1: better than the in-sample (seasonal) naive forecast.

    ``nan`` when the history is too short (``N ≤ m``) or ``s = 0`` (zero scale).

    Notes
    -----
    docs/measures.md §9; Hyndman & Koehler (2006), "Another look at measures of forecast
    accuracy", IJF 22(4):679–688; seasonal form as in M4. Reference:
    ``sklearn.metrics.mean_absolute_error(y, f) / mean_absolute_error(h[m:], h[:-m])``.

    Examples
    --------
    >>> round(mase([80, 105, 115, 90, 110], [100] * 5, [95, 105, 100, 90, 120]), 6)
    0.872727
    """
    return scaled(mean_absolute_error(actual, forecast), history, m)


def tracking_signal(actual: ArrayLike, forecast: ArrayLike) -> float:
    """Tracking signal over the given rows (in time order): ``Σe / MAD``, ``MAD = mean|e|``.

    ``|TS| ≤ n``; 0 when every error is 0. Positive = sustained under-forecast.

    Notes
    -----
    docs/measures.md §10; Brown (1959). Reference:
    ``n * statsmodels.tools.eval_measures.bias(y, f) / meanabs(y, f)``.

    Examples
    --------
    >>> round(tracking_signal([102, 98, 110, 115, 121, 126, 133, 140],
    ...                       [100, 101, 103, 106, 108, 111, 114, 117]), 5)
    7.47253
    """
    y, f = present(actual=actual, forecast=forecast)
    e = y - f
    if e.size == 0:
        return NAN
    mad = float(np.mean(np.abs(e)))
    return float(np.sum(e) / mad) if mad > 0 else 0.0


def trigg_signal(actual: ArrayLike, forecast: ArrayLike, alpha: float = 0.1) -> float:
    """Trigg's smoothed tracking signal at the last row: ``T = E_n / M_n`` in [−1, 1].

    ``E_t = α·e_t + (1 − α)·E_{t−1}`` with ``E_0 = 0``; ``M_t = α·|e_t| + (1 − α)·M_{t−1}`` with
    ``M_0`` = the MAE of the rows (project choice). Written in closed form:
    ``E_n = Σ_k α(1 − α)^{n−k} e_k`` and ``M_n = Σ_k α(1 − α)^{n−k} |e_k| + (1 − α)^n M_0``.
    0 when ``M_n = 0``; ``α·sign(e)`` for one row.

    Notes
    -----
    docs/measures.md §11; Trigg (1964), "Monitoring a forecasting system", Operational
    Research Quarterly 15(3):271–274. Reference: ``scipy.signal.lfilter([α], [1, α − 1], e,
    zi=[(1 − α)·E_0])`` and the same on |e| with ``M_0``, ratio at the last row.

    Examples
    --------
    >>> round(trigg_signal([80, 105, 115, 90, 110], [100] * 5), 7)
    0.0309238
    >>> trigg_signal([50], [40])
    0.1
    """
    y, f = present(actual=actual, forecast=forecast)
    e = y - f
    n = e.size
    if n == 0:
        return NAN
    weights = alpha * (1.0 - alpha) ** np.arange(n - 1, -1, -1)
    m0 = float(np.mean(np.abs(e)))
    smoothed = float(np.sum(weights * e))
    smoothed_abs = float(np.sum(weights * np.abs(e)) + (1.0 - alpha) ** n * m0)
    return smoothed / smoothed_abs if smoothed_abs > 0 else 0.0


def naive_baseline(history: ArrayLike, horizon: int) -> np.ndarray:
    """The naive forecast: the last non-missing value of the history, repeated ``horizon``
    times (NaN if the history has none).

    >>> naive_baseline([95, 105, 100, 90, 120], 3).tolist()
    [120.0, 120.0, 120.0]
    """
    h = np.asarray(history, dtype=np.float64)
    known = h[~np.isnan(h)]
    return np.full(horizon, known[-1] if known.size else np.nan)


def seasonal_naive_baseline(history: ArrayLike, horizon: int, m: int) -> np.ndarray:
    """The seasonal naive forecast: the last ``m`` values of the history, repeated.

    >>> seasonal_naive_baseline([1, 2, 3, 4, 5, 6], 5, 4).tolist()
    [3.0, 4.0, 5.0, 6.0, 3.0]
    """
    h = np.asarray(history, dtype=np.float64)
    if h.size < m:
        return np.full(horizon, np.nan)
    season = h[h.size - m:]
    return season[np.arange(horizon) % m]


def forecast_value_added(actual: ArrayLike, forecast: ArrayLike,
                         baseline: ArrayLike) -> tuple[float, float]:
    """Forecast value added over a baseline: ``(WAPE(b) − WAPE(f) in percentage points,
    relative skill 1 − MAE(f)/MAE(b))``, on the rows where all three exist.

    FVA > 0: the forecast adds value. The skill is ``nan`` when the baseline is perfect;
    the FVA is ``nan`` when ``Σ|y| = 0``.

    Notes
    -----
    docs/measures.md §12; Gilliland (2010), *The Business Forecasting Deal*; relative MAE
    from Davydenko & Fildes (2013), IJF 29(3):510–522. Reference: two
    ``sklearn.metrics.mean_absolute_error`` calls.

    Examples
    --------
    >>> forecast_value_added([80, 105, 115, 90, 110], [100] * 5, [120] * 5)
    (8.0, 0.4)
    """
    y, f, b = present(actual=actual, forecast=forecast, baseline=baseline)
    if y.size == 0:
        return NAN, NAN
    scale = np.sum(np.abs(y))
    abs_f, abs_b = np.sum(np.abs(y - f)), np.sum(np.abs(y - b))
    fva = float(100.0 * (abs_b - abs_f) / scale) if scale > 0 else NAN
    skill = float(1.0 - abs_f / abs_b) if abs_b > 0 else NAN
    return fva, skill
