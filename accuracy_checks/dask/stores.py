"""Datasets read in pieces on the workers: Hive-partitioned folders and object storage.

The pandas engine reads a dataset (:mod:`accuracy_checks.sources.datasets`: a URL, or a
local folder of ``name=value`` folders) in one scan of the files its filters keep. The dask
engine reads the same files, one piece per Parquet row-group run or CSV file, on the workers,
with the same rules:

- a piece carries a :class:`Store`: the dataset's place as configured (a URL keeps its
  ``${NAME}``; no open filesystem, no credential travels), its root, the Parquet schema of the
  pandas engine's scan, and the :class:`DatasetRead` (filters) of that scan; the worker
  rebuilds the filesystem from the URL and its own environment
  (:func:`~accuracy_checks.sources.datasets.url_filesystem`);
- the partition values of the piece's file become the same text columns (dictionary-encoded,
  converted as file columns), the filters are pushed into the piece's scan
  (:func:`~accuracy_checks.sources.dataset_filters.row_expression`), CSV cells read as the
  dataset reader reads them (its missing-value words in number and date columns);
- a piece refused by the converters (its message would number the rows of the piece) asks
  :func:`dataset_error` for the pandas engine's message over the whole dataset, one column at
  a time.

``memory://`` (a memory filesystem lives in one process) and ``https://`` (one file, downloaded
by the reader) stay on the client (:mod:`accuracy_checks.dask.client_read`).
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import pandas as pd

from accuracy_checks.config.places import Url
from accuracy_checks.errors import InputError
from accuracy_checks.sources import datasets
from accuracy_checks.sources.columns import Column, first_refusal
from accuracy_checks.sources.dataset_filters import DateFilter, PairFilter, row_expression

__all__ = ["DatasetRead", "Store", "dataset_error", "filesystem", "read_dataset_piece",
           "worker_readable"]

#: URL schemes whose files a worker reads itself (the others stay on the client)
_ON_WORKERS = ("s3", "gs", "gcs", "abfs", "abfss", "az")


def worker_readable(place: object) -> bool:
    """Whether ``place`` is a dataset the workers read in pieces: a local folder of Hive
    partitions, or a URL on object storage (not ``memory://``, not ``https://``)."""
    if isinstance(place, Url):
        return place.scheme in _ON_WORKERS
    return isinstance(place, Path) and datasets.is_dataset(place)


@dataclass(frozen=True)
class DatasetRead:
    """The pandas engine's read of one input's dataset: the arguments it gives
    :func:`~accuracy_checks.sources.datasets.read_dataset_columns` (the filters of the files
    it opens and of the rows it reads)."""

    place: Url | Path
    role: str
    key: str
    filters: tuple[DateFilter, ...] = ()
    pairs: PairFilter | None = None
    allow_empty: bool = False


@dataclass(frozen=True)
class Store:
    """Where a dataset piece's file lives, picklable: the read, the dataset's root in its
    filesystem, how messages name it, the files' format, the partition columns' names and the
    Parquet schema of the pandas engine's scan (``None`` for CSV: each file's own)."""

    read: DatasetRead
    root: str
    shown: str
    kind: str
    partitions: tuple[str, ...] = ()
    schema: Any = None


def filesystem(place: Url | Path, key: str) -> Any:
    """A pyarrow filesystem for ``place``, built in this process (a worker: from the URL and
    its own environment's credentials)."""
    import pyarrow.fs as pafs

    if isinstance(place, Url):
        return datasets.url_filesystem(place, key)[0]
    return pafs.LocalFileSystem()


def partitioning(names: Sequence[str], values: dict[str, list[str]]) -> Any:
    """The Hive partitioning of the pandas engine's scan: every partition column text,
    dictionary-encoded with ``values`` (each value once, in reading order)."""
    import pyarrow as pa
    import pyarrow.dataset as pds

    text = pa.dictionary(pa.int32(), pa.string())
    return pds.partitioning(
        pa.schema([(n, text) for n in names]), flavor="hive",
        dictionaries={n: pa.array(list(dict.fromkeys(values[n])), pa.string()) for n in names})


def text_columns(kind: str, columns: Sequence[Column], partitions: Sequence[str]) -> list[str]:
    """The columns the scan reads as text (CSV) or dictionaries (Parquet), as the pandas
    engine's dataset reader chooses them."""
    numbers = {c.name for c in columns if c.kind == "number"}
    wanted = dict.fromkeys(c.name for c in columns)
    return [n for n in wanted if n not in partitions and (kind == "csv" or n not in numbers)]


def read_dataset_piece(store: Store, files: Sequence[tuple[str, tuple[str, ...]]],
                       row_groups: tuple[int, ...] | None, columns: Sequence[Column],
                       head: int | None = None) -> pd.DataFrame:
    """The raw ``columns`` of one piece of a dataset (a run of one Parquet file's
    ``row_groups``, or whole ``files``, each with its partition values), the partition values
    as text columns and the read's filters pushed into the scan, as the pandas engine's scan
    gives them (rows in file order; not converted yet)."""
    import pyarrow as pa
    import pyarrow.dataset as pds

    read = store.read
    fs = filesystem(read.place, read.key)
    paths = [f for f, _ in files]
    parts = {n: [v[i] for _, v in files] for i, n in enumerate(store.partitions)}
    data = datasets.Dataset(store.shown, fs, store.root, paths, store.kind, parts)
    wanted = list(dict.fromkeys(c.name for c in columns))
    fmt = datasets.dataset_format(data, text_columns(store.kind, columns, store.partitions))
    try:
        dataset = pds.dataset(paths, filesystem=fs, format=fmt,
                              partitioning=partitioning(store.partitions, parts),
                              partition_base_dir=store.root, schema=store.schema)
        expression = row_expression(parts, store.shown, dataset, read.filters, read.pairs,
                                    read.role)
        if row_groups is not None:  # (a run of one file's row groups)
            fragment = next(iter(dataset.get_fragments())).subset(
                row_group_ids=list(row_groups))
            scanner = pds.Scanner.from_fragment(fragment, schema=dataset.schema,
                                                columns=wanted, filter=expression,
                                                use_threads=False)
        else:
            scanner = dataset.scanner(columns=wanted, filter=expression, use_threads=False)
        table = scanner.head(head) if head is not None else scanner.to_table()
    except (OSError, ValueError, pa.ArrowInvalid) as exc:
        raise InputError(
            f"The {read.role} {store.shown} (config key `{read.key}`) cannot be read: "
            f"{datasets.why_masked(exc)}"
        ) from None
    frame = table.to_pandas(split_blocks=True, self_destruct=True)
    for n in store.partitions:  # (the values of files whose rows were all filtered out)
        if n in frame.columns and isinstance(frame[n].dtype, pd.CategoricalDtype):
            frame[n] = frame[n].cat.remove_unused_categories()
    if store.kind == "csv":
        for c in columns:
            raw = frame[c.name]
            if c.kind in ("date", "number") and (
                    raw.dtype == object or pd.api.types.is_string_dtype(raw.dtype)
                    or isinstance(raw.dtype, pd.CategoricalDtype)):
                frame[c.name] = raw.where(~raw.isin(datasets.NA_TEXT))
    return frame.reset_index(drop=True)


def dataset_error(read: DatasetRead, columns: Sequence[Column]) -> InputError | None:
    """The pandas engine's refusal of the dataset ``read`` (``None``: it refuses nothing):
    its reader run over ``columns`` one at a time (one column of the dataset in memory), in
    the order it converts them, so the first refusal is the one it gives."""
    return first_refusal(columns, lambda c: datasets.read_dataset_columns(
        read.place, [c], role=read.role, key=read.key, allow_empty=True,
        filters=read.filters, pairs=read.pairs))
