"""The whole actuals history, for the measures that need it, without holding its rows.

MASE's scale, the naive baselines and the tracking window read actuals far older than the
periods the checks use as rows. :func:`read_reduced` reads Parquet actuals a few periods at a
time through the actuals reader (:func:`~accuracy_checks.sources.readers.read_actuals`, the
same converters and refusals), reduces each chunk to its cells of the ``periods × series``
matrix of an :class:`~accuracy_checks.evaluation.baselines.ActualsIndex` (8 bytes a cell, no
key columns) and drops it; only the last ``keep`` periods stay as rows. The index answers
exactly as one built from every row (the same series codes, the same actuals), so no figure
moves.

Whenever the rows left out could matter elsewhere, it gives up (``None``) and the caller reads
every row as before: an older row whose actual is infinite or missing (the
``actuals.invalid_values`` check names such rows), a row the chunks did not cover (a period
whose every actual is empty, a missing date: counted against the files' row count), a series
with a missing key or without an on-grid row, any refusal of the reader (so its message names
the whole file). Only local Parquet files are reduced (their row count and each row group's
periods are in the metadata), and only when their row groups keep periods apart (a file sorted
or partitioned by period: reading a chunk opens only its row groups); else every row is read
once, as before.
"""

from __future__ import annotations

import json
import time
from dataclasses import dataclass
from pathlib import Path

import numpy as np
import pandas as pd

from accuracy_checks.config import Config, Place, SqlSource
from accuracy_checks.errors import InputError
from accuracy_checks.evaluation import baselines
from accuracy_checks.evaluation.baselines import ActualsIndex, row_positions
from accuracy_checks.evaluation.grid import grid_positions
from accuracy_checks.evaluation.join import finite_actuals
from accuracy_checks.sources import frames as F

__all__ = ["ReducedActuals", "read_reduced"]

#: older rows read at a time (their temporaries stay near 0.2 GB)
CHUNK_ROWS = 2_000_000


@dataclass
class ReducedActuals:
    """Actuals read for the long-history measures."""

    #: every row of the last ``keep`` periods (the canonical actuals frame)
    rows: pd.DataFrame
    #: every series the actuals know, any period (key columns)
    series: pd.DataFrame
    #: every actual by (series, grid position), infinite ones read as missing
    index: ActualsIndex
    #: rows read in all
    n_read: int
    #: seconds the reading and the reduction took
    seconds: float = 0.0


class _Incomplete(Exception):
    """The reduction would lose a row that matters elsewhere: read every row instead."""


def read_reduced(config: Config, path: Place | None, *, keep: int,
                 chunk_rows: int = CHUNK_ROWS) -> ReducedActuals | None:
    """The actuals reduced as the module doc says, or ``None`` (read every row instead)."""
    from accuracy_checks.sources.readers import read_actuals

    t0 = time.perf_counter()
    files = _parquet_files(config, path)
    total = _stored_rows(files) if files is not None else None
    layout = _layout(config, files) if files is not None and total is not None else None
    if total is None or layout is None or len(layout.periods) <= keep:
        return None
    periods = layout.periods
    recent, older = list(periods[-keep:]), list(periods[:-keep])
    step = max(1, chunk_rows * len(periods) // max(total, 1))
    chunks = [older[start:start + step] for start in range(0, len(older), step)]
    if 2 * layout.scanned([*chunks, recent]) > 3 * total:
        return None  # row groups mixing far-apart periods: each chunk would read most rows
    builder = _Builder(list(config.forecast.keys), config.frequency, periods, total)
    try:
        for chunk in chunks:
            builder.add(read_actuals(config, path, periods=chunk), old=True)
        rows = read_actuals(config, path, periods=recent)
        builder.add(finite_actuals(rows), old=False)
        if builder.n_read != total:
            return None
        index, series = builder.finish()
    except (_Incomplete, InputError):
        return None
    return ReducedActuals(rows, series, index, builder.n_read, time.perf_counter() - t0)


class _Registry:
    """Integer pairs → ids ``0, 1, …`` in order of first sight (a growing sorted lookup)."""

    def __init__(self) -> None:
        self.known = np.zeros(0, dtype=np.int64)  # sorted pair codes
        self.ids = np.zeros(0, dtype=np.int64)
        self.pairs = np.zeros(0, dtype=np.int64)  # pair code of each id
        self.n = 0

    def __call__(self, pair: np.ndarray) -> np.ndarray:
        codes, uniques = pd.factorize(pair)
        uniques = np.asarray(uniques, dtype=np.int64)
        at = np.searchsorted(self.known, uniques)
        hit = at < self.known.size
        hit[hit] = self.known[at[hit]] == uniques[hit]
        ids = np.empty(uniques.size, dtype=np.int64)
        ids[hit] = self.ids[at[hit]]
        new = uniques[~hit]
        ids[~hit] = np.arange(self.n, self.n + new.size)
        if new.size:
            self.n += new.size
            self.pairs = np.concatenate([self.pairs, new])
            known = np.concatenate([self.known, new])
            order = np.argsort(known, kind="stable")
            self.known = known[order]
            self.ids = np.concatenate([self.ids, ids[~hit]])[order]
        return ids[codes]


class _Builder:
    """Chunks of actuals → the cells of the ``periods × series`` matrix (series numbered in
    order of first sight, renumbered in key order by :meth:`ActualsIndex.from_parts`)."""

    def __init__(self, keys: list[str], frequency: str, periods: pd.DatetimeIndex,
                 rows: int) -> None:
        self.keys, self.frequency, self.rows = keys, frequency, rows
        pos, on_grid = grid_positions(pd.Series(periods), frequency)
        pos = pos[np.asarray(on_grid, dtype=bool)]
        self.p0 = int(pos.min()) if pos.size else 0
        self.span = int(pos.max()) - self.p0 + 1 if pos.size else 1
        self.values = [pd.Index([]) for _ in keys]  # each key's values, in order of sight
        self.registries = [_Registry() for _ in keys[1:]]
        self.on_grid = np.zeros(0, dtype=bool)  # per series: an on-grid row seen
        self.matrix: np.ndarray | None = np.full((self.span, 0), np.nan)
        self.cells: list[tuple[np.ndarray, np.ndarray, np.ndarray]] = []
        self.n_read = 0

    def _codes(self, k: int, column: pd.Series) -> tuple[np.ndarray, np.ndarray]:
        """The chunk's own codes of key ``k`` (−1: missing) and, per code, the value's code
        among every value seen so far."""
        if isinstance(column.dtype, pd.CategoricalDtype):
            raw, uniques = column.cat.codes.to_numpy(), pd.Index(column.cat.categories)
        else:
            raw, found = pd.factorize(column)
            uniques = pd.Index(found)
        at = self.values[k].get_indexer(uniques)
        new = at < 0
        if new.any():
            at[new] = np.arange(len(self.values[k]), len(self.values[k]) + int(new.sum()))
            self.values[k] = self.values[k].append(uniques[new])
        return raw.astype(np.int64), at.astype(np.int64)

    def add(self, chunk: pd.DataFrame, *, old: bool) -> None:
        """Reduce one chunk. Older rows must all hold finite actuals and every key."""
        self.n_read += len(chunk)
        values = chunk[F.ACTUAL].to_numpy(dtype=np.float64, na_value=np.nan)
        if old and not np.isfinite(values).all():
            raise _Incomplete
        local = [self._codes(k, chunk[name]) for k, name in enumerate(self.keys)]
        known = np.logical_and.reduce([raw >= 0 for raw, _ in local])
        if old and not known.all():
            raise _Incomplete
        # the chunk's distinct series first (on its own small codes), then their ids
        comb = np.zeros(len(chunk), dtype=np.int64)
        for raw, at in local:
            comb = comb * max(at.size, 1) + np.maximum(raw, 0)
        cells = int(np.prod([max(at.size, 1) for _, at in local], dtype=np.float64))
        row_code = np.full(len(chunk), -1, dtype=np.int64)
        row_code[known], distinct = _dense_codes(comb[known], cells)
        rest, per_key = distinct, []
        for _, at in reversed(local):
            per_key.append(at[rest % max(at.size, 1)] if at.size else rest * 0)
            rest = rest // max(at.size, 1)
        per_key.reverse()
        ids = per_key[0] if per_key else np.zeros(0, dtype=np.int64)
        for registry, code in zip(self.registries, per_key[1:], strict=True):
            ids = registry(ids * (1 << 31) + code)
        series = np.where(known, ids[np.maximum(row_code, 0)], -1) if ids.size else row_code
        n = (self.registries[-1].n if self.registries
             else len(self.values[0])) if len(self.keys) else 0
        if n > self.on_grid.size:
            self.on_grid = np.concatenate([self.on_grid, np.zeros(n - self.on_grid.size, bool)])
        pos, on_grid = row_positions(chunk, self.frequency)
        use = known & on_grid
        series, col, values = series[use], pos[use] - self.p0, values[use]
        if (col < 0).any() or (col >= self.span).any():
            raise _Incomplete  # a period the pre-read did not see
        self.on_grid[series] = True
        self._place(n, series, col, values)

    def _place(self, n: int, series: np.ndarray, col: np.ndarray, values: np.ndarray) -> None:
        if self.matrix is not None and n * self.span > max(
                baselines._DENSE_CELLS_PER_ROW * self.rows, baselines._DENSE_MIN_CELLS):
            # too sparse for a matrix: keep the non-missing cells instead
            t, j = np.nonzero(~np.isnan(self.matrix))
            self.cells.append((j.astype(np.int64), t.astype(np.int64), self.matrix[t, j]))
            self.matrix = None
        if self.matrix is not None:
            if n > self.matrix.shape[1]:  # room for the new series (amortised doubling)
                grown = np.full((self.span, max(n, 2 * self.matrix.shape[1])), np.nan)
                grown[:, : self.matrix.shape[1]] = self.matrix
                self.matrix = grown
            self.matrix[col, series] = values
        else:
            ok = ~np.isnan(values)
            self.cells.append((series[ok], col[ok], values[ok]))

    def finish(self) -> tuple[ActualsIndex, pd.DataFrame]:
        """The index and the table of every series (key columns, any period)."""
        per_key = self._series_codes()
        # categorical keys, as the pre-read of older series gives them (sources/prereads.py)
        table = pd.DataFrame({name: pd.Categorical.from_codes(per_key[k], self.values[k])
                              for k, name in enumerate(self.keys)})
        levels = [self.values[k].sort_values() for k in range(len(self.keys))]
        on = np.flatnonzero(self.on_grid)
        codes = [levels[k].get_indexer(self.values[k].take(per_key[k][on]))
                 for k in range(len(self.keys))]
        if self.matrix is not None:
            matrix = self.matrix
            if on.size != self.on_grid.size:  # series without an on-grid row: not indexed
                for t in range(matrix.shape[0]):
                    matrix[t, : on.size] = matrix[t, on]
            self.matrix = None
            index = ActualsIndex.from_parts(self.keys, self.frequency, levels, codes,
                                            p0=self.p0, span=self.span, matrix=matrix)
        else:
            renumber = np.cumsum(self.on_grid) - 1
            series = np.concatenate([c[0] for c in self.cells]) if self.cells else _EMPTY
            col = np.concatenate([c[1] for c in self.cells]) if self.cells else _EMPTY
            values = (np.concatenate([c[2] for c in self.cells]) if self.cells
                      else np.zeros(0))
            self.cells = []
            index = ActualsIndex.from_parts(self.keys, self.frequency, levels, codes,
                                            p0=self.p0, span=self.span,
                                            cells=(renumber[series], col, values))
        return index, table

    def _series_codes(self) -> list[np.ndarray]:
        """Per key: the value code of each series (by id of first sight)."""
        if not self.keys:
            return []
        if not self.registries:
            return [np.arange(len(self.values[0]), dtype=np.int64)]
        out: list[np.ndarray] = []
        ids = np.arange(self.registries[-1].n, dtype=np.int64)
        for registry in reversed(self.registries):
            pair = registry.pairs[ids]
            out.append(pair & ((1 << 31) - 1))
            ids = pair >> 31
        out.append(ids)
        return out[::-1]


_EMPTY = np.zeros(0, dtype=np.int64)


def _dense_codes(comb: np.ndarray, cells: int) -> tuple[np.ndarray, np.ndarray]:
    """``comb`` (codes below ``cells``) → (code per row ``0 … k − 1``, the distinct values in
    order): one bincount when ``cells`` is small next to the rows, else a sorted hash."""
    if cells <= max(4 * comb.size, 1 << 22):
        present = np.flatnonzero(np.bincount(comb, minlength=cells))
        lookup = np.zeros(max(cells, 1), dtype=np.int64)
        lookup[present] = np.arange(present.size, dtype=np.int64)
        return lookup[comb], present.astype(np.int64)
    raw, uniques = pd.factorize(comb, sort=True)
    return raw.astype(np.int64, copy=False), np.asarray(uniques, dtype=np.int64)


def _parquet_files(config: Config, path: Place | None) -> list[Path] | None:
    """The local Parquet files of the actuals; ``None`` for any other place."""
    from accuracy_checks.sources import datasets
    from accuracy_checks.sources.files import PARQUET, list_files

    place = path or config.actuals.place
    if isinstance(place, SqlSource) or not isinstance(place, Path) or datasets.is_dataset(place):
        return None
    files = list_files(place, "actuals", "actuals.path")
    return files if files and all(f.suffix.lower() in PARQUET for f in files) else None


def _stored_rows(files: list[Path]) -> int | None:
    """Rows of Parquet files, from their metadata."""
    import pyarrow.parquet as pq

    try:
        return sum(pq.read_metadata(f).num_rows for f in files)
    except (OSError, ValueError):
        return None


@dataclass
class _Layout:
    """What the files' metadata tell: the periods with an actual and each row group's span."""

    periods: pd.DatetimeIndex
    #: per row group with rows: first and last period (as in the files) and its rows
    first: np.ndarray
    last: np.ndarray
    rows: np.ndarray

    def scanned(self, chunks: list[list[pd.Timestamp]]) -> int:
        """Rows in the row groups that reading each chunk of periods opens (those whose span
        meets the chunk's: the others are skipped by their statistics)."""
        total = 0
        for chunk in chunks:
            lo, hi = np.datetime64(min(chunk), "ns"), np.datetime64(max(chunk), "ns")
            total += int(self.rows[(self.first <= hi) & (self.last >= lo)].sum())
        return total


def _layout(config: Config, files: list[Path]) -> _Layout | None:
    """The sorted distinct periods holding at least one actual (a non-null value, as
    :func:`~accuracy_checks.sources.prereads.actual_periods` says) and the row groups' spans,
    from the row groups' statistics where they tell it (one period in the row group, a value
    not null); other row groups are read, the two columns only. ``None`` when a file's period
    is not a naive INT64 timestamp or a row group has no statistics (the layout is unknown)."""
    import pyarrow.compute as pc
    import pyarrow.parquet as pq

    ac = config.actuals
    found: list[np.ndarray] = []
    first: list[np.ndarray] = []
    last: list[np.ndarray] = []
    rows: list[int] = []
    for f in files:
        try:
            file = pq.ParquetFile(f)
            names = [file.schema.column(i).path for i in range(len(file.schema))]
            if names.count(ac.period) != 1 or names.count(ac.value) != 1:
                return None
            at, value_at = names.index(ac.period), names.index(ac.value)
            unit = _naive_unit(file.schema.column(at))
            if unit is None:
                return None
            meta, unread, lo, hi = file.metadata, [], [], []
            for r in range(meta.num_row_groups):
                group = meta.row_group(r)
                if group.num_rows == 0:
                    continue
                day, value = group.column(at).statistics, group.column(value_at).statistics
                if day is None or not day.has_min_max:
                    return None
                lo.append(day.min_raw)
                hi.append(day.max_raw)
                rows.append(group.num_rows)
                if (value is not None and day.has_null_count and value.has_null_count
                        and day.null_count == 0 and day.min_raw == day.max_raw):
                    if value.null_count < group.num_rows:
                        found.append(np.array([day.min_raw], dtype=f"datetime64[{unit}]"))
                else:
                    unread.append(r)
            first.append(np.array(lo, dtype=np.int64).astype(f"datetime64[{unit}]"))
            last.append(np.array(hi, dtype=np.int64).astype(f"datetime64[{unit}]"))
            if unread:
                table = file.read_row_groups(unread, columns=[ac.period, ac.value])
                present = pc.filter(table[ac.period], pc.is_valid(table[ac.value]))
                found.append(pc.unique(present).to_numpy().astype(f"datetime64[{unit}]"))
        except (OSError, ValueError):
            return None
    stamps = np.concatenate(found) if found else np.zeros(0, dtype="datetime64[ns]")
    periods = pd.DatetimeIndex(pd.unique(stamps[~np.isnat(stamps)])).sort_values().as_unit("ns")
    return _Layout(periods, np.concatenate(first).astype("datetime64[ns]"),
                   np.concatenate(last).astype("datetime64[ns]"), np.array(rows, dtype=np.int64))


def _naive_unit(column: object) -> str | None:
    """The numpy unit of a Parquet column of naive timestamps stored as INT64 (its statistics
    are then the wall-clock values the reader gives), else ``None``."""
    logical = getattr(column, "logical_type", None)
    if getattr(column, "physical_type", None) != "INT64" or logical is None:
        return None
    try:
        info = json.loads(logical.to_json())
    except (AttributeError, TypeError, ValueError):
        return None
    if info.get("Type") != "Timestamp" or info.get("isAdjustedToUTC") is not False:
        return None
    return {"nanoseconds": "ns", "microseconds": "us", "milliseconds": "ms"}.get(
        info.get("timeUnit"))
