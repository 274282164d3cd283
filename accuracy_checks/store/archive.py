"""The forecast archive: one Parquet snapshot of each checked forecast, by cycle and attempt.

Layout: ``<archive>/cycle=<YYYY-MM-DD>/attempt-<NNNN>.parquet`` holding the canonical
columns (keys, ``period``, ``issued``, ``forecast``, quantile columns, ``segment``).

**Attempt numbers come from the audit store**, which is the source of truth: a snapshot has
the number of the run recorded with it. The protocol (see :meth:`Store.record_run
<accuracy_checks.store.Store.record_run>`):

1. before the recording transaction, :meth:`Archive.stage` writes the snapshot in full to
   ``<archive>/.incoming/<random>.parquet`` and fsyncs it (slow, outside any lock);
2. inside the transaction, holding the store's write lock, the store takes the cycle's next
   attempt N; :meth:`Archive.retire_unrecorded` moves any file of that cycle numbered N or
   above (left by a run killed between step 3 and its commit: no record has that number) to
   ``<archive>/.orphans/``; :meth:`StagedSnapshot.place` renames the staged file to
   ``attempt-N`` (atomic, same folder tree) and fsyncs the folder;
3. the run and its results are inserted and the transaction commits.

A run killed at any point leaves either a full record with its snapshot, or no record (its
transaction rolls back) and at most an unrecorded snapshot that the next run of the cycle
moves aside; never half a file under a final name. Runs recorded without a snapshot (dry
runs, other engines) still take an attempt number, so the archive may skip numbers that the
store holds; it never holds a number the store does not. Staged files of runs killed long ago
are swept from ``.incoming``; ``.orphans`` is kept for inspection and safe to delete.

**Reading** (:meth:`Archive.last_recorded`): the store also says which snapshot is the last of
each cycle: the highest attempt recorded *with* a snapshot. That file is read, never an older
attempt in its place: a recorded snapshot that is missing or unreadable, or a cycle whose files
no run recorded, is a :class:`SnapshotFault`, and the engine leaves that cycle out with a
warning. Only without a store (the first run) is the folder's highest attempt taken as is.

**On object storage** (``archive: s3://bucket/archive``, any URL scheme but ``file://``) the
promise is the same but the order differs, since an object store has no atomic rename: the
final object is written after the record commits, and the next run finishes an upload that a
killed run left undone (:mod:`accuracy_checks.store.remote_archive`). ``open_archive``
(in that module) picks the kind from the location.

**Faults while writing** (an archive path that is a file, a folder that cannot be written, a
full disk) raise :class:`ArchiveError` naming the path: :meth:`Archive.check_usable` before
the checks run, and the writing steps themselves, which leave no half file behind.
"""

from __future__ import annotations

import contextlib
import os
import re
import shutil
import time
import uuid
from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from pathlib import Path
from typing import TYPE_CHECKING, Any, Literal

from accuracy_checks.errors import UsageError
from accuracy_checks.sources import frames as F
from accuracy_checks.sources.frames import cycle_label

if TYPE_CHECKING:  # pandas loads only when a snapshot is read or written
    import pandas as pd

_CYCLE_DIR = re.compile(r"^cycle=(\d{4}-\d{2}-\d{2}(?:T\d{2}-\d{2}-\d{2})?)$")
_ATTEMPT_FILE = re.compile(r"^attempt-(\d{4,})\.parquet$")
_INCOMING = ".incoming"
_ORPHANS = ".orphans"
_STALE_SECONDS = 3600


def label_to_timestamp(label: str) -> pd.Timestamp:
    import pandas as pd

    date, _, time_part = label.partition("T")
    return pd.Timestamp(f"{date} {time_part.replace('-', ':')}".strip())


class ArchiveError(UsageError):
    """The archive folder cannot be used: it is a file, or cannot be written (exit code 2)."""


def archive_url(location: object) -> str | None:
    """The URL of an archive given as a URL of object storage (``s3://bucket/archive``,
    a config's URL object), ``None`` for a local folder (a path, or a ``file://`` URL).

    >>> archive_url("s3://bucket/archive"), archive_url(Path("/data/archive"))
    ('s3://bucket/archive', None)
    """
    text = getattr(location, "url", location)
    if isinstance(text, str) and re.match(r"^[A-Za-z][A-Za-z0-9+.\-]*://", text):
        return None if text.lower().startswith("file://") else text
    return None


@dataclass(frozen=True)
class Snapshot:
    cycle: str
    attempt: int
    #: the file (a local path), or the object's URL as shown (secrets masked)
    path: Path | str

    @property
    def issued(self) -> pd.Timestamp:
        return label_to_timestamp(self.cycle)


#: what is wrong with a cycle's snapshot (see :class:`SnapshotFault`)
Problem = Literal["missing", "unreadable", "unrecorded"]


@dataclass(frozen=True)
class SnapshotFault:
    """A cycle whose last snapshot cannot be used, so the cycle is left out.

    ``missing``: the store records ``attempt`` with a snapshot, but the file is not there;
    ``unreadable``: the file is there but is not a readable snapshot (``detail`` says why);
    ``unrecorded``: the archive holds files of the cycle but the store records no run of it
    that wrote a snapshot (a run killed before its record committed leaves such a file).
    """

    snapshot: Snapshot
    problem: Problem
    detail: str = ""

    @property
    def cycle(self) -> str:
        return self.snapshot.cycle

    @property
    def issued(self) -> pd.Timestamp:
        return self.snapshot.issued

    def describe(self) -> str:
        """One sentence naming cycle, attempt and file, and what is wrong with it."""
        s = self.snapshot
        if self.problem == "missing":
            return (f"the audit store records attempt {s.attempt} of cycle {s.cycle} with a "
                    f"snapshot, but its file {s.path} is missing")
        if self.problem == "unreadable":
            return (f"the snapshot of cycle {s.cycle}, attempt {s.attempt} ({s.path}) cannot "
                    f"be read: {self.detail}")
        return (f"the archive holds {s.path} (cycle {s.cycle}, attempt {s.attempt}), but the "
                "audit store records no run of that cycle that wrote a snapshot (a run "
                "killed before its record was committed leaves such a file)")


class SnapshotUnreadable(Exception):
    """Raised by :meth:`Archive.read` with the reason a snapshot file cannot be used."""


class Archive:
    """Snapshots of checked forecasts under one folder."""

    def __init__(self, root: Path) -> None:
        self.root = Path(root)
        #: the archive as shown in messages and records
        self.location = str(self.root)

    def snapshots(self) -> list[Snapshot]:
        """Every snapshot, ordered by cycle then attempt."""
        if not self.root.is_dir():
            return []
        out = []
        for cycle_dir in self.root.iterdir():
            m = _CYCLE_DIR.match(cycle_dir.name)
            if not m or not cycle_dir.is_dir():
                continue
            for f in cycle_dir.iterdir():
                a = _ATTEMPT_FILE.match(f.name)
                if a:
                    out.append(Snapshot(m.group(1), int(a.group(1)), f))
        return sorted(out, key=lambda s: (s.cycle, s.attempt))

    def latest_attempts(self, before: pd.Timestamp | None = None) -> list[Snapshot]:
        """The highest-numbered file of each cycle (issued strictly before ``before`` if
        given), by the folder alone: what a run without an audit store uses."""
        last: dict[str, Snapshot] = {}
        for s in self.snapshots():
            if before is None or s.issued < before:
                last[s.cycle] = s
        return list(last.values())

    def path_of(self, cycle: str, attempt: int) -> Path:
        """Where the snapshot of ``cycle``'s attempt ``attempt`` lives."""
        return self.root / f"cycle={cycle}" / f"attempt-{attempt:04d}.parquet"

    def last_recorded(self, recorded: Mapping[str, int] | None,
                      before: pd.Timestamp | None = None
                      ) -> tuple[list[Snapshot], list[SnapshotFault]]:
        """The last snapshot of each cycle issued strictly before ``before``, ordered by cycle,
        and the cycles whose last snapshot cannot be used.

        ``recorded`` maps each cycle to its highest attempt recorded with a snapshot in the
        audit store (:func:`accuracy_checks.store.archived_attempts`). That attempt's file is
        the cycle's snapshot; if it is missing the cycle is a ``missing`` fault, never replaced
        by an older attempt. A cycle with files but no such record is an ``unrecorded`` fault.
        With ``recorded=None`` (no store yet) the folder's highest attempt of each cycle is
        used as is. Files are only looked up here, not read (see :meth:`read`).
        """
        if recorded is None:
            return self.latest_attempts(before), []
        on_disk = {s.cycle: s for s in self.latest_attempts(before)}
        found: list[Snapshot] = []
        faults: list[SnapshotFault] = []
        for cycle, attempt in recorded.items():
            snap = Snapshot(cycle, int(attempt), self.path_of(cycle, int(attempt)))
            if not _CYCLE_DIR.match(f"cycle={cycle}"):
                continue  # not an issue-date label: no snapshot of ours
            if before is not None and snap.issued >= before:
                continue
            if self._exists(snap):
                found.append(snap)
            else:
                faults.append(SnapshotFault(snap, "missing"))
        faults += [SnapshotFault(s, "unrecorded") for c, s in on_disk.items()
                   if c not in recorded]
        return (sorted(found, key=lambda s: s.cycle),
                sorted(faults, key=lambda f: f.cycle))

    def read(self, snap: Snapshot, required: Sequence[str] = ()) -> pd.DataFrame:
        """The rows of one snapshot file with ``attempt`` and ``source`` = ``"archive"``.

        Raises :class:`SnapshotUnreadable` (with the reason) when the file is gone, is not
        Parquet, is damaged, or lacks a ``required`` column.
        """
        import pandas as pd

        try:
            frame = pd.read_parquet(snap.path)
        except FileNotFoundError:
            raise SnapshotUnreadable("the file is missing") from None
        except Exception as exc:  # pyarrow raises several types for damaged files
            reason = " ".join(str(exc).replace(f" '{snap.path}'", "").split())
            reason = reason or type(exc).__name__
            raise SnapshotUnreadable(f"it is not a readable Parquet file ({reason})") from None
        return self._finish_read(frame, snap, required)

    def snapshot_files(self, snap: Snapshot) -> list[str]:
        """The Parquet files that hold ``snap``, in the order :meth:`read` reads them: the
        file itself, or the parts of a folder (its files whose names start with neither
        ``.`` nor ``_``, by name, as a Parquet dataset reader takes them). Only listed, not
        read; empty when the snapshot is not there."""
        path = Path(snap.path)
        if path.is_file():
            return [str(path)]
        if not path.is_dir():
            return []
        return sorted(str(f) for f in path.iterdir()
                      if f.is_file() and not f.name.startswith((".", "_")))

    def _exists(self, snap: Snapshot) -> bool:
        # a file, or a folder of parts (the dask engine's workers write one part each)
        return Path(snap.path).exists()

    @staticmethod
    def _finish_read(frame: pd.DataFrame, snap: Snapshot,
                     required: Sequence[str]) -> pd.DataFrame:
        """``frame`` checked for the ``required`` columns, with ``attempt`` and ``source``."""
        lacking = [c for c in required if c not in frame.columns]
        if lacking:
            raise SnapshotUnreadable(
                f"it lacks the column(s) {', '.join(lacking)} (columns: "
                f"{', '.join(map(str, frame.columns[:12]))})")
        frame = frame.assign(**{F.ATTEMPT: snap.attempt, F.SOURCE: "archive"})
        frame[F.ATTEMPT] = frame[F.ATTEMPT].astype("Int64")
        return frame

    def check_usable(self, *, write: bool = True) -> None:
        """Raise :class:`ArchiveError` if the archive cannot be used: its path (or a folder
        above it) is a file, or (with ``write``) the folder that would hold the snapshots
        cannot be written. Creates nothing; called before the checks run, so they fail fast.
        """
        path = self.root
        while not path.exists() and path.parent != path:
            path = path.parent
        if not path.is_dir():
            where = ("The archive path" if path == self.root
                     else f"The archive {self.root} cannot be created: the path")
            raise ArchiveError(
                f"{where} {path} is a file, not a folder, so earlier forecasts cannot be "
                "read from it nor this one archived. Point `archive:` in the config at a "
                "folder (it is created if missing), or move that file away."
            )
        if not write:
            return
        incoming = self.root / _INCOMING
        for folder in ([incoming] if incoming.is_dir() else []) + [path]:
            if not can_write(folder):
                raise ArchiveError(
                    f"The archive folder {self.root} cannot be written: no permission to "
                    f"create files in {folder}. Give the user running the checks write "
                    "access to it, or point `archive:` in the config at a folder it may "
                    "write (with --no-snapshot nothing is archived)."
                )

    def stage(self, frame: pd.DataFrame, issued: pd.Timestamp) -> StagedSnapshot:
        """Write ``frame`` in full to the staging folder (step 1 of the protocol above).

        Raises :class:`ArchiveError` when it cannot be written (no half file is left)."""
        incoming = self.root / _INCOMING
        tmp = incoming / f"{uuid.uuid4().hex}.parquet"
        try:
            incoming.mkdir(parents=True, exist_ok=True)
            self._sweep(incoming)
            write_snapshot(frame, str(tmp))
            with open(tmp, "rb") as fh:
                os.fsync(fh.fileno())
        except OSError as exc:
            _unlink_quietly(tmp)
            raise _write_error(self.root, exc) from None
        except BaseException:
            _unlink_quietly(tmp)
            raise
        return StagedSnapshot(self.root, cycle_label(issued), tmp)

    def finish_pending(self, recorded_as: Any) -> list[Path | str]:
        """Nothing to finish on disk: the snapshot is renamed inside the transaction (object
        storage publishes after the commit, see :mod:`~accuracy_checks.store.remote_archive`)."""
        return []

    def retire_unrecorded(self, cycle: str, first: int) -> list[Path]:
        """Move the cycle's snapshots numbered ``first`` or above to ``.orphans/`` (step 2).

        Call only under the store's write lock with ``first`` = the attempt being allocated:
        no recorded run has such a number, so these files were left by runs killed before
        their record committed. Returns where they went.
        """
        cycle_dir = self.root / f"cycle={cycle}"
        if not cycle_dir.is_dir():
            return []
        moved = []
        for f in sorted(cycle_dir.iterdir()):
            m = _ATTEMPT_FILE.match(f.name)
            if not m or int(m.group(1)) < first:
                continue
            dest_dir = self.root / _ORPHANS / f"cycle={cycle}"
            dest = dest_dir / f"{f.stem}.{uuid.uuid4().hex[:8]}.parquet"
            try:
                dest_dir.mkdir(parents=True, exist_ok=True)
                os.replace(f, dest)
            except OSError as exc:
                raise _write_error(self.root, exc) from None
            moved.append(dest)
        if moved:
            _fsync_dir(cycle_dir)
        return moved

    @staticmethod
    def _sweep(incoming: Path) -> None:
        """Remove temp files left by runs that were killed long ago."""
        cutoff = time.time() - _STALE_SECONDS
        for f in incoming.iterdir():
            try:
                if f.stat().st_mtime < cutoff:
                    if f.is_dir():  # a folder of parts staged by the dask engine
                        shutil.rmtree(f)
                    else:
                        f.unlink()
            except OSError:
                pass


@dataclass(frozen=True)
class StagedSnapshot:
    """A snapshot written in full under ``<archive>/.incoming``, waiting for its attempt."""

    root: Path
    cycle: str
    path: Path

    def place(self, attempt: int, run_id: str = "") -> Path:
        """Rename the staged file to ``cycle=<cycle>/attempt-<attempt>.parquet`` (atomic)."""
        cycle_dir = self.root / f"cycle={self.cycle}"
        final = cycle_dir / f"attempt-{attempt:04d}.parquet"
        try:
            cycle_dir.mkdir(parents=True, exist_ok=True)
            os.replace(self.path, final)
        except OSError as exc:
            raise _write_error(self.root, exc) from None
        _fsync_dir(cycle_dir)
        return final

    def publish(self) -> None:
        """Nothing left to do on disk: :meth:`place` renamed the file inside the
        transaction."""

    def discard(self) -> None:
        """Remove the staged file (the run was not recorded)."""
        _unlink_quietly(self.path)


def write_snapshot(frame: pd.DataFrame, where: Any) -> None:
    """Write ``frame`` as a snapshot's Parquet file to ``where`` (a path or a writable binary
    stream): the columns and pandas metadata of ``frame.to_parquet(index=False)``, so every
    reader sees the same table, with the settings that cost least for this data (measured in
    ``bench/README.md``): the value columns (floats, which neither repeat nor compress) plain
    and uncompressed; every other column (keys, segment, dates: few distinct values)
    dictionary-encoded and snappy-compressed; min/max statistics on the date columns only
    (``period``, ``issued``: what a reader prunes row groups by)."""
    import json

    import pyarrow as pa
    import pyarrow.parquet as pq

    table = pa.Table.from_pandas(frame, preserve_index=False)
    if frame.attrs:  # as pandas keeps them
        table = table.replace_schema_metadata(
            {**(table.schema.metadata or {}), "PANDAS_ATTRS": json.dumps(frame.attrs)})
    fields = list(table.schema)
    values = [f.name for f in fields if pa.types.is_floating(f.type)]
    coded = [f.name for f in fields if f.name not in values]
    dates = [f.name for f in fields if pa.types.is_timestamp(f.type) or pa.types.is_date(f.type)]
    pq.write_table(table, where, use_dictionary=coded or False,
                   compression={**dict.fromkeys(coded, "snappy"), **dict.fromkeys(values, "none")},
                   write_statistics=dates or False)


def _unlink_quietly(path: Path) -> None:
    with contextlib.suppress(OSError):  # nothing more can be done; the sweep removes it later
        path.unlink(missing_ok=True)


def can_write(folder: Path) -> bool:
    """Whether a file can be created in ``folder`` (tried for real: permission bits do not
    tell for root, ACLs or read-only mounts). The probe file is removed at once."""
    import tempfile

    try:
        fd, name = tempfile.mkstemp(prefix=".accuracy-checks-probe-", dir=folder)
    except OSError:
        return False
    os.close(fd)
    _unlink_quietly(Path(name))
    return True


def _write_error(root: Path, exc: OSError) -> ArchiveError:
    """An :class:`ArchiveError` for a failed write under the archive ``root``."""
    where = f" ({exc.filename})" if exc.filename else ""
    return ArchiveError(
        f"The forecast could not be archived under {root}{where}: "
        f"{exc.strerror or exc}. Nothing was recorded and no snapshot was kept. Check that "
        "the archive folder exists as a folder, may be written by the user running the checks, "
        "and has free space (with --no-snapshot nothing is archived)."
    )


def _fsync_dir(path: Path) -> None:
    try:
        fd = os.open(path, os.O_RDONLY)
    except OSError:
        return
    try:
        os.fsync(fd)
    except OSError:
        pass
    finally:
        os.close(fd)
