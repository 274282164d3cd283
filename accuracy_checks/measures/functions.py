"""Reference implementations of the accuracy measures (docs/measures.md §1–15).

Each function works on one series (or one pooled set of rows) given as 1-D array-likes of
the same length, written for reading, not speed: the engine computes the same figures from
grouped statistics and vectorised group reductions (:mod:`accuracy_checks.measures.stats`,
the measure families and the registry), and the tests hold the two to the same values.

Conventions (docs/measures.md):

- ``e = actual − forecast``; a positive error is an **under-forecast**.
- Rows where the actual or the forecast is NaN are dropped first; ``±inf`` is not dropped.
- Percentages are in percent (×100), never fractions.
- An undefined value is ``nan`` (no rows, a zero denominator, too few rows), never 0 or inf.
"""

from __future__ import annotations

import numpy as np
from numpy.typing import ArrayLike

__all__ = [
    "bias_pct",
    "error_cost",
    "forecast_value_added",
    "interval_coverage",
    "interval_score",
    "mape",
    "mape_nonzero",
    "mase",
    "mase_scale",
    "mean_absolute_error",
    "mean_error",
    "msis",
    "naive_baseline",
    "pinball_loss",
    "rmse",
    "sde",
    "seasonal_naive_baseline",
    "smape",
    "tracking_signal",
    "trigg_signal",
    "wape",
]


def _errors(actual: ArrayLike, forecast: ArrayLike) -> tuple[np.ndarray, np.ndarray]:
    """(y, e) over the rows where both inputs are present, as float64 arrays."""
    y = np.asarray(actual, dtype=np.float64)
    f = np.asarray(forecast, dtype=np.float64)
    if y.ndim != 1 or f.ndim != 1:
        raise ValueError(f"actual and forecast must be 1-D, got shapes {y.shape} and {f.shape}")
    if y.shape != f.shape:
        raise ValueError(f"actual and forecast differ in length: {y.size} and {f.size}")
    keep = ~(np.isnan(y) | np.isnan(f))
    y, f = y[keep], f[keep]
    return y, y - f


def mean_error(actual: ArrayLike, forecast: ArrayLike) -> float:
    """Mean error (ME), in data units.

    ``ME = Σe / n`` with ``e = actual − forecast``: positive = under-forecast on average.

    Parameters
    ----------
    actual, forecast : array-like of shape (n,)
        Rows with a NaN in either are dropped.

    Returns
    -------
    float
        ``nan`` when no row is left.

    Notes
    -----
    docs/measures.md §1; common practice, no source. Reference:
    ``statsmodels.tools.eval_measures.bias(actual, forecast)``.

    Examples
    --------
    >>> mean_error([80, 105, 115, 90, 110], [100, 100, 100, 100, 100])
    0.0
    >>> mean_error([10, 12], [9, 14])
    -0.5
    >>> mean_error([float("nan")], [1.0])
    nan
    """
    _, e = _errors(actual, forecast)
    return float(np.mean(e)) if e.size else float("nan")


def bias_pct(actual: ArrayLike, forecast: ArrayLike) -> float:
    """Bias in percent of volume: ``100 · Σe / Σ|y|``.

    Positive = under-forecast. Equals ``100 · Σe / Σy`` when no actual is negative.

    Parameters
    ----------
    actual, forecast : array-like of shape (n,)
        Rows with a NaN in either are dropped.

    Returns
    -------
    float
        Percent. ``nan`` when no row is left or ``Σ|y| = 0`` (zero denominator).

    Notes
    -----
    docs/measures.md §2; common practice, no source. Reference:
    ``100 * statsmodels.tools.eval_measures.bias(y, f) / np.mean(np.abs(y))``.

    Examples
    --------
    >>> bias_pct([200, 200, 200, 200], [100, 300, 100, 100])
    25.0
    >>> bias_pct([0, 0], [1, 2])
    nan
    """
    y, e = _errors(actual, forecast)
    denominator = np.sum(np.abs(y))
    return float(100.0 * np.sum(e) / denominator) if denominator != 0 else float("nan")


def mean_absolute_error(actual: ArrayLike, forecast: ArrayLike) -> float:
    """Mean absolute error (MAE, also MAD), in data units: ``Σ|e| / n``.

    Parameters
    ----------
    actual, forecast : array-like of shape (n,)
        Rows with a NaN in either are dropped.

    Returns
    -------
    float
        ``nan`` when no row is left.

    Notes
    -----
    docs/measures.md §3; common practice (Brown, 1959, used MAD as the noise measure).
    Reference: ``sklearn.metrics.mean_absolute_error`` = ``statsmodels ... meanabs``.

    Examples
    --------
    >>> mean_absolute_error([200, 200, 200, 200], [100, 300, 100, 100])
    100.0
    >>> mean_absolute_error([], [])
    nan
    """
    _, e = _errors(actual, forecast)
    return float(np.mean(np.abs(e))) if e.size else float("nan")


def mape(actual: ArrayLike, forecast: ArrayLike) -> float:
    """Mean absolute percentage error in percent: ``100 · mean(|e| / |y|)``.

    Parameters
    ----------
    actual, forecast : array-like of shape (n,)
        Rows with a NaN in either are dropped.

    Returns
    -------
    float
        Percent. ``nan`` when no row is left or any actual is 0 (``zero_actual``; see
        :func:`mape_nonzero`). For forecasts ≥ 0 an under-forecast costs at most 100 %, an
        over-forecast is unbounded.

    Notes
    -----
    docs/measures.md §4; common practice, critiqued by Hyndman & Koehler (2006). Reference:
    ``100 * sklearn.metrics.mean_absolute_percentage_error`` only when no actual is 0 (sklearn
    divides by ~2.2e-16 instead).

    Examples
    --------
    >>> mape([200, 200, 200, 200], [100, 300, 100, 100])
    50.0
    >>> mape([0, 4, 0, 1], [1, 2, 0, 0])
    nan
    """
    y, e = _errors(actual, forecast)
    if y.size == 0 or np.any(y == 0):
        return float("nan")
    return float(100.0 * np.mean(np.abs(e) / np.abs(y)))


def mape_nonzero(actual: ArrayLike, forecast: ArrayLike) -> float:
    """MAPE in percent over the rows with a nonzero actual: ``100 · mean(|e| / |y|), y ≠ 0``.

    Reported beside :func:`mape` when zero actuals make MAPE undefined.

    Parameters
    ----------
    actual, forecast : array-like of shape (n,)
        Rows with a NaN in either are dropped, then rows with ``actual == 0``.

    Returns
    -------
    float
        Percent. ``nan`` when no row with a nonzero actual is left.

    Notes
    -----
    docs/measures.md §4 (``mape_nonzero``; check value E4 = 75 %).

    Examples
    --------
    >>> mape_nonzero([0, 4, 0, 1], [1, 2, 0, 0])
    75.0
    >>> mape_nonzero([0, 0], [1, 1])
    nan
    """
    y, e = _errors(actual, forecast)
    nonzero = y != 0
    if not np.any(nonzero):
        return float("nan")
    return float(100.0 * np.mean(np.abs(e[nonzero]) / np.abs(y[nonzero])))


def wape(actual: ArrayLike, forecast: ArrayLike) -> float:
    """Weighted absolute percentage error in percent: ``100 · Σ|e| / Σ|y|`` (= MAE / mean|y|).

    The recommended headline segment measure: volume-weighted, tolerates zero actuals.

    Parameters
    ----------
    actual, forecast : array-like of shape (n,)
        Rows with a NaN in either are dropped.

    Returns
    -------
    float
        Percent. ``nan`` when no row is left or ``Σ|y| = 0`` (zero denominator).

    Notes
    -----
    docs/measures.md §5; Kolassa & Schütz (2007), "Advantages of the MAD/MEAN ratio over the
    MAPE", Foresight 6:40–43. Reference:
    ``100 * sklearn.metrics.mean_absolute_error(y, f) / np.mean(np.abs(y))``.

    Examples
    --------
    >>> wape([0, 4, 0, 1], [1, 2, 0, 0])
    80.0
    >>> wape([0, 0], [0, 0])
    nan
    """
    y, e = _errors(actual, forecast)
    denominator = np.sum(np.abs(y))
    return float(100.0 * np.sum(np.abs(e)) / denominator) if denominator != 0 else float("nan")


def rmse(actual: ArrayLike, forecast: ArrayLike) -> float:
    """Root mean squared error, in data units: ``√(Σe² / n)``.

    ``RMSE² = ME² + (n − 1)/n · SDE²``.

    Parameters
    ----------
    actual, forecast : array-like of shape (n,)
        Rows with a NaN in either are dropped.

    Returns
    -------
    float
        ``nan`` when no row is left.

    Notes
    -----
    docs/measures.md §7; common practice, Hyndman & Koehler (2006). Reference:
    ``sklearn.metrics.root_mean_squared_error`` = ``statsmodels ... rmse``.

    Examples
    --------
    >>> rmse([200, 200, 200, 200], [100, 300, 100, 100])
    100.0
    >>> rmse([1.0, float("nan")], [float("nan"), 2.0])
    nan
    """
    _, e = _errors(actual, forecast)
    return float(np.sqrt(np.mean(e * e))) if e.size else float("nan")


def sde(actual: ArrayLike, forecast: ArrayLike) -> float:
    """Standard deviation of the errors, in data units: ``√(Σ(e − ME)² / (n − 1))`` (ddof = 1).

    Pooled over all rows given, so it includes bias differences between series.

    Parameters
    ----------
    actual, forecast : array-like of shape (n,)
        Rows with a NaN in either are dropped.

    Returns
    -------
    float
        ``nan`` when fewer than 2 rows are left (``too_few_rows``).

    Notes
    -----
    docs/measures.md §8; common practice, no source. Reference:
    ``statsmodels.tools.eval_measures.stde(y, f, ddof=1)`` (its default ``ddof=0`` is not this)
    = ``np.std(e, ddof=1)``.

    Examples
    --------
    >>> sde([200, 200, 200, 200], [100, 300, 100, 100])
    100.0
    >>> sde([50], [40])
    nan
    """
    _, e = _errors(actual, forecast)
    return float(np.std(e, ddof=1)) if e.size >= 2 else float("nan")


def _present(*arrays: ArrayLike) -> list[np.ndarray]:
    """The arrays (float64, 1-D, same length) restricted to rows where none is NaN."""
    out = [np.asarray(a, dtype=np.float64) for a in arrays]
    if any(a.ndim != 1 for a in out) or len({a.size for a in out}) > 1:
        raise ValueError(f"inputs must be 1-D of one length, got shapes {[a.shape for a in out]}")
    keep = np.ones(out[0].shape, dtype=bool)
    for a in out:
        keep &= ~np.isnan(a)
    return [a[keep] for a in out]


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
    y, f = _present(actual, forecast)
    if y.size == 0:
        return float("nan")
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
        return float("nan")
    diff = np.abs(h[m:] - h[:-m])
    diff = diff[~np.isnan(diff)]
    return float(np.mean(diff)) if diff.size else float("nan")


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
    scale = mase_scale(history, m)
    mae = mean_absolute_error(actual, forecast)
    return float(mae / scale) if np.isfinite(scale) and scale > 0 else float("nan")


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
    _, e = _errors(actual, forecast)
    if e.size == 0:
        return float("nan")
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
    _, e = _errors(actual, forecast)
    n = e.size
    if n == 0:
        return float("nan")
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
    y, f, b = _present(actual, forecast, baseline)
    if y.size == 0:
        return float("nan"), float("nan")
    scale = np.sum(np.abs(y))
    abs_f, abs_b = np.sum(np.abs(y - f)), np.sum(np.abs(y - b))
    fva = float(100.0 * (abs_b - abs_f) / scale) if scale > 0 else float("nan")
    skill = float(1.0 - abs_f / abs_b) if abs_b > 0 else float("nan")
    return fva, skill


def interval_coverage(actual: ArrayLike, lower: ArrayLike, upper: ArrayLike) -> float:
    """Share of actuals inside ``[lower, upper]`` (bounds inclusive), in percent.

    Rows with ``lower > upper`` are an input error: they are left out.

    Notes
    -----
    docs/measures.md §13; common practice; the shortfall is tested with
    ``scipy.stats.binomtest(k, n, p=1 − α)`` (Christoffersen 1998).

    Examples
    --------
    >>> interval_coverage([80, 105, 115, 90, 110], [85] * 5, [115] * 5)
    80.0
    """
    y, lo, hi = _present(actual, lower, upper)
    keep = lo <= hi
    y, lo, hi = y[keep], lo[keep], hi[keep]
    if y.size == 0:
        return float("nan")
    return float(100.0 * np.mean((lo <= y) & (y <= hi)))


def pinball_loss(actual: ArrayLike, quantile: ArrayLike, tau: float) -> float:
    """Mean pinball (quantile) loss of a ``tau``-quantile forecast, in data units.

    ``u = y − q``; loss ``τ·u`` if ``u ≥ 0`` else ``(τ − 1)·u``. At ``τ = 0.5`` it is MAE/2.

    Notes
    -----
    docs/measures.md §14; Koenker & Bassett (1978), "Regression quantiles", Econometrica
    46(1):33–50. Reference: ``sklearn.metrics.mean_pinball_loss(y, q, alpha=τ)``.

    Examples
    --------
    >>> pinball_loss([80, 105, 115, 90, 110], [85] * 5, 0.1)
    2.5
    """
    y, q = _present(actual, quantile)
    if y.size == 0:
        return float("nan")
    u = y - q
    return float(np.mean(np.where(u >= 0, tau * u, (tau - 1.0) * u)))


def interval_score(actual: ArrayLike, lower: ArrayLike, upper: ArrayLike, alpha: float) -> float:
    """Mean interval score (MIS) of a central ``(1 − α)`` interval, in data units.

    ``IS = (U − L) + (2/α)(L − y)·1{y < L} + (2/α)(y − U)·1{y > U}``. Rows with ``L > U`` are
    left out.

    Notes
    -----
    docs/measures.md §15; Gneiting & Raftery (2007), "Strictly proper scoring rules,
    prediction, and estimation", JASA 102(477):359–378. Reference:
    ``(2/α)·(mean_pinball_loss(y, L, alpha=α/2) + mean_pinball_loss(y, U, alpha=1 − α/2))``.

    Examples
    --------
    >>> interval_score([80, 105, 115, 90, 110], [85] * 5, [115] * 5, 0.2)
    40.0
    """
    y, lo, hi = _present(actual, lower, upper)
    keep = lo <= hi
    y, lo, hi = y[keep], lo[keep], hi[keep]
    if y.size == 0:
        return float("nan")
    score = (hi - lo) + (2.0 / alpha) * (np.where(y < lo, lo - y, 0.0)
                                         + np.where(y > hi, y - hi, 0.0))
    return float(np.mean(score))


def msis(actual: ArrayLike, lower: ArrayLike, upper: ArrayLike, alpha: float,
         history: ArrayLike, m: int = 1) -> float:
    """Mean scaled interval score of one series: ``MIS / s`` (s of :func:`mase_scale`).

    Notes
    -----
    docs/measures.md §15; MSIS from the M4 Competition (2020), which used α = 0.05.

    Examples
    --------
    >>> round(msis([80, 105, 115, 90, 110], [85] * 5, [115] * 5, 0.2,
    ...            [95, 105, 100, 90, 120]), 5)
    2.90909
    """
    scale = mase_scale(history, m)
    score = interval_score(actual, lower, upper, alpha)
    return float(score / scale) if np.isfinite(scale) and scale > 0 else float("nan")


def error_cost(actual: ArrayLike, forecast: ArrayLike, under: float, over: float) -> float:
    """Money lost to forecast errors: ``Σ under·max(e, 0) + over·max(−e, 0)``.

    ``under``: money per unit under-forecast (``e > 0``); ``over``: per unit over-forecast.
    Equals ``(under + over) · n · pinball_loss(y, f, τ*)`` with ``τ* = under / (under + over)``.

    Examples
    --------
    >>> error_cost([10, 10], [8, 13], under=5.0, over=1.0)
    13.0
    """
    if not (under > 0 and over > 0):
        raise ValueError(f"unit costs must be > 0; got under={under}, over={over}")
    _, e = _errors(actual, forecast)
    return float(np.sum(under * np.maximum(e, 0.0) + over * np.maximum(-e, 0.0)))
