"""The actuals history, addressable by (series, grid period): the join, the naive baselines and
the in-sample scales of MASE and MSIS, each in one vectorised pass.

:class:`ActualsIndex` numbers the series of the actuals (``0 … n_series − 1``) and places every
actual at its integer position on the period grid (:mod:`accuracy_checks.evaluation.grid`). Lookups
are then integer arithmetic:

- ``values_at(series, position)``: the actual of a series in a period (NaN if absent);
- ``last_value_before(series, position)``: the last non-missing actual at or before a period
  (the naive forecast);
- ``scales(m, before)``: per series, ``s = mean |y_t − y_{t−m}|`` over the periods before
  ``before`` where both actuals exist (docs/measures.md §9).

Storage is a dense ``periods × series`` matrix when the actuals fill most of it (a retailer's
weekly history: no sort, one scatter; time-major, so a period's actuals are contiguous), else
the sorted ``(series, period)`` keys with binary search. Both give the same answers. Only
actuals dated exactly on the grid are indexed; a row dated off the grid matches nothing (the
join of :mod:`accuracy_checks.evaluation.join` then falls back to an exact-date join for those
rows).

What is "known at a cycle's issue date" ``d``: the actuals of periods dated before ``d``. On the
grid these are the positions up to ``known_through(d) = ceil_position(d) − 1``.
"""

from __future__ import annotations

from collections.abc import Sequence

import numpy as np
import pandas as pd
from pandas.tseries.frequencies import to_offset

from accuracy_checks.evaluation.grid import grid_positions
from accuracy_checks.sources import frames as F

__all__ = [
    "ActualsIndex",
    "default_seasonal_period",
    "known_through",
    "naive_forecast",
    "seasonal_naive_forecast",
]

#: Dense storage is used while the matrix has at most this many cells per indexed actual.
_DENSE_CELLS_PER_ROW = 3
_DENSE_MIN_CELLS = 1 << 22
#: Cells per block when a dense pass runs over the matrix (bounds temporary memory).
_BLOCK_CELLS = 1 << 23


def default_seasonal_period(frequency: str) -> int:
    """The seasonal period m for a pandas frequency: 52 weekly, 12 monthly, 4 quarterly,
    7 daily, 24 hourly, 1 otherwise (and for multiples such as ``2W``).

    M4 used 12 monthly, 4 quarterly, 24 hourly and 1 otherwise (docs/measures.md §9); 52 weekly and
    7 daily are this project's choices (a year of weeks, a week of days).

    >>> [default_seasonal_period(f) for f in ("W-MON", "MS", "ME", "QS", "D", "h", "YS", "2W")]
    [52, 12, 12, 4, 7, 24, 1, 1]
    """
    offset = to_offset(frequency)
    if offset.n != 1:
        return 1
    off = pd.offsets
    table: tuple[tuple[tuple[type, ...], int], ...] = (
        ((off.Week,), 52),
        ((off.MonthBegin, off.MonthEnd, off.BusinessMonthBegin, off.BusinessMonthEnd), 12),
        ((off.QuarterBegin, off.QuarterEnd, off.BQuarterBegin, off.BQuarterEnd), 4),
        ((off.Day,), 7),
        ((off.Hour,), 24),
    )
    for kinds, period in table:
        if isinstance(offset, kinds):
            return period
    return 1


def known_through(issued: pd.Series | Sequence[pd.Timestamp], frequency: str) -> np.ndarray:
    """The last grid position whose period is dated before each issue date.

    ``ceil_position(d) − 1``: for ``d`` on the grid that is the period before ``d``; for ``d``
    between grid dates, the grid date just before it. Computed on the distinct dates only.

    >>> d = pd.Series(pd.to_datetime(["2026-01-12", "2026-01-14"]))
    >>> k = known_through(d, "W-MON")
    >>> int(k[1] - k[0])
    1
    """
    series = pd.Series(issued)
    codes, uniques = pd.factorize(series, sort=False)
    if len(uniques) == 0:
        return np.zeros(len(series), dtype=np.int64)
    pos, _ = grid_positions(pd.Series(uniques), frequency)
    return (pos - 1)[codes]


def row_positions(actuals: pd.DataFrame, frequency: str) -> tuple[np.ndarray, np.ndarray]:
    """Grid position of each row's period and whether it is on the grid (computed on the
    distinct periods only: a history repeats each period per series)."""
    period_codes, periods = pd.factorize(actuals[F.PERIOD])
    upos, uon = grid_positions(pd.Series(periods), frequency)
    upos = np.append(upos, 0)  # code −1 (a missing period) → position 0, off the grid
    uon = np.append(np.asarray(uon, dtype=bool), False)
    return upos[period_codes], uon[period_codes]


class ActualsIndex:
    """Actuals by (series code, grid position). See the module doc.

    Parameters
    ----------
    actuals : DataFrame
        The canonical actuals frame: key columns, ``period``, ``actual``.
    keys : list of str
        The key columns (categorical or not).
    frequency : str
        The period grid.

    Examples
    --------
    >>> a = pd.DataFrame({"sku": ["a"] * 5 + ["b"] * 2,
    ...                   "period": pd.to_datetime(["2026-01-05", "2026-01-12", "2026-01-19",
    ...                                             "2026-01-26", "2026-02-02",
    ...                                             "2026-01-05", "2026-01-12"]),
    ...                   "actual": [95.0, 105, 100, 90, 120, 1, float("nan")]})
    >>> index = ActualsIndex(a, ["sku"], "W-MON")
    >>> codes = index.codes_of(pd.DataFrame({"sku": ["b", "a", "zz"]}))
    >>> codes.tolist()
    [1, 0, -1]
    >>> pos = index.positions(pd.Series(pd.to_datetime(["2026-01-12"] * 3)))
    >>> index.values_at(codes, pos).tolist()
    [nan, 105.0, nan]
    >>> index.last_value_before(codes, pos).tolist()
    [1.0, 105.0, nan]
    >>> scale, pairs = index.scales(1, before=int(pos[0]) + 4)
    >>> scale.tolist(), pairs.tolist()
    ([13.75, nan], [4, 0])
    """

    def __init__(self, actuals: pd.DataFrame, keys: Sequence[str], frequency: str) -> None:
        self.keys = list(keys)
        self.frequency = frequency
        self._levels: list[pd.Index] = []
        self._categorical: list[pd.CategoricalDtype | None] = []
        radix = []
        comb = np.zeros(len(actuals), dtype=np.int64)
        valid = np.ones(len(actuals), dtype=bool)
        for name in self.keys:
            column = actuals[name]
            if isinstance(column.dtype, pd.CategoricalDtype):
                codes = column.cat.codes.to_numpy().astype(np.int64)
                level = pd.Index(column.cat.categories)
                self._categorical.append(column.dtype)
            else:
                raw, uniques = pd.factorize(column)
                codes = raw.astype(np.int64, copy=False)
                level = pd.Index(uniques)
                self._categorical.append(None)
            self._levels.append(level)
            size = max(len(level), 1)
            radix.append(size)
            valid &= codes >= 0
            comb = comb * size + np.maximum(codes, 0)
        self._radix = radix
        pos, on_grid = row_positions(actuals, frequency)
        valid &= on_grid
        comb = comb[valid]
        pos = pos[valid]
        values = actuals[F.ACTUAL].to_numpy(dtype=np.float64, na_value=np.nan)[valid]
        series = self._number_series(comb, comb.size)
        p0 = int(pos.min()) if pos.size else 0
        span = int(pos.max()) - p0 + 1 if pos.size else 1
        self._store(series, pos - p0, values, p0, span, comb.size)

    def _number_series(self, comb: np.ndarray, rows: int) -> np.ndarray:
        """Series codes ``0 … S−1`` of the key combinations ``comb`` (in key-code order, so in
        the levels' order); sets ``n_series`` and the lookup of :meth:`codes_of`."""
        cells = float(np.prod(np.array(self._radix, dtype=np.float64))) if self._radix else 1.0
        if cells <= max(4 * rows, 1 << 22):
            present = np.bincount(comb, minlength=int(cells)) > 0
            self._table: np.ndarray | None = np.full(int(cells), -1, dtype=np.int64)
            observed = np.flatnonzero(present)
            self._table[observed] = np.arange(observed.size, dtype=np.int64)
            self._uniques: pd.Index | None = None
            self.n_series = int(observed.size)
            return self._table[comb]
        self._table = None
        raw, uniques = pd.factorize(comb, sort=True)
        self._uniques = pd.Index(uniques)
        self.n_series = len(uniques)
        return raw.astype(np.int64, copy=False)

    def _store(self, series: np.ndarray, col: np.ndarray, values: np.ndarray, p0: int,
               span: int, rows: int) -> None:
        """Keep the actuals (``col`` = position − ``p0``): the dense matrix or sorted keys."""
        self.p0, self.span = p0, span
        self._dense = self.n_series * self.span <= max(
            _DENSE_CELLS_PER_ROW * rows, _DENSE_MIN_CELLS
        )
        if self._dense:  # time-major: a period's actuals are contiguous
            self._matrix = np.full((self.span, max(self.n_series, 1)), np.nan)
            self._matrix[col, series] = values
        else:
            self._set_keys(series * self.span + col, values)

    def _set_keys(self, key: np.ndarray, values: np.ndarray) -> None:
        order = np.argsort(key, kind="stable")
        self._keys = key[order]
        self._values = values[order]
        ok = ~np.isnan(self._values)
        self._vkeys = self._keys[ok]
        self._vvalues = self._values[ok]

    @classmethod
    def from_parts(cls, keys: Sequence[str], frequency: str, levels: Sequence[pd.Index],
                   codes: Sequence[np.ndarray], *, p0: int, span: int,
                   matrix: np.ndarray | None = None,
                   cells: tuple[np.ndarray, np.ndarray, np.ndarray] | None = None
                   ) -> ActualsIndex:
        """An index from actuals already reduced (:mod:`accuracy_checks.sources.history`):
        the same answers as the index of every row.

        ``levels`` are the sorted distinct values of each key column; ``codes[k][j]`` the
        level code of key ``k`` of the ``j``-th series, in any order, each series once.
        Either ``matrix`` (``span × n`` actuals, column ``j`` for series ``j``, row ``t`` for
        grid position ``p0 + t``; NaN where none; its columns are reordered in place) or
        ``cells`` = (series ``j``, row ``t``, actual) of the non-missing actuals.
        """
        self = cls.__new__(cls)
        self.keys, self.frequency = list(keys), frequency
        self._levels = list(levels)
        self._categorical = [None] * len(self._levels)
        self._radix = [max(len(level), 1) for level in self._levels]
        comb = np.zeros(codes[0].size if len(codes) else 0, dtype=np.int64)
        for code, size in zip(codes, self._radix, strict=True):
            comb = comb * size + code
        final = self._number_series(comb, comb.size)  # key order: the index of every row's
        self.p0, self.span = p0, span
        self._dense = matrix is not None
        if matrix is not None:
            order = np.argsort(final)
            for t in range(matrix.shape[0]):  # one period at a time: no second matrix
                matrix[t, : order.size] = matrix[t, order]
            self._matrix = matrix[:, : max(order.size, 1)]
        else:
            assert cells is not None
            series, col, values = cells
            self._set_keys(final[series] * span + col, values)
        return self

    # ------------------------------------------------------------------ addressing

    def codes_of(self, frame: pd.DataFrame) -> np.ndarray:
        """The series code of each row of ``frame`` (its key columns); ``-1`` for a series the
        actuals do not hold."""
        comb = np.zeros(len(frame), dtype=np.int64)
        known = np.ones(len(frame), dtype=bool)
        for name, level, dtype, size in zip(
            self.keys, self._levels, self._categorical, self._radix, strict=True
        ):
            column = frame[name]
            if isinstance(column.dtype, pd.CategoricalDtype):
                cat_codes = column.cat.codes.to_numpy().astype(np.int64)
                if dtype is not None and column.dtype.categories.equals(dtype.categories):
                    codes = cat_codes
                else:
                    mapping = level.get_indexer(column.cat.categories)
                    codes = np.where(cat_codes >= 0, mapping[np.maximum(cat_codes, 0)], -1)
            else:
                codes = level.get_indexer(column)
            known &= codes >= 0
            comb = comb * size + np.maximum(codes, 0)
        if self._table is not None:
            out = np.where(known, self._table[comb], -1)
        else:
            assert self._uniques is not None
            out = np.where(known, self._uniques.get_indexer(comb), -1)
        return out.astype(np.int64, copy=False)

    def positions(self, dates: pd.Series) -> np.ndarray:
        """Grid positions of ``dates``; ``-2**62`` where a date is off the grid or missing."""
        pos, on_grid = grid_positions(dates, self.frequency)
        ok = np.asarray(on_grid, dtype=bool) & pd.Series(dates).notna().to_numpy()
        return np.where(ok, pos, -(1 << 62))

    def _cells(self, series: np.ndarray, pos: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        col = pos - self.p0
        ok = (series >= 0) & (col >= 0) & (col < self.span)
        return ok, np.where(ok, col, 0)

    def values_at(self, series: np.ndarray, pos: np.ndarray) -> np.ndarray:
        """The actual at (series, position) for each pair; NaN where there is none."""
        ok, col = self._cells(series, pos)
        out = np.full(series.shape, np.nan)
        if self._dense:
            out[ok] = self._matrix[col[ok], series[ok]]
            return out
        key = series[ok] * self.span + col[ok]
        at = np.searchsorted(self._keys, key)
        at_c = np.minimum(at, max(self._keys.size - 1, 0))
        hit = (at < self._keys.size) & (self._keys[at_c] == key) if self._keys.size else (
            np.zeros(key.shape, dtype=bool))
        found = np.full(key.shape, np.nan)
        found[hit] = self._values[at_c[hit]]
        out[ok] = found
        return out

    def last_value_before(self, series: np.ndarray, pos: np.ndarray) -> np.ndarray:
        """The last non-missing actual of each series at a position ``≤ pos``; NaN if none."""
        col = np.clip(pos - self.p0, -1, self.span - 1)
        ok = (series >= 0) & (col >= 0)
        out = np.full(series.shape, np.nan)
        if self._dense:  # step back one period at a time, only for the rows still missing
            at = np.flatnonzero(ok)
            c, s = col[at], series[at]
            while at.size:
                value = self._matrix[c, s]
                hit = ~np.isnan(value)
                out[at[hit]] = value[hit]
                more = ~hit & (c > 0)
                at, c, s = at[more], c[more] - 1, s[more]
            return out
        if self._vkeys.size == 0:
            return out
        key = series[ok] * self.span + col[ok]
        at = np.searchsorted(self._vkeys, key, side="right") - 1
        at_c = np.maximum(at, 0)
        hit = (at >= 0) & (self._vkeys[at_c] // self.span == series[ok])
        found = np.full(key.shape, np.nan)
        found[hit] = self._vvalues[at_c[hit]]
        out[ok] = found
        return out

    def _blocks(self) -> list[tuple[int, int]]:
        """Blocks of series (matrix columns) of about ``_BLOCK_CELLS`` cells."""
        columns = max(self._matrix.shape[1], 1)
        step = max(1, _BLOCK_CELLS // max(self.span, 1))
        return [(s, min(s + step, columns)) for s in range(0, columns, step)]

    # ------------------------------------------------------------------ scales

    def scales(self, m: int, before: int) -> tuple[np.ndarray, np.ndarray]:
        """Per series: ``s = mean |y_t − y_{t−m}|`` over the pairs of non-missing actuals with
        both positions ``< before``, and the number of pairs (0: ``s`` is NaN).

        With a gap-free history of N periods there are N − m pairs: docs/measures.md §9's
        ``Σ_{t=m+1..N} |y_t − y_{t−m}| / (N − m)``.
        """
        if m < 1:
            raise ValueError(f"the seasonal period must be at least 1; got {m}")
        total: np.ndarray = np.zeros(self.n_series)
        pairs: np.ndarray = np.zeros(self.n_series, dtype=np.int64)
        stop_col = min(before - self.p0, self.span)
        if self.n_series and stop_col > m:
            if self._dense:
                for start, stop in self._blocks():
                    block = self._matrix[:stop_col, start:stop]
                    diff = np.abs(block[m:] - block[:-m])
                    ok = ~np.isnan(diff)
                    total[start:stop] = np.where(ok, diff, 0.0).sum(axis=0)
                    pairs[start:stop] = ok.sum(axis=0)
            else:
                col = self._vkeys % self.span
                use = (col < stop_col) & (col >= m)
                key = self._vkeys[use]
                at = np.searchsorted(self._vkeys, key - m)
                at_c = np.minimum(at, self._vkeys.size - 1)
                hit = (at < self._vkeys.size) & (self._vkeys[at_c] == key - m)
                diff = np.abs(self._vvalues[use][hit] - self._vvalues[at_c[hit]])
                series = key[hit] // self.span
                total = np.bincount(series, weights=diff, minlength=self.n_series)
                pairs = np.bincount(series, minlength=self.n_series).astype(np.int64)
        scale = np.full(self.n_series, np.nan)
        np.divide(total, pairs, out=scale, where=pairs > 0)
        return scale, pairs


def naive_forecast(index: ActualsIndex, series: np.ndarray, known: np.ndarray) -> np.ndarray:
    """The naive baseline of each row: the last actual known at its cycle's issue date.

    ``known`` is :func:`known_through` of the row's issue date (docs/measures.md §12).
    """
    return index.last_value_before(series, known)


def seasonal_naive_forecast(index: ActualsIndex, series: np.ndarray, target: np.ndarray,
                            known: np.ndarray, m: int) -> np.ndarray:
    """The seasonal naive baseline: the last ``m`` actuals known at the issue date, repeated.

    For a target position ``t`` and last known position ``K``, the value at
    ``t − m·⌈(t − K)/m⌉`` (the same season in the last known cycle of ``m`` periods); NaN when
    that actual is missing (docs/measures.md §12).
    """
    steps = np.maximum((target - known + m - 1) // m, 1)
    return index.values_at(series, target - m * steps)
