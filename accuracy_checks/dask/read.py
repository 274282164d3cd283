"""Reading the inputs in pieces on the workers, with the sources' own reading rules.

A :class:`Piece` is a part of one input file: a group of a Parquet file's row groups, or a
whole CSV file; a local file, or a file of a dataset (a Hive-partitioned folder, object
storage: its :class:`~accuracy_checks.dask.stores.Store` and the file's partition values).
:func:`read_piece` reads it with the readers' column declarations
(:func:`~accuracy_checks.sources.readers.forecast_columns`,
:func:`~accuracy_checks.sources.readers.actual_columns`) and converters
(:func:`~accuracy_checks.sources.columns.convert`: keys as text, one date format, numbers;
the same exit-2 messages, numbering the file's own lines, or for a dataset the dataset
reader's), and adds two columns:

``__order``
    the row's position in the run's reading order (piece number · 2**40 + row in the piece):
    the pandas engine reads the files in this order, and its examples and tie-breaks follow it;
``__shard``
    the shard of the row's series: a hash of the key columns' text modulo the shard count, the
    same for every input (forecast, actuals, earlier cycles), so a shard holds whole series.

Local files and folders of files (:func:`local_files`) and datasets
(:mod:`accuracy_checks.dask.places`) are read in pieces, a table in partitions
(:mod:`.sql_parts`, which :func:`read_piece` hands them to); a query, a ``memory://`` or
``https://`` URL or a frame given in memory is read by the pandas readers on the client and
then split into shards (:mod:`accuracy_checks.dask.run`).
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd

from accuracy_checks.dask.stores import Store, dataset_error, read_dataset_piece
from accuracy_checks.errors import InputError
from accuracy_checks.sources import datasets
from accuracy_checks.sources import frames as F
from accuracy_checks.sources.columns import Column, convert, first_refusal
from accuracy_checks.sources.files import (
    PARQUET,
    READ_ERRORS,
    check_header,
    list_files,
    why,
)

__all__ = ["ORDER", "SHARD", "Piece", "as_text", "date_forms", "local_files", "pieces",
           "read_piece", "row_group_runs", "shard_of", "whole_file_error"]

ORDER = "__order"
SHARD = "__shard"
#: rows of a Parquet piece (whole row groups are grouped up to about this many rows)
PIECE_ROWS = 2_000_000
_ROW_BITS = 40


@dataclass(frozen=True)
class Piece:
    """A part of one input file, read by one task."""

    #: a local file, or (with ``store``) a file's path in the dataset's filesystem
    file: Path | str
    role: str
    #: Parquet row groups of the piece (``None``: the whole file)
    row_groups: tuple[int, ...] | None
    #: the piece's first row within its file (numbers rows in messages)
    first_row: int
    #: the piece's number in the run's reading order
    ordinal: int
    #: the dataset the file belongs to (``None``: a local file of a plain file or folder)
    store: Store | None = None
    #: the file's partition values, one per ``store.partitions`` (text)
    values: tuple[str, ...] = ()
    #: more whole files of the same dataset read after ``file`` (small files grouped into one
    #: piece), each with its partition values
    more: tuple[tuple[str, tuple[str, ...]], ...] = ()

    def dataset_files(self) -> list[tuple[str, tuple[str, ...]]]:
        """A dataset piece's files in reading order, each with its partition values."""
        return [(str(self.file), self.values), *self.more]

    @property
    def path(self) -> Path:
        """The local file (a piece without a store)."""
        assert self.store is None and isinstance(self.file, Path)
        return self.file


def local_files(place: object, role: str, key: str) -> list[Path] | None:
    """The local files of ``place`` in the readers' order, or ``None`` when the place is not
    a local file or folder of files (a table, a URL, a Hive-partitioned dataset)."""
    if not isinstance(place, Path) or datasets.is_dataset(place):
        return None
    return list_files(place, role, key)


def _dates_in(meta: Any, group: int, column: str | None,
              wanted: Sequence[pd.Timestamp] | None) -> bool:
    """Whether a Parquet row group may hold a row dated one of ``wanted`` (its statistics of
    ``column``; no statistics, no filter: ``True``)."""
    if column is None or wanted is None:
        return True
    rg = meta.row_group(group)
    names = [rg.column(i).path_in_schema for i in range(rg.num_columns)]
    if column not in names:
        return True
    stats = rg.column(names.index(column)).statistics
    if stats is None or not stats.has_min_max:
        return True
    try:
        lo, hi = pd.Timestamp(stats.min), pd.Timestamp(stats.max)
    except (TypeError, ValueError):
        return True
    return any(lo <= pd.Timestamp(w) <= hi for w in wanted)


def pieces(files: Sequence[Path], role: str, *, start: int = 0, rows: int | None = None,
           column: str | None = None,
           wanted: Sequence[pd.Timestamp] | None = None) -> list[Piece]:
    """The pieces of ``files`` in reading order, numbered from ``start``. With ``column`` and
    ``wanted`` dates, the Parquet row groups whose statistics of that date column hold none of
    them are left out (never read): the span's filter pushed into the read."""
    import pyarrow.parquet as pq

    out: list[Piece] = []
    for file in files:
        if file.suffix.lower() not in PARQUET:
            out.append(Piece(file, role, None, 0, start + len(out)))
            continue
        try:
            meta = pq.ParquetFile(file).metadata
        except READ_ERRORS as exc:
            raise InputError(f"The {role} file {file} cannot be read: {why(exc)}") from None
        out += [Piece(file, role, groups, first, start + len(out) + i)
                for i, (groups, first) in enumerate(row_group_runs(meta, rows, column, wanted))]
    return out


def row_group_runs(meta: Any, rows: int | None = None, column: str | None = None,
                   wanted: Sequence[pd.Timestamp] | None = None
                   ) -> list[tuple[tuple[int, ...], int]]:
    """A Parquet file's pieces: runs of consecutive row groups of up to about ``rows`` rows
    (default :data:`PIECE_ROWS`), each with its first row in the file; with ``column`` and
    ``wanted``, the row groups whose statistics hold none of those dates left out."""
    rows = PIECE_ROWS if rows is None else rows  # read when called (tests set it smaller)
    out: list[tuple[tuple[int, ...], int]] = []
    group: list[int] = []
    first = offset = n = 0
    for i in range(meta.num_row_groups):
        size = meta.row_group(i).num_rows
        keep = _dates_in(meta, i, column, wanted)
        # a piece is a run of consecutive row groups (its rows numbered from its first)
        if group and (not keep or n + size > rows):
            out.append((tuple(group), first))
            group, n = [], 0
        if keep:
            if not group:
                first = offset
            group.append(i)
            n += size
        offset += size
    if group:
        out.append((tuple(group), first))
    return out


def read_piece(piece: Piece, columns: Sequence[Column], *, keys: Sequence[str] = (),
               n_shards: int = 0, rename: dict[str, str] | None = None,
               text: Sequence[str] = (), head: int | None = None,
               every: Sequence[Column] | None = None) -> pd.DataFrame:
    """One piece's ``columns`` converted to their canonical dtypes and names (key columns and
    the ``text`` columns present as plain text, so every piece has the same dtypes), with
    ``__order`` and, when ``n_shards``, ``__shard`` of the series (``keys``: canonical key
    names, after ``rename``). ``every``: the input's configured columns, in the readers'
    order, when ``columns`` are only some of them (a refusal then names the file's first
    offending column among all of them, as the pandas engine does: a missing column too)."""
    if not isinstance(piece, Piece):  # a table's partition (dask/sql_parts.py) reads itself
        return piece.read(columns, keys=keys, n_shards=n_shards,  # type: ignore[attr-defined]
                          rename=rename, text=text, head=head, every=every)
    if piece.store is not None:
        raw = read_dataset_piece(piece.store, piece.dataset_files(), piece.row_groups,
                                 columns, head)
        return _finish(piece, raw, columns, keys=keys, n_shards=n_shards, rename=rename,
                       text=text, every=every)
    check_header(piece.path, every if every is not None else columns, piece.role)
    wanted = list(dict.fromkeys(c.name for c in columns))
    try:
        if piece.row_groups is not None:
            raw = _parquet(piece, wanted, [c.name for c in columns if c.kind != "number"],
                           head)
        else:
            raw = _csv(piece.path, columns, piece.role)
    except READ_ERRORS as exc:
        raise InputError(f"The {piece.role} file {piece.file} cannot be read: "
                         f"{why(exc)}") from None
    return _finish(piece, raw, columns, keys=keys, n_shards=n_shards, rename=rename, text=text,
                   every=every)


def _finish(piece: Piece, raw: pd.DataFrame, columns: Sequence[Column], *,
            keys: Sequence[str], n_shards: int, rename: dict[str, str] | None,
            text: Sequence[str], every: Sequence[Column] | None) -> pd.DataFrame:
    """A piece's raw columns converted (a refusal: the whole file's or dataset's message),
    renamed, with ``__shard`` and ``__order``."""
    if piece.store is not None:  # (the dataset reader numbers the rows of its whole scan)
        first_line, shown = 1, Path(piece.store.shown)
    else:
        first_line, shown = (1 if piece.row_groups is not None else 2) + piece.first_row, \
            piece.path
    out: dict[str, pd.Series] = {}
    try:
        for c in columns:
            if c.name not in out:
                out[c.name] = convert(raw[c.name], shown, c, piece.role, first_line)
    except InputError:
        # part of a file or dataset, or some of its columns: the whole file's message
        if piece.store is not None or piece.row_groups is not None or every is not None:
            found = whole_file_error(piece, every or columns)
            if found is not None:
                raise found from None
        raise
    frame = pd.DataFrame(out).rename(
        columns={c.name: c.canonical for c in columns if c.canonical})
    if rename:
        frame = frame.rename(columns=rename)
    if n_shards:
        frame[SHARD] = shard_of(frame, keys, n_shards)
    for k in [*keys, *(t for t in text if t in frame.columns)]:
        frame[k] = as_text(frame[k])
    frame[ORDER] = (np.int64(piece.ordinal) << _ROW_BITS) + np.arange(len(frame), dtype=np.int64)
    return frame


def whole_file_error(piece: Piece, columns: Sequence[Column]) -> InputError | None:
    """The pandas engine's refusal of the file ``piece`` belongs to: ``columns`` converted in
    order over every row of the file, a Parquet file one column at a time (the first error:
    the file's first offending rows and their count in the whole file), or ``None``.

    Run only when a piece is refused (its own message names its rows alone) or when the
    pieces of a file disagree on a date column's UTC offsets (:func:`date_forms`): it holds
    one column of the file in memory at a time. A dataset's piece: the pandas engine's
    message over the whole dataset (:func:`~accuracy_checks.dask.stores.dataset_error`, one
    column of the dataset in memory at a time)."""
    import pyarrow.parquet as pq

    if piece.store is not None:
        return dataset_error(piece.store.read, columns)
    if piece.row_groups is None:  # a CSV file: read whole, its lines numbered from 2
        raw = _csv(piece.path, columns, piece.role)
        try:
            for c in columns:
                convert(raw[c.name], piece.path, c, piece.role, 2)
        except InputError as exc:
            return exc
        return None
    groups = pq.ParquetFile(piece.path).metadata.num_row_groups
    whole = Piece(piece.path, piece.role, tuple(range(groups)), 0, piece.ordinal)
    if groups == 0:
        return None
    def check(c: Column) -> None:
        raw = _parquet(whole, [c.name], [c.name] if c.kind != "number" else [])
        convert(raw[c.name], piece.path, c, piece.role, 1)

    return first_refusal(columns, check)


#: a date written with a time and a UTC offset: the offset (``Z``, ``+HH``, ``+HHMM``,
#: ``+HH:MM``)
_OFFSET = r"\d{2}:\d{2}(?::\d{2}(?:\.\d+)?)?\s*(Z|[+-]\d{2}(?::?\d{2})?)$"


def date_forms(piece: Piece, columns: Sequence[Column]) -> dict[str, frozenset[str]]:
    """For each date column of a Parquet piece (or a dataset's piece) stored as text: the UTC
    offsets its dates carry (``+HH:MM``; ``""``: a date without one). A file (a dataset) whose
    pieces carry more than one form in a column mixes offsets, which the converters refuse
    over the whole file (:func:`whole_file_error`) but a piece alone may not show."""
    import pyarrow as pa
    import pyarrow.compute as pc
    import pyarrow.parquet as pq

    if piece.store is not None:  # partition values: from the piece itself, no read
        names = piece.store.partitions
        out = {c.name: _forms(pd.Series([v[names.index(c.name)]
                                         for _, v in piece.dataset_files()], dtype="string"))
               for c in columns if c.kind == "date" and c.name in names}
        dated = [c for c in columns if c.name in text_date_columns(piece, columns)]
        if dated:
            raw = read_dataset_piece(piece.store, piece.dataset_files(), piece.row_groups,
                                     dated)
            out.update({n: _forms(pd.Series(_distinct(raw[n]), dtype="string"))
                        for n in dict.fromkeys(c.name for c in dated)
                        if raw[n].dtype == object or pd.api.types.is_string_dtype(raw[n].dtype)
                        or isinstance(raw[n].dtype, pd.CategoricalDtype)})
        return out
    if piece.row_groups is None:
        return {}
    schema = pq.read_schema(piece.path)
    text = [c.name for c in columns if c.kind == "date" and c.name in schema.names
            and (pa.types.is_string(schema.field(c.name).type)
                 or pa.types.is_large_string(schema.field(c.name).type))]
    if not text:
        return {}
    table = pq.ParquetFile(piece.path).read_row_groups(list(piece.row_groups),
                                                       columns=list(dict.fromkeys(text)))
    return {name: _forms(pd.Series(pc.unique(table[name]).to_pandas(), dtype="string"))
            for name in dict.fromkeys(text)}


def text_date_columns(piece: Piece, columns: Sequence[Column]) -> list[str]:
    """The date columns of ``columns`` a dataset piece's files may store as text (partition
    columns aside): every one in CSV, those of a text type in a Parquet dataset's schema."""
    import pyarrow as pa

    assert piece.store is not None
    schema = piece.store.schema

    def text(kind: Any) -> bool:
        if pa.types.is_dictionary(kind):
            kind = kind.value_type
        return bool(pa.types.is_string(kind) or pa.types.is_large_string(kind))

    return [c.name for c in columns if c.kind == "date" and c.name not in piece.store.partitions
            and (schema is None or (c.name in schema.names
                                    and text(schema.field(c.name).type)))]


def _distinct(column: pd.Series) -> np.ndarray:
    """The distinct values of a text column (a categorical's categories)."""
    if isinstance(column.dtype, pd.CategoricalDtype):
        return np.asarray(column.cat.categories, dtype=object)
    return np.asarray(pd.unique(column.astype(object)), dtype=object)


def _forms(values: pd.Series) -> frozenset[str]:
    """The UTC offsets (``+HH:MM``, ``""`` for none) of distinct date texts."""
    values = values.str.strip()
    values = values[values.notna() & (values != "")]
    found = values.str.extract(_OFFSET, expand=False)
    hh = found.str.slice(0, 3)
    mm = found.str.slice(3).str.replace(":", "", regex=False).str.ljust(2, "0")
    form = (hh + ":" + mm).mask(found.eq("Z").fillna(False), "+00:00").fillna("")
    return frozenset(form.unique().tolist())


def as_text(column: pd.Series) -> pd.Series:
    """A key or segment column as plain text (the converters give categoricals of text);
    missing stays missing. A categorical's categories are taken by code in Arrow (no Python
    string per row)."""
    import pyarrow as pa

    if not isinstance(column.dtype, pd.CategoricalDtype):
        return column.astype(object).astype("str")
    codes = column.cat.codes.to_numpy()
    cats = pa.array(np.asarray(column.cat.categories, dtype=object), pa.large_string())
    taken = cats.take(pa.array(codes, mask=codes < 0))
    return pd.Series(taken.to_pandas(types_mapper=lambda _: pd.StringDtype("pyarrow",
                                                                           na_value=np.nan)),
                     index=column.index, name=column.name)


def _text_hash(values: np.ndarray) -> np.ndarray:
    """``pd.util.hash_array`` of an object array of texts (one algorithm for every dtype: the
    hash of a pandas string column depends on its storage, so text goes through ``object``)."""
    return pd.util.hash_array(np.asarray(values, dtype=object))


def _column_hash(column: pd.Series) -> np.ndarray:
    """A uint64 hash of each value's text, the same whatever the column's dtype (a
    categorical: its categories hashed once; a missing value: the hash of a missing value)."""
    if isinstance(column.dtype, pd.CategoricalDtype):
        codes = column.cat.codes.to_numpy()
        cats = _text_hash(np.asarray(column.cat.categories.astype(str), dtype=object))
        out = cats[np.maximum(codes, 0)] if len(cats) else np.zeros(len(codes), np.uint64)
        return np.where(codes < 0, _text_hash(np.array([np.nan], dtype=object))[0], out)
    text = column.astype(object).astype(str).to_numpy(dtype=object)
    missing = column.isna().to_numpy()
    if missing.any():
        text[missing] = np.nan
    return _text_hash(text)


def shard_of(frame: pd.DataFrame, keys: Sequence[str], n_shards: int) -> np.ndarray:
    """The shard of each row: a hash of its key columns' text modulo ``n_shards`` (the same
    for a series in every input, whatever the columns' dtypes)."""
    hashed = np.zeros(len(frame), dtype=np.uint64)
    for k in keys:
        hashed = hashed * np.uint64(1_000_003) ^ _column_hash(frame[k])
    return (hashed % np.uint64(n_shards)).astype(np.int32)


def _parquet(piece: Piece, wanted: list[str], dictionary: list[str],
             head: int | None = None) -> pd.DataFrame:
    import pyarrow as pa
    import pyarrow.parquet as pq

    handle = pq.ParquetFile(piece.path)
    schema = handle.schema_arrow
    strings = [n for n in dictionary if n in schema.names
               and (pa.types.is_string(schema.field(n).type)
                    or pa.types.is_large_string(schema.field(n).type))]
    handle = pq.ParquetFile(piece.path, read_dictionary=strings)
    assert piece.row_groups is not None
    if head is not None:  # the first rows only (the dataframe's dtypes)
        batch = next(handle.iter_batches(batch_size=head, row_groups=[piece.row_groups[0]],
                                         columns=wanted))
        return batch.to_pandas().reset_index(drop=True)
    # a RangeIndex kept in the file's pandas metadata (a frame written after a cut) would
    # come back as the index and misalign the converted columns: rows are numbered from 0
    table = handle.read_row_groups(list(piece.row_groups), columns=wanted)
    return table.to_pandas().reset_index(drop=True)


def _csv(file: Path, columns: Sequence[Column], role: str) -> pd.DataFrame:
    """A CSV file's ``columns`` read raw as the readers read them (keys, dates, text as
    strings)."""
    from accuracy_checks.sources.files import read_csv_columns

    return read_csv_columns(file, columns, role)


def actual_period_filter(frame: pd.DataFrame, periods: Sequence[pd.Timestamp] | None
                         ) -> np.ndarray:
    """Rows of actuals kept when the run reads only ``periods`` (all rows when ``None``)."""
    if periods is None:
        return np.ones(len(frame), dtype=bool)
    return frame[F.PERIOD].isin(list(periods)).to_numpy()


@dataclass(frozen=True)
class PieceReader:
    """:func:`read_piece` with its settings bound, for ``dask.dataframe.from_map`` (which
    passes the pieces one by one; an optional ``after`` step runs on the piece's rows)."""

    columns: tuple[Column, ...]
    keys: tuple[str, ...] = ()
    n_shards: int = 0
    rename: tuple[tuple[str, str], ...] = ()
    text: tuple[str, ...] = ()
    after: Any = None

    def __call__(self, item: Piece | tuple[int, Piece], head: int | None = None
                 ) -> pd.DataFrame:
        place, piece = item if isinstance(item, tuple) else (0, item)
        frame = read_piece(piece, self.columns, keys=self.keys, n_shards=self.n_shards,
                           rename=dict(self.rename) or None, text=self.text, head=head)
        return self.after(frame, place) if self.after is not None else frame


def piece_frame(reader: PieceReader, items: Sequence[Any]) -> Any:
    """The pieces as one dask dataframe (its dtypes from the first piece's rows)."""
    import dask.dataframe as dd

    meta = reader(items[0], head=64).iloc[:0]
    return dd.from_map(reader, list(items), meta=meta, enforce_metadata=False)
