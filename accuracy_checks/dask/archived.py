"""The archived earlier cycles, read on the workers.

The archive's reader (:func:`accuracy_checks.engine.archived_cycles`) chooses on the client
which snapshot of each cycle the run uses, as for the pandas engine (the last one the audit
store records, the warnings of the cycles left out, the previous cycle), but each snapshot is
only *opened* there (:func:`open_snapshot`): its files listed (a file, or a dask engine's
folder or prefix of parts) and their Parquet footers read (row groups, columns). The rows are
read on the workers in pieces (runs of row groups), in three steps:

1. each piece's distinct (issue date, period) pairs (:func:`cycle_pairs`: two columns read):
   the client derives each snapshot's cycle starts (issue date → first period, as
   :func:`~accuracy_checks.evaluation.join.prune_earlier` takes them from the whole frame),
   the first period of each cycle among the rows the evaluation uses (for the accuracy
   stage), and which pieces hold a row the evaluation uses at all (the others are never read
   again);
2. the rows of those pieces (:class:`ArchivedReader`): ``attempt`` and ``source`` as
   ``Archive.read`` adds them, cut by ``prune_earlier`` with the snapshot's starts, keys as
   text, ``__order`` (the pandas engine's reading order: snapshots by cycle, then files, row
   groups and rows) and ``__shard``; they are sharded like every other input and reach each
   shard where the rows read on the client used to;
3. the previous cycle's key columns (:class:`PreviousKeys`), sharded: each shard counts its
   distinct series, and the counts add up (a series lives in one shard).

So the client holds no archived row: only file lists, footers and the (issue date, period)
pairs. A snapshot on object storage is read the same way, each worker opening the archive's
URL itself (its credentials come from the storage library's usual chain on the worker).
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

import numpy as np
import pandas as pd

from accuracy_checks.config import Config
from accuracy_checks.dask.read import ORDER, PIECE_ROWS, SHARD, shard_of
from accuracy_checks.dask.snapshot import in_process, remote_archive
from accuracy_checks.errors import ConfigError
from accuracy_checks.evaluation.join import CYCLE_START, prune_earlier
from accuracy_checks.sources import frames as F
from accuracy_checks.sources.load import ArchivedCycles, ArchiveReader
from accuracy_checks.store.archive import Archive, Snapshot, SnapshotUnreadable, archive_url

__all__ = ["ArchivedPiece", "ArchivedReader", "OpenedSnapshot", "PreviousKeys",
           "WorkerArchived", "archived_on_workers", "cycle_pairs", "open_snapshot"]

_ROW_BITS = 40


@dataclass(frozen=True)
class OpenedSnapshot:
    """A snapshot's files and their row groups' sizes (no rows read)."""

    snapshot: Snapshot
    #: the archive's URL (object storage, opened by each worker); ``None``: a local folder
    url: str | None
    files: tuple[str, ...]
    #: rows of each row group, per file
    groups: tuple[tuple[int, ...], ...]


@dataclass(frozen=True)
class ArchivedPiece:
    """A run of row groups of one snapshot file, read by one task."""

    file: str
    url: str | None
    row_groups: tuple[int, ...]
    #: the piece's number in the run's reading order (``__order``)
    ordinal: int
    attempt: int
    #: the snapshot's cycle starts (issue date → first period), for ``prune_earlier``
    starts: pd.Series | None = None


def _parquet(file: str, url: str | None) -> Any:
    import pyarrow.parquet as pq

    if url is None:
        return pq.ParquetFile(file)
    return pq.ParquetFile(remote_archive(url).fs.open_input_file(file))


def open_snapshot(archive: Any, snap: Snapshot, required: list[str]) -> OpenedSnapshot:
    """The opener the dask engine gives the archive's reader (``choose``): ``snap``'s files
    and footers. Raises ``SnapshotUnreadable`` with the pandas engine's reason (the rows are
    then read by ``archive.read`` on the client to tell it, which fails as quickly)."""
    url = getattr(archive, "url", None)
    try:
        files = archive.snapshot_files(snap)
        if not files:
            raise FileNotFoundError(str(snap.path))
        handles = [_parquet(f, url) for f in files]
        groups = tuple(tuple(h.metadata.row_group(i).num_rows
                             for i in range(h.metadata.num_row_groups)) for h in handles)
        empty = handles[0].schema_arrow.empty_table().to_pandas()
    except Exception:
        archive.read(snap, required)  # the pandas engine's reason
        raise SnapshotUnreadable("it is not a readable Parquet file") from None
    Archive._finish_read(empty, snap, required)  # a column lacking: the same message
    return OpenedSnapshot(snap, url, tuple(files), groups)


def _pieces(opened: OpenedSnapshot, start: int) -> list[ArchivedPiece]:
    """The pieces of a snapshot, numbered from ``start``: runs of row groups up to
    :data:`~accuracy_checks.dask.read.PIECE_ROWS` rows."""
    out: list[ArchivedPiece] = []
    for file, sizes in zip(opened.files, opened.groups, strict=True):
        group: list[int] = []
        n = 0
        for i, size in enumerate(sizes):
            if group and n + size > PIECE_ROWS:
                out.append(ArchivedPiece(file, opened.url, tuple(group), start + len(out),
                                         opened.snapshot.attempt))
                group, n = [], 0
            group.append(i)
            n += size
        if group:
            out.append(ArchivedPiece(file, opened.url, tuple(group), start + len(out),
                                     opened.snapshot.attempt))
    return out


def _read(piece: ArchivedPiece, columns: list[str] | None = None,
          head: int | None = None) -> pd.DataFrame:
    handle = _parquet(piece.file, piece.url)
    if head is not None:
        batch = next(handle.iter_batches(batch_size=head, row_groups=[piece.row_groups[0]],
                                         columns=columns))
        return batch.to_pandas().reset_index(drop=True)
    table = handle.read_row_groups(list(piece.row_groups), columns=columns)
    return table.to_pandas().reset_index(drop=True)


def cycle_pairs(piece: ArchivedPiece) -> pd.DataFrame | str:
    """A piece's distinct (issue date, period) pairs (step 1 of the module doc), or why the
    worker could not read it (the client then tells an unreadable snapshot from a worker
    that cannot reach the archive)."""
    try:
        frame = _read(piece, [F.ISSUED, F.PERIOD])
    except Exception as exc:  # pyarrow raises several types for damaged or absent files
        return " ".join(f"{type(exc).__name__}: {exc}".split())
    return frame.drop_duplicates(ignore_index=True)


def _unreadable_on_workers(archive: Any, failed: dict[str, tuple[Snapshot, str]],
                           opened: dict[str, OpenedSnapshot]) -> Any:
    """The opener of a second choice, once some snapshots' pieces failed on the workers:
    those are unreadable with the pandas engine's reason (``archive.read`` on the client
    fails as quickly); one the client reads whole is a worker that cannot reach the archive
    (exit 2). The others are as opened the first time."""
    def opener(_: Any, snap: Snapshot, required: list[str]) -> OpenedSnapshot:
        if snap.cycle in failed:
            archive.read(snap, required)  # raises SnapshotUnreadable when it is damaged
            raise ConfigError(
                f"The dask engine's workers cannot read the archived snapshot {snap.path} "
                f"that this process reads ({failed[snap.cycle][1]}). The workers must reach "
                "the archive at the same path or URL as the client (one machine, a shared "
                "file system, or object storage with credentials on every worker); or run "
                "with `engine: pandas`.")
        return opened[snap.cycle]

    return opener


def _text(frame: pd.DataFrame, keys: tuple[str, ...]) -> pd.DataFrame:
    """Keys as text, the other categoricals (segment and segment columns) as objects, as the
    rows read on the client were handed to the workers."""
    out = {k: frame[k].astype(object).astype("str") for k in keys}
    out |= {c: frame[c].astype(object) for c in frame.columns
            if c not in out and (c == F.SEGMENT
                                 or isinstance(frame[c].dtype, pd.CategoricalDtype))}
    return frame.assign(**out)


@dataclass(frozen=True)
class ArchivedReader:
    """A piece's rows the evaluation uses (step 2 of the module doc), for ``from_map``."""

    keys: tuple[str, ...]
    n_shards: int
    span: tuple[pd.Timestamp, ...]
    lags: tuple[int, ...]
    frequency: str

    def __call__(self, piece: ArchivedPiece, head: int | None = None) -> pd.DataFrame:
        frame = _read(piece, head=head)
        frame = frame.assign(**{F.ATTEMPT: piece.attempt, F.SOURCE: "archive"})
        frame[F.ATTEMPT] = frame[F.ATTEMPT].astype("Int64")
        frame["__row"] = np.arange(len(frame), dtype=np.int64)
        frame = prune_earlier(frame, periods=list(self.span), lags=list(self.lags),
                              frequency=self.frequency, starts=piece.starts)
        if CYCLE_START not in frame.columns:  # no row: the columns of a pruned frame
            frame = frame.assign(**{CYCLE_START: pd.Series(dtype="datetime64[ns]"),
                                    F.LAG: pd.Series(dtype="int64")})
        rows = frame.pop("__row").to_numpy(dtype=np.int64)
        frame = _text(frame, self.keys)
        frame[ORDER] = (np.int64(piece.ordinal) << _ROW_BITS) + rows
        frame[SHARD] = shard_of(frame, list(self.keys), self.n_shards)
        return frame


@dataclass(frozen=True)
class PreviousKeys:
    """A piece of the previous cycle's snapshot: its key columns as text and ``__shard``
    (step 3 of the module doc), for ``from_map``."""

    keys: tuple[str, ...]
    n_shards: int

    def __call__(self, piece: ArchivedPiece, head: int | None = None) -> pd.DataFrame:
        frame = _read(piece, list(self.keys), head=head).drop_duplicates(ignore_index=True)
        frame = _text(frame, self.keys)  # each series once a piece: less to shuffle
        frame[SHARD] = shard_of(frame, list(self.keys), self.n_shards)
        return frame


@dataclass
class WorkerArchived(ArchivedCycles):
    """The archive's part of a run whose rows stay on the workers: ``frames`` and
    ``previous`` are empty; the pieces to read, the cycles' first periods among the rows the
    evaluation uses, and the previous cycle's pieces (``None``: no previous cycle) instead."""

    pieces: list[ArchivedPiece] = field(default_factory=list)
    #: issue date → first period among the rows the evaluation uses (the accuracy stage's)
    starts: pd.Series | None = None
    previous_pieces: list[ArchivedPiece] | None = None
    reader: ArchivedReader | None = None

    def rows(self, n_shards: int) -> Any:
        """The rows the evaluation uses, as a dask dataframe (``None``: none)."""
        if not self.pieces or self.reader is None:
            return None
        import dask.dataframe as dd

        reader = ArchivedReader(self.reader.keys, n_shards, self.reader.span,
                                self.reader.lags, self.reader.frequency)
        meta = reader(self.pieces[0], head=64).iloc[:0]
        return dd.from_map(reader, list(self.pieces), meta=meta, enforce_metadata=False)

    def previous_keys(self, n_shards: int) -> Any:
        """The previous cycle's key columns, as a dask dataframe (``None``: no row)."""
        if not self.previous_pieces or self.reader is None:
            return None
        import dask.dataframe as dd

        reader = PreviousKeys(self.reader.keys, n_shards)
        meta = reader(self.previous_pieces[0], head=64).iloc[:0]
        return dd.from_map(reader, list(self.previous_pieces), meta=meta,
                           enforce_metadata=False)


def archived_on_workers(client: Any, config: Config, archive: ArchiveReader,
                        issued: pd.Timestamp, history_cycles: set[pd.Timestamp],
                        span: tuple[pd.Timestamp, ...], *, base: int) -> ArchivedCycles:
    """The archived cycles of the run, their rows left on the workers (module doc); pieces
    numbered from ``base``. A reader that cannot choose without reading (one given by a
    caller), or an archive in the client's memory (``memory://``), reads on the client."""
    lags = list(config.evaluation.lags)

    def prune(frame: pd.DataFrame) -> pd.DataFrame:
        return prune_earlier(frame, periods=list(span), lags=lags, frequency=config.frequency)

    choose = getattr(archive, "choose", None)
    url = archive_url(config.archive)
    if choose is None or (url is not None and in_process(url)):
        return archive(issued, history_cycles, prune)
    chosen = choose(issued, history_cycles, open_snapshot)
    groups: list[tuple[OpenedSnapshot, list[ArchivedPiece]]] = []
    for snap in chosen.frames:  # what the opener returned, in the reader's order
        groups.append((snap, _pieces(snap, base + sum(len(p) for _, p in groups))))
    every = [p for _, parts in groups for p in parts]
    found = iter(client.gather(client.map(cycle_pairs, every, pure=False)) if every else [])
    scanned = [(snap, parts, [next(found) for _ in parts]) for snap, parts in groups]
    failed = {snap.snapshot.cycle: (snap.snapshot, next(w for w in got if isinstance(w, str)))
              for snap, _, got in scanned if any(isinstance(w, str) for w in got)}
    if failed:  # the same choice again, those snapshots unreadable as for the pandas engine
        from accuracy_checks.store.remote_archive import open_archive

        by_cycle = {snap.snapshot.cycle: snap for snap, _, _ in scanned}
        if chosen.previous is not None:
            by_cycle[chosen.previous.snapshot.cycle] = chosen.previous
        chosen = choose(issued, history_cycles, _unreadable_on_workers(
            open_archive(config.archive), failed, by_cycle))
        scanned = [t for t in scanned if t[0].snapshot.cycle not in failed]
    kept: list[ArchivedPiece] = []
    starts: list[pd.Series] = []
    for _, parts, pairs_of in scanned:
        if not parts:
            continue
        pairs = pd.concat(pairs_of, ignore_index=True).drop_duplicates(ignore_index=True)
        first = pairs.groupby(F.ISSUED, sort=False)[F.PERIOD].min()
        used = prune_earlier(pairs, periods=list(span), lags=lags,
                             frequency=config.frequency, starts=first)
        if not len(used):
            continue
        starts.append(used.groupby(F.ISSUED, sort=False)[F.PERIOD].min())
        wanted = used[[F.ISSUED, F.PERIOD]]
        for piece, got in zip(parts, pairs_of, strict=True):
            if len(got.merge(wanted, on=[F.ISSUED, F.PERIOD], how="inner")):
                kept.append(ArchivedPiece(piece.file, piece.url, piece.row_groups,
                                          piece.ordinal, piece.attempt, first))
    previous = chosen.previous
    prev_pieces = None if previous is None else _pieces(previous, 0)
    from accuracy_checks.dask.plan import min_starts

    keys = tuple(config.forecast.keys)
    return WorkerArchived(
        previous_label=chosen.previous_label, notes=chosen.notes, n_read=chosen.n_read,
        pieces=kept, starts=min_starts(starts) if starts else None,
        previous_pieces=prev_pieces,
        reader=ArchivedReader(keys, 0, tuple(span), tuple(lags), config.frequency))
