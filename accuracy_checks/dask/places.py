"""Where each input is, seen from the client: its pieces, listed without reading a row.

:func:`source_of` tells how the dask engine reads an input's place: the local files of a file
or plain folder, a dataset read in pieces on the workers (a local folder of Hive partitions,
object storage: :mod:`accuracy_checks.dask.stores`), or ``None``: read on the client by the
pandas readers (a table or query, ``memory://``, ``https://``). :func:`source_pieces` lists a
source's pieces in the pandas engine's reading order. For a dataset the client lists the files,
keeps those the pandas engine's filters keep (:func:`~accuracy_checks.sources.dataset_filters.
choose`: a partition outside the span is never opened), checks the configured columns against
the newest kept file as the dataset reader does, and reads the Parquet footers (row groups);
the rows are read on the workers. A dataset's Parquet files of fewer rows than
:data:`~accuracy_checks.dask.read.PIECE_ROWS` are read whole, several to a piece (a lake of
many small files is then a few tasks, not one a file); a larger file is split by row groups.
"""

from __future__ import annotations

from collections.abc import Callable, Sequence
from dataclasses import dataclass
from pathlib import Path
from typing import Any

from accuracy_checks.config.places import Url
from accuracy_checks.dask import read as R
from accuracy_checks.dask.read import Piece, local_files, pieces, row_group_runs
from accuracy_checks.dask.stores import (
    DatasetRead,
    Store,
    partitioning,
    text_columns,
    worker_readable,
)
from accuracy_checks.errors import InputError
from accuracy_checks.sources import datasets
from accuracy_checks.sources.columns import Column, refuse_missing
from accuracy_checks.sources.dataset_filters import DateFilter, PairFilter, choose

__all__ = ["Explain", "Source", "no_rows", "source_of", "source_pieces"]

#: footers read at once on the client
_FOOTER_THREADS = 8
#: asks for the pandas engine's refusal of a dataset read (on a worker), ``None`` if none
Explain = Callable[[DatasetRead, Sequence[Column]], InputError | None]


@dataclass(frozen=True)
class Source:
    """One input's place as the dask engine reads it: local ``files``, or (``files`` is
    ``None``) a dataset read in pieces."""

    place: Path | Url
    role: str
    key: str
    files: tuple[Path, ...] | None = None

    @property
    def is_dataset(self) -> bool:
        """Whether the place is a dataset (read with the dataset reader's rules)."""
        return self.files is None

    def header(self) -> list[str]:
        """The column names the pandas readers see at the place (segment columns are read
        when present): a local file's header, a dataset's newest file's and its partitions."""
        from accuracy_checks.sources.files import columns_of, file_header

        if self.files is not None:
            return file_header(self.files[0], self.role)
        return columns_of(self.place, self.role, self.key)


def source_of(place: object, role: str, key: str) -> Source | None:
    """How the dask engine reads ``place`` (module doc); ``None``: on the client."""
    if worker_readable(place):
        assert isinstance(place, Path | Url)
        return Source(place, role, key)
    files = local_files(place, role, key)
    if files is None:
        return None
    assert isinstance(place, Path)
    return Source(place, role, key, tuple(files))


def date_filters(columns: Sequence[Column], periods: tuple[str, Sequence[Any]] | None = None,
                 since: tuple[str, Any] | None = None) -> tuple[DateFilter, ...]:
    """The dataset reader's filters of a read (as :func:`~accuracy_checks.sources.files.
    read_columns` builds them): dates of one column, a first date of another."""
    import pandas as pd

    fmts = {c.name: c.fmt for c in columns if c.kind == "date"}
    out = []
    if periods is not None:
        out.append(DateFilter(periods[0], tuple(pd.Timestamp(p) for p in periods[1]),
                              fmt=fmts.get(periods[0])))
    if since is not None:
        out.append(DateFilter(since[0], since=pd.Timestamp(since[1]), fmt=fmts.get(since[0])))
    return tuple(out)


def no_rows(source: Source) -> InputError:
    """The readers' refusal of an input without a data row (the pandas engine's): a
    dataset's, or local files' (a header and no rows)."""
    from accuracy_checks.sources.columns import no_rows as refusal

    return refusal(f"The {source.role} {source.place} (config key `{source.key}`)",
                   header=not source.is_dataset)


def source_pieces(source: Source, columns: Sequence[Column], *, start: int = 0,
                  column: str | None = None, wanted: Sequence[Any] | None = None,
                  filters: Sequence[DateFilter] = (), pairs: PairFilter | None = None,
                  allow_empty: bool = False, explain: Explain | None = None) -> list[Piece]:
    """The pieces of ``source`` in reading order, numbered from ``start``. Local files: the
    Parquet row groups whose ``column`` statistics hold none of the ``wanted`` dates left
    out. A dataset: only the files its ``filters`` and ``pairs`` keep, the filters pushed
    into each piece's scan (``columns``: the configured columns of the read, checked against
    the newest kept file). A dataset that cannot be read is refused with the pandas engine's
    message (``explain``)."""
    if source.files is not None:
        return pieces(list(source.files), source.role, start=start, column=column,
                      wanted=wanted)
    read = DatasetRead(source.place, source.role, source.key, tuple(filters), pairs,
                       allow_empty)
    role, key = source.role, source.key
    data = datasets.open_dataset(source.place, role, key)
    files = choose(data.files, data.partitions, data.shown, list(filters), role, pairs)
    if not files:
        return []
    refuse_missing(columns, datasets.dataset_columns(data, role, key, files[-1]),
                   f"{role} {data.shown}", "Fix the column name in the config or in the data.")
    names = tuple(data.partitions)
    at = {f: i for i, f in enumerate(data.files)}
    chosen = {n: [data.partitions[n][at[f]] for f in files] for n in names}
    out: list[Piece] = []
    try:
        schema = None
        if data.kind == "parquet":
            schema = _schema(data, files, columns, names, chosen)
        store = Store(read, data.root, data.shown, data.kind, names, schema)
        footers = _footers(data, files) if data.kind == "parquet" else [None] * len(files)
    except (OSError, ValueError) as exc:
        found = explain(read, columns) if explain is not None else None
        raise (found or InputError(
            f"The {role} {data.shown} (config key `{key}`) cannot be read: "
            f"{datasets.why_masked(exc)}")) from None
    small: list[tuple[str, tuple[str, ...]]] = []  # whole small Parquet files, grouped
    n_small = 0

    def flush() -> None:
        nonlocal small, n_small
        if small:
            (first, values), more = small[0], tuple(small[1:])
            out.append(Piece(first, role, None, 0, start + len(out), store, values, more))
        small, n_small = [], 0

    limit = R.PIECE_ROWS  # (read when called: tests set it smaller)
    for f, meta in zip(files, footers, strict=True):
        values = tuple(data.partitions[n][at[f]] for n in names)
        if meta is None:  # a CSV file: one piece
            out.append(Piece(f, role, None, 0, start + len(out), store, values))
            continue
        if 0 < meta.num_rows <= limit:  # read whole, with the small files around it
            if n_small + meta.num_rows > limit:
                flush()
            small.append((f, values))
            n_small += meta.num_rows
            continue
        flush()
        out += [Piece(f, role, groups, first, start + len(out) + i, store, values)
                for i, (groups, first) in enumerate(row_group_runs(meta))]
    flush()
    return out


def _schema(data: datasets.Dataset, files: list[str], columns: Sequence[Column],
            names: tuple[str, ...], chosen: dict[str, list[str]]) -> Any:
    """The schema of the pandas engine's scan of ``files`` (its first file's columns, the
    configured text columns as dictionaries, the partition columns as text)."""
    import pyarrow.dataset as pds

    fmt = datasets.dataset_format(data, text_columns(data.kind, columns, names))
    return pds.dataset(files, filesystem=data.filesystem, format=fmt,
                       partitioning=partitioning(names, chosen),
                       partition_base_dir=data.root).schema


def _footers(data: datasets.Dataset, files: list[str]) -> list[Any]:
    """The Parquet files' metadata (their footers: row groups and their statistics), read a
    few at a time (each a round trip on object storage); the first failure in file order is
    raised."""
    from concurrent.futures import ThreadPoolExecutor

    import pyarrow.parquet as pq

    def footer(file: str) -> Any:
        with data.filesystem.open_input_file(file) as handle:
            return pq.ParquetFile(handle).metadata

    if len(files) < 2:
        return [footer(f) for f in files]
    with ThreadPoolExecutor(max_workers=min(_FOOTER_THREADS, len(files))) as pool:
        return list(pool.map(footer, files))
