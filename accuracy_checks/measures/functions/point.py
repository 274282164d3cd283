"""Reference point measures of one pooled set of rows (docs/measures.md §1–5, §7–8) and the
cost of error, with the input rule every reference function shares (:func:`present`).

Every function takes ``actual`` and ``forecast`` as 1-D array-likes of one length; rows where
either is NaN are dropped first (``±inf`` is not); ``nan`` means undefined (no row left, a
zero denominator, too few rows). ``e = actual − forecast``: positive = under-forecast.
"""

from __future__ import annotations

from collections.abc import Iterable

import numpy as np
from numpy.typing import ArrayLike

__all__ = [
    "bias_pct",
    "error_cost",
    "mape",
    "mape_nonzero",
    "mean_absolute_error",
    "mean_error",
    "present",
    "rmse",
    "sde",
    "wape",
]

NAN = float("nan")


def present(**arrays: ArrayLike) -> list[np.ndarray]:
    """The named arrays as float64, restricted to the rows where none is NaN.

    Raises ``ValueError`` naming the arrays unless all are 1-D and of one length.

    >>> present(actual=[1, float("nan"), 3], forecast=[1, 2, float("inf")])
    [array([1., 3.]), array([ 1., inf])]
    >>> present(actual=[1, 2], forecast=[1])
    Traceback (most recent call last):
    ...
    ValueError: actual and forecast differ in length: 2 and 1
    """
    out = [np.asarray(a, dtype=np.float64) for a in arrays.values()]
    if any(a.ndim != 1 for a in out):
        raise ValueError(f"{_listed(arrays)} must be 1-D, got shapes "
                         f"{_listed(a.shape for a in out)}")
    if len({a.size for a in out}) > 1:
        raise ValueError(f"{_listed(arrays)} differ in length: {_listed(a.size for a in out)}")
    keep = ~np.logical_or.reduce([np.isnan(a) for a in out])
    return [a[keep] for a in out]


def _listed(items: Iterable[object]) -> str:
    """``a, b and c``."""
    words = [str(item) for item in items]
    return " and ".join([", ".join(words[:-1]), words[-1]] if len(words) > 1 else words)


def _errors(actual: ArrayLike, forecast: ArrayLike) -> tuple[np.ndarray, np.ndarray]:
    """(y, e) over the rows where both are present."""
    y, f = present(actual=actual, forecast=forecast)
    return y, y - f


def _mean(values: np.ndarray) -> float:
    """The mean, ``nan`` for no value."""
    return float(np.mean(values)) if values.size else NAN


def _percent_of(numerator: float, denominator: float) -> float:
    """``100 · numerator / denominator``, ``nan`` for a zero denominator."""
    return float(100.0 * numerator / denominator) if denominator != 0 else NAN


def mean_error(actual: ArrayLike, forecast: ArrayLike) -> float:
    """Mean error (ME) in data units: ``Σe / n``; positive = under-forecast on average.

    ``nan`` when no row is left. docs/measures.md §1; common practice, no source. Reference:
    ``statsmodels.tools.eval_measures.bias(actual, forecast)``.

    >>> mean_error([80, 105, 115, 90, 110], [100, 100, 100, 100, 100])
    0.0
    >>> mean_error([10, 12], [9, 14])
    -0.5
    >>> mean_error([float("nan")], [1.0])
    nan
    """
    return _mean(_errors(actual, forecast)[1])


def bias_pct(actual: ArrayLike, forecast: ArrayLike) -> float:
    """Bias in percent of volume: ``100 · Σe / Σ|y|``; positive = under-forecast.

    Equals ``100 · Σe / Σy`` when no actual is negative. ``nan`` when no row is left or
    ``Σ|y| = 0`` (zero denominator). docs/measures.md §2; common practice, no source.
    Reference: ``100 * statsmodels.tools.eval_measures.bias(y, f) / np.mean(np.abs(y))``.

    >>> bias_pct([200, 200, 200, 200], [100, 300, 100, 100])
    25.0
    >>> bias_pct([0, 0], [1, 2])
    nan
    """
    y, e = _errors(actual, forecast)
    return _percent_of(np.sum(e), np.sum(np.abs(y)))


def mean_absolute_error(actual: ArrayLike, forecast: ArrayLike) -> float:
    """Mean absolute error (MAE, also MAD) in data units: ``Σ|e| / n``.

    ``nan`` when no row is left. docs/measures.md §3; common practice (Brown, 1959, used MAD
    as the noise measure). Reference: ``sklearn.metrics.mean_absolute_error`` =
    ``statsmodels ... meanabs``.

    >>> mean_absolute_error([200, 200, 200, 200], [100, 300, 100, 100])
    100.0
    >>> mean_absolute_error([], [])
    nan
    """
    return _mean(np.abs(_errors(actual, forecast)[1]))


def mape(actual: ArrayLike, forecast: ArrayLike) -> float:
    """Mean absolute percentage error in percent: ``100 · mean(|e| / |y|)``.

    ``nan`` when no row is left or any actual is 0 (``zero_actual``; see
    :func:`mape_nonzero`). For forecasts ≥ 0 an under-forecast costs at most 100 %, an
    over-forecast is unbounded. docs/measures.md §4; common practice, critiqued by Hyndman &
    Koehler (2006). Reference: ``100 * sklearn.metrics.mean_absolute_percentage_error`` only
    when no actual is 0 (sklearn divides by ~2.2e-16 instead).

    >>> mape([200, 200, 200, 200], [100, 300, 100, 100])
    50.0
    >>> mape([0, 4, 0, 1], [1, 2, 0, 0])
    nan
    """
    y, e = _errors(actual, forecast)
    if np.any(y == 0):
        return NAN
    return 100.0 * _mean(np.abs(e) / np.abs(y))


def mape_nonzero(actual: ArrayLike, forecast: ArrayLike) -> float:
    """MAPE in percent over the rows with a nonzero actual: ``100 · mean(|e| / |y|), y ≠ 0``.

    Reported beside :func:`mape` when zero actuals make MAPE undefined; ``nan`` when no row
    with a nonzero actual is left. docs/measures.md §4 (``mape_nonzero``; check value E4 =
    75 %).

    >>> mape_nonzero([0, 4, 0, 1], [1, 2, 0, 0])
    75.0
    >>> mape_nonzero([0, 0], [1, 1])
    nan
    """
    y, e = _errors(actual, forecast)
    nonzero = y != 0
    return 100.0 * _mean(np.abs(e[nonzero]) / np.abs(y[nonzero]))


def wape(actual: ArrayLike, forecast: ArrayLike) -> float:
    """Weighted absolute percentage error in percent: ``100 · Σ|e| / Σ|y|`` (= MAE / mean|y|).

    The recommended headline segment measure: volume-weighted, tolerates zero actuals. ``nan``
    when no row is left or ``Σ|y| = 0`` (zero denominator). docs/measures.md §5; Kolassa &
    Schütz (2007), "Advantages of the MAD/MEAN ratio over the MAPE", Foresight 6:40–43.
    Reference: ``100 * sklearn.metrics.mean_absolute_error(y, f) / np.mean(np.abs(y))``.

    >>> wape([0, 4, 0, 1], [1, 2, 0, 0])
    80.0
    >>> wape([0, 0], [0, 0])
    nan
    """
    y, e = _errors(actual, forecast)
    return _percent_of(np.sum(np.abs(e)), np.sum(np.abs(y)))


def rmse(actual: ArrayLike, forecast: ArrayLike) -> float:
    """Root mean squared error in data units: ``√(Σe² / n)``; ``RMSE² = ME² + (n − 1)/n · SDE²``.

    ``nan`` when no row is left. docs/measures.md §7; common practice, Hyndman & Koehler
    (2006). Reference: ``sklearn.metrics.root_mean_squared_error`` = ``statsmodels ... rmse``.

    >>> rmse([200, 200, 200, 200], [100, 300, 100, 100])
    100.0
    >>> rmse([1.0, float("nan")], [float("nan"), 2.0])
    nan
    """
    e = _errors(actual, forecast)[1]
    return float(np.sqrt(_mean(e * e)))


def sde(actual: ArrayLike, forecast: ArrayLike) -> float:
    """Standard deviation of the errors in data units: ``√(Σ(e − ME)² / (n − 1))`` (ddof = 1).

    Pooled over all rows given, so it includes bias differences between series. ``nan`` when
    fewer than 2 rows are left (``too_few_rows``). docs/measures.md §8; common practice, no
    source. Reference: ``statsmodels.tools.eval_measures.stde(y, f, ddof=1)`` (its default
    ``ddof=0`` is not this) = ``np.std(e, ddof=1)``.

    >>> sde([200, 200, 200, 200], [100, 300, 100, 100])
    100.0
    >>> sde([50], [40])
    nan
    """
    e = _errors(actual, forecast)[1]
    return float(np.std(e, ddof=1)) if e.size >= 2 else NAN


def error_cost(actual: ArrayLike, forecast: ArrayLike, under: float, over: float) -> float:
    """Money lost to forecast errors: ``Σ under·max(e, 0) + over·max(−e, 0)``.

    ``under``: money per unit under-forecast (``e > 0``); ``over``: per unit over-forecast.
    Equals ``(under + over) · n · pinball_loss(y, f, τ*)`` with ``τ* = under / (under + over)``.

    >>> error_cost([10, 10], [8, 13], under=5.0, over=1.0)
    13.0
    """
    if not (under > 0 and over > 0):
        raise ValueError(f"unit costs must be > 0; got under={under}, over={over}")
    e = _errors(actual, forecast)[1]
    return float(np.sum(under * np.maximum(e, 0.0) + over * np.maximum(-e, 0.0)))
