"""Mergeable grouped sufficient statistics of forecast errors: the hot path of every measure.

:func:`error_stats` reduces a frame of ``actual``/``forecast`` rows to one row of counts and sums
per group (segment × lag …). Every accuracy measure of the registry is a vectorised formula on
those rows, so the per-row work happens once, whatever the number of measures.

Conventions (docs/measures.md): ``e = actual − forecast`` (positive = under-forecast); a row where
the actual or the forecast is NaN is dropped and counted in ``n_dropped``; ``±inf`` is *not*
dropped (it propagates to ``inf``/NaN sums; the evaluation frame turns every infinite input
into NaN before, and the checks name those rows). Rows whose group key is missing belong to no
group.

Overflow: the sums are plain float64 sums, so that every figure is bit-identical to the
straightforward computation. With finite inputs a sum can still overflow (one forecast of
1e308, or ``e²`` of an error beyond ~1.3e154): it then becomes ``±inf`` or NaN, never a finite
wrong number. :func:`overflowed` finds those groups with one ``np.isfinite`` pass over the
reduced statistics (not the rows); :mod:`accuracy_checks.checks.accuracy` judges their figures as
beyond any level (reason ``overflow``) instead of reporting them as missing data. ``Σe²`` is the
most sensitive of the sums, so any error large enough to make another sum overflow makes it
overflow too.

Statistics (per group; ``y`` = actual, sums over the ``n`` rows used):

=================  ====================================================================
``n``              rows with both actual and forecast present (int)
``n_dropped``      rows with a NaN actual or forecast (int)
``sum_e``          Σe
``sum_abs_e``      Σ|e|
``sum_sq_e``       Σe²
``mean_e``         Σe/n (NaN when n = 0), refined by the centred pass
``m2_e``           Σ(e − mean_e)², from a centred second pass (never Σe² − (Σe)²/n)
``sum_abs_y``      Σ|y|
``sum_ape``        Σ|e|/|y| over the rows with y ≠ 0 (a fraction, not percent)
``n_zero_y``       rows with y = 0 (int)
``n_negative_y``   rows with y < 0 (int)
=================  ====================================================================

Merging (:func:`merge_stats`, :func:`total_stats`): counts and sums add; ``mean_e``/``m2_e``
combine with the parallel formula of Chan, Golub & LeVeque (1979), in its k-way form
``m2 = Σ m2_i + Σ n_i (mean_i − mean)²`` with a centred correction, so a partitioned computation
(Dask) equals the one-shot one to rounding.
"""

from __future__ import annotations

from collections.abc import Callable, Sequence

import numpy as np
import pandas as pd

__all__ = ["STAT_COLUMNS", "error_stats", "merge_stats", "overflowed", "stats_from_codes",
           "total_stats"]

#: Columns that :func:`error_stats` returns besides the group columns, in this order.
STAT_COLUMNS: tuple[str, ...] = (
    "n",
    "n_dropped",
    "sum_e",
    "sum_abs_e",
    "sum_sq_e",
    "mean_e",
    "m2_e",
    "sum_abs_y",
    "sum_ape",
    "n_zero_y",
    "n_negative_y",
)
_COUNT_COLUMNS: tuple[str, ...] = ("n", "n_dropped", "n_zero_y", "n_negative_y")
_SUM_COLUMNS: tuple[str, ...] = ("sum_e", "sum_abs_e", "sum_sq_e", "sum_abs_y", "sum_ape")

FloatArray = np.ndarray
GroupSum = Callable[[FloatArray], FloatArray]


def error_stats(
    frame: pd.DataFrame,
    by: Sequence[str],
    *,
    actual: str = "actual",
    forecast: str = "forecast",
) -> pd.DataFrame:
    """Sufficient statistics of ``e = actual − forecast`` per group of ``by``.

    Parameters
    ----------
    frame : DataFrame
        One row per (series, period, …) with numeric ``actual`` and ``forecast`` columns.
    by : list of str
        Group columns. Observed groups only, sorted by key; rows with a missing key are left
        out. ``[]`` gives one group of all rows (none if ``frame`` is empty).
    actual, forecast : str
        Names of the value columns.

    Returns
    -------
    DataFrame
        One row per group (a ``RangeIndex``): the ``by`` columns, then :data:`STAT_COLUMNS`.
        A group whose rows were all dropped has ``n = 0``, ``mean_e`` NaN and ``m2_e`` 0.

    Examples
    --------
    >>> frame = pd.DataFrame({"segment": ["a", "a", "b"], "actual": [10.0, 0.0, 5.0],
    ...                       "forecast": [8.0, 1.0, float("nan")]})
    >>> stats = error_stats(frame, ["segment"])
    >>> stats[["segment", "n", "n_dropped", "sum_e", "sum_ape", "n_zero_y"]]
      segment  n  n_dropped  sum_e  sum_ape  n_zero_y
    0       a  2          0    1.0      0.2         1
    1       b  0          1    0.0      0.0         0
    """
    by = _check_by(frame, by, "frame")
    missing = [c for c in (actual, forecast) if c not in frame.columns]
    if missing:
        raise KeyError(
            f"error_stats: column(s) {missing} not in the frame; it has {list(frame.columns)}"
        )
    codes, keys = _group_codes(frame, by)
    y = frame[actual].to_numpy(dtype=np.float64, na_value=np.nan)
    f = frame[forecast].to_numpy(dtype=np.float64, na_value=np.nan)
    out = stats_from_codes(codes, len(keys), y, f)
    return pd.concat([keys.reset_index(drop=True), out], axis=1) if by else out


def stats_from_codes(codes: np.ndarray, n_groups: int, y: FloatArray,
                     f: FloatArray) -> pd.DataFrame:
    """:data:`STAT_COLUMNS` per group from per-row group codes (``-1``: no group).

    The engine of :func:`error_stats` for callers that already hold integer group codes
    (``0 … n_groups − 1``); one row per group, in code order, with a ``RangeIndex``.

    >>> stats_from_codes(np.array([0, 0, 1]), 2, np.array([3.0, 1.0, 2.0]),
    ...                  np.array([1.0, 1.0, np.nan]))[["n", "n_dropped", "sum_e", "m2_e"]]
       n  n_dropped  sum_e  m2_e
    0  2          0    2.0   2.0
    1  0          1    0.0   0.0
    """
    if codes.size and codes.min() < 0:  # rows with a missing group key belong to no group
        inside = codes >= 0
        codes, y, f = codes[inside], y[inside], f[inside]

    def gsum(weights: FloatArray) -> FloatArray:
        return np.bincount(codes, weights=weights, minlength=n_groups)

    with np.errstate(invalid="ignore", over="ignore"):  # ±inf inputs propagate without warnings
        valid = ~(np.isnan(y) | np.isnan(f))
        n_rows = np.bincount(codes, minlength=n_groups).astype(np.int64)
        n = _as_count(gsum(valid))
        e = np.where(valid, y - f, 0.0)
        sum_e = gsum(e)
        abs_e = np.abs(e)
        sum_abs_e = gsum(abs_e)
        sum_sq_e = gsum(abs_e * abs_e)
        abs_y = np.where(valid, np.abs(y), 0.0)
        sum_abs_y = gsum(abs_y)
        nonzero = valid & (abs_y != 0.0)
        n_zero_y = n - _as_count(gsum(nonzero))
        n_negative_y = _as_count(gsum(valid & (y < 0.0)))
        ape = np.divide(abs_e, abs_y, out=np.zeros_like(abs_e), where=nonzero)
        sum_ape = gsum(ape)
        del abs_e, abs_y, ape, nonzero
        # Centred pass: each used row is a part with n_i = 1, mean_i = e, m2_i = 0.
        mean_e, m2_e = _centred(codes, n, valid.astype(np.float64), e, sum_e, None, gsum)

    return pd.DataFrame({
        "n": n,
        "n_dropped": n_rows - n,
        "sum_e": sum_e,
        "sum_abs_e": sum_abs_e,
        "sum_sq_e": sum_sq_e,
        "mean_e": mean_e,
        "m2_e": m2_e,
        "sum_abs_y": sum_abs_y,
        "sum_ape": sum_ape,
        "n_zero_y": n_zero_y,
        "n_negative_y": n_negative_y,
    })


def merge_stats(parts: Sequence[pd.DataFrame], by: Sequence[str]) -> pd.DataFrame:
    """Combine the statistics of the same groups computed on several partitions of the rows.

    Counts and sums add; ``mean_e``/``m2_e`` combine with the parallel (Chan et al.) formula.
    ``merge_stats([error_stats(p, by) for p in partitions], by)`` equals
    ``error_stats(pd.concat(partitions), by)`` up to rounding (~1e-12 relative).

    Examples
    --------
    >>> frame = pd.DataFrame({"lag": [1, 1, 1, 2], "actual": [3.0, 5.0, 7.0, 2.0],
    ...                       "forecast": [2.0, 2.0, 2.0, 2.0]})
    >>> parts = [error_stats(frame.iloc[:2], ["lag"]), error_stats(frame.iloc[2:], ["lag"])]
    >>> merged = merge_stats(parts, ["lag"])
    >>> merged[["lag", "n", "sum_e", "mean_e", "m2_e"]]
       lag  n  sum_e  mean_e  m2_e
    0    1  3    9.0     3.0   8.0
    1    2  1    0.0     0.0   0.0
    """
    by = list(by)
    kept = [p for p in parts if len(p)]
    if not kept:
        if parts:
            return parts[0].loc[:, [*by, *STAT_COLUMNS]].reset_index(drop=True)
        return pd.DataFrame(
            {
                c: pd.Series(dtype=np.int64 if c in _COUNT_COLUMNS else np.float64)
                for c in (*by, *STAT_COLUMNS)
            }
        )
    stacked = kept[0] if len(kept) == 1 else pd.concat(kept, ignore_index=True)
    return total_stats(stacked, by)


def total_stats(stats: pd.DataFrame, by: Sequence[str]) -> pd.DataFrame:
    """Re-aggregate a statistics frame to coarser groups (``by`` ⊆ its group columns).

    Uses the merge rule of :func:`merge_stats`: e.g. ``total_stats(stats, ["lag"])`` on stats by
    ``["lag", "segment"]`` gives the statistics of all segments together (segment ``"*"``);
    ``by=[]`` gives one row over everything.

    Examples
    --------
    >>> frame = pd.DataFrame({"lag": [1, 1, 1], "segment": ["a", "b", "b"],
    ...                       "actual": [1.0, 4.0, 7.0], "forecast": [0.0, 0.0, 0.0]})
    >>> fine = error_stats(frame, ["lag", "segment"])
    >>> total_stats(fine, ["lag"])[["lag", "n", "mean_e", "m2_e"]]
       lag  n  mean_e  m2_e
    0    1  3     4.0  18.0
    """
    by = _check_by(stats, by, "stats")
    missing = [c for c in STAT_COLUMNS if c not in stats.columns]
    if missing:
        raise KeyError(f"total_stats: not a statistics frame, it lacks {missing}")
    codes, keys = _group_codes(stats, by)
    n_groups = len(keys)

    def gsum(weights: FloatArray) -> FloatArray:
        return np.bincount(codes, weights=weights, minlength=n_groups)

    out = keys
    with np.errstate(invalid="ignore", over="ignore"):
        for column in STAT_COLUMNS:
            values = stats[column].to_numpy(dtype=np.float64)
            if column in _COUNT_COLUMNS:
                out[column] = _as_count(gsum(values))
            elif column in _SUM_COLUMNS:
                out[column] = gsum(values)
        n_i = stats["n"].to_numpy(dtype=np.float64)
        mean_i = np.where(n_i > 0, stats["mean_e"].to_numpy(dtype=np.float64), 0.0)
        m2_i = stats["m2_e"].to_numpy(dtype=np.float64)
        n = out["n"].to_numpy()
        mean_e, m2_e = _centred(codes, n, n_i, mean_i, gsum(n_i * mean_i), gsum(m2_i), gsum)
    out["mean_e"] = mean_e
    out["m2_e"] = m2_e
    return out.loc[:, [*by, *STAT_COLUMNS]]


def overflowed(stats: pd.DataFrame) -> np.ndarray:
    """Per group: whether a sum or moment is not finite although the group has rows (``n > 0``).

    With finite inputs (the evaluation frame's), that is an overflow of the float64 range. One
    ``np.isfinite`` pass over the groups' statistics.

    >>> frame = pd.DataFrame({"g": ["a", "a", "b"], "actual": [1.0, 1.0, 1.0],
    ...                       "forecast": [1e308, 1e308, 2.0]})
    >>> overflowed(error_stats(frame, ["g"])).tolist()
    [True, False]
    """
    columns = [*_SUM_COLUMNS, "mean_e", "m2_e"]
    values = stats.loc[:, columns].to_numpy(dtype=np.float64)
    has_rows = stats["n"].to_numpy() > 0
    return has_rows & ~np.isfinite(values).all(axis=1)


def _centred(
    codes: np.ndarray,
    n: np.ndarray,
    weight: FloatArray,
    mean_i: FloatArray,
    weighted_sum: FloatArray,
    m2_within: FloatArray | None,
    gsum: GroupSum,
) -> tuple[FloatArray, FloatArray]:
    """Group mean and centred sum of squares of parts (n_i, mean_i[, m2_i]) → (mean, m2).

    ``mean0 = Σ n_i mean_i / n`` is a first estimate; with ``d_i = mean_i − mean0``:
    ``m2 = Σ m2_i + Σ n_i d_i² − (Σ n_i d_i)² / n`` and ``mean = mean0 + Σ n_i d_i / n``
    (the corrected two-pass algorithm: the last term removes the rounding error of ``mean0``).
    Rows are single parts (``n_i`` = 0 or 1, ``m2_i`` = 0) in :func:`error_stats`.
    """
    has = n > 0
    n_safe = np.where(has, n, 1).astype(np.float64)
    mean0 = np.where(has, weighted_sum / n_safe, 0.0)
    d = np.where(weight > 0, mean_i - mean0[codes], 0.0)
    wd = weight * d
    s1 = gsum(wd)
    s2 = gsum(wd * d)
    m2 = s2 - s1 * s1 / n_safe
    if m2_within is not None:
        m2 = m2 + m2_within
    m2 = np.where(has, np.maximum(m2, 0.0), 0.0)
    mean = np.where(has, mean0 + s1 / n_safe, np.nan)
    return mean, m2


def _check_by(frame: pd.DataFrame, by: Sequence[str], what: str) -> list[str]:
    if isinstance(by, str):
        raise TypeError(f"by must be a list of column names, got the string {by!r}")
    by = list(by)
    missing = [c for c in by if c not in frame.columns]
    if missing:
        raise KeyError(f"group column(s) {missing} not in the {what}; it has {list(frame.columns)}")
    clash = [c for c in by if c in STAT_COLUMNS]
    if clash:
        raise ValueError(f"group column(s) {clash} clash with statistics columns {STAT_COLUMNS}")
    return by


def _group_codes(frame: pd.DataFrame, by: list[str]) -> tuple[np.ndarray, pd.DataFrame]:
    """Group number of each row (−1: no group) and the sorted observed keys as a frame.

    Same groups and order as ``frame.groupby(by, observed=True, sort=True)``. Each key column
    is factorised (sorted; categoricals use their codes and category order), the codes are
    combined in mixed radix and compressed to the observed combinations with one ``bincount``.
    When the product of the key cardinalities is too large for that, pandas groups instead.
    """
    rows = len(frame)
    if not by:
        return np.zeros(rows, dtype=np.intp), pd.DataFrame(index=pd.RangeIndex(1 if rows else 0))
    codes_of: list[np.ndarray] = []
    levels: list[pd.Index] = []
    for column in by:
        series = frame[column]
        if isinstance(series.dtype, pd.CategoricalDtype):
            codes_of.append(series.cat.codes.to_numpy().astype(np.int64))
            levels.append(pd.CategoricalIndex(series.cat.categories, dtype=series.dtype))
        else:
            column_codes, uniques = pd.factorize(series, sort=True)
            codes_of.append(column_codes.astype(np.int64, copy=False))
            levels.append(uniques)
    shape = tuple(max(len(level), 1) for level in levels)
    cells = int(np.prod(shape, dtype=np.float64))
    if cells > min(4 * rows + 1024, 1 << 26):
        return _group_codes_pandas(frame, by)
    combined = np.ravel_multi_index(tuple(np.maximum(c, 0) for c in codes_of), shape)
    missing = np.zeros(rows, dtype=bool)
    for column_codes in codes_of:
        missing |= column_codes < 0
    if missing.any():  # rows with a missing key go to an extra cell that is no group
        combined[missing] = cells
    counts = np.bincount(combined, minlength=cells + 1)[:cells]
    present = np.flatnonzero(counts)
    lookup = np.full(cells + 1, -1, dtype=np.intp)
    lookup[present] = np.arange(present.size, dtype=np.intp)
    key_codes = np.unravel_index(present, shape)
    keys = pd.DataFrame(
        {column: level.take(kc) for column, level, kc in zip(by, levels, key_codes, strict=True)}
    )
    return lookup[combined], keys


def _group_codes_pandas(frame: pd.DataFrame, by: list[str]) -> tuple[np.ndarray, pd.DataFrame]:
    grouped = frame.groupby(by, observed=True, sort=True)
    keys = grouped.size().index.to_frame(index=False)
    raw = grouped.ngroup().to_numpy()
    if raw.dtype.kind == "f":  # NaN for rows with a missing key
        codes = np.where(np.isnan(raw), -1, raw).astype(np.intp)
    else:
        codes = raw.astype(np.intp, copy=False)
    return codes, keys


def _as_count(values: FloatArray) -> np.ndarray:
    """Float sums of 0/1 weights (exact below 2**53) → int64 counts."""
    return np.rint(values).astype(np.int64)
