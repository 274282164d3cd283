"""Reference implementations of the point-forecast accuracy measures (``METRICS.md`` 1–8).

Each function is ``f(actual, forecast) -> float`` on two 1-D array-likes of the same length,
written for reading, not speed: the engine computes the same figures from grouped sufficient
statistics (:mod:`accuracy_checks.measures.stats` and the registry), and the tests hold the two
to the same values.

Conventions (``METRICS.md``):

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
    "mape",
    "mape_nonzero",
    "mean_absolute_error",
    "mean_error",
    "rmse",
    "sde",
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
    ``METRICS.md`` entry 1; common practice, no source. Reference:
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
    ``METRICS.md`` entry 2; common practice, no source. Reference:
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
    ``METRICS.md`` entry 3; common practice (Brown, 1959, used MAD as the noise measure).
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
    ``METRICS.md`` entry 4; common practice, critiqued by Hyndman & Koehler (2006). Reference:
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
    ``METRICS.md`` entry 4 (``mape_nonzero``; check value E4 = 75 %).

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
    ``METRICS.md`` entry 5; Kolassa & Schütz (2007), "Advantages of the MAD/MEAN ratio over the
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
    ``METRICS.md`` entry 7; common practice, Hyndman & Koehler (2006). Reference:
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
    ``METRICS.md`` entry 8; common practice, no source. Reference:
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
