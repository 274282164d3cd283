"""Reference measures of quantile and interval forecasts: interval coverage, pinball loss, the
interval score and its scaled form (docs/measures.md §13–15).

Inputs follow :func:`~accuracy_checks.measures.functions.point.present`: 1-D array-likes of one
length, rows with a NaN dropped, ``nan`` for an undefined value. Rows whose interval is
inverted (``lower > upper``) are an input error and are left out.
"""

from __future__ import annotations

import numpy as np
from numpy.typing import ArrayLike

from accuracy_checks.measures.functions.point import NAN, present
from accuracy_checks.measures.functions.series import scaled

__all__ = ["interval_coverage", "interval_score", "msis", "pinball_loss"]


def _intervals(actual: ArrayLike, lower: ArrayLike,
               upper: ArrayLike) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """(y, lower, upper) over the present rows with ``lower ≤ upper``."""
    y, lo, hi = present(actual=actual, lower=lower, upper=upper)
    keep = lo <= hi
    return y[keep], lo[keep], hi[keep]


def interval_coverage(actual: ArrayLike, lower: ArrayLike, upper: ArrayLike) -> float:
    """Share of actuals inside ``[lower, upper]`` (bounds inclusive), in percent.

    Notes
    -----
    docs/measures.md §13; common practice; the shortfall is tested with
    ``scipy.stats.binomtest(k, n, p=1 − α)`` (Christoffersen 1998).

    Examples
    --------
    >>> interval_coverage([80, 105, 115, 90, 110], [85] * 5, [115] * 5)
    80.0
    """
    y, lo, hi = _intervals(actual, lower, upper)
    if y.size == 0:
        return NAN
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
    y, q = present(actual=actual, quantile=quantile)
    if y.size == 0:
        return NAN
    u = y - q
    return float(np.mean(np.where(u >= 0, tau * u, (tau - 1.0) * u)))


def interval_score(actual: ArrayLike, lower: ArrayLike, upper: ArrayLike, alpha: float) -> float:
    """Mean interval score (MIS) of a central ``(1 − α)`` interval, in data units.

    ``IS = (U − L) + (2/α)(L − y)·1{y < L} + (2/α)(y − U)·1{y > U}``.

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
    y, lo, hi = _intervals(actual, lower, upper)
    if y.size == 0:
        return NAN
    score = (hi - lo) + (2.0 / alpha) * (np.where(y < lo, lo - y, 0.0)
                                         + np.where(y > hi, y - hi, 0.0))
    return float(np.mean(score))


def msis(actual: ArrayLike, lower: ArrayLike, upper: ArrayLike, alpha: float,
         history: ArrayLike, m: int = 1) -> float:
    """Mean scaled interval score of one series: ``MIS / s`` (s of
    :func:`~accuracy_checks.measures.functions.series.mase_scale`).

    Notes
    -----
    docs/measures.md §15; MSIS from the M4 Competition (2020), which used α = 0.05.

    Examples
    --------
    >>> round(msis([80, 105, 115, 90, 110], [85] * 5, [115] * 5, 0.2,
    ...            [95, 105, 100, 90, 120]), 5)
    2.90909
    """
    return scaled(interval_score(actual, lower, upper, alpha), history, m)
