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
"""

from __future__ import annotations

import os
import re
import time
import uuid
from dataclasses import dataclass
from pathlib import Path
from typing import TYPE_CHECKING

from accuracy_checks import frames as F

if TYPE_CHECKING:  # pandas loads only when a snapshot is read or written
    import pandas as pd

_CYCLE_DIR = re.compile(r"^cycle=(\d{4}-\d{2}-\d{2}(?:T\d{2}-\d{2}-\d{2})?)$")
_ATTEMPT_FILE = re.compile(r"^attempt-(\d{4,})\.parquet$")
_INCOMING = ".incoming"
_ORPHANS = ".orphans"
_STALE_SECONDS = 3600


def cycle_label(issued: pd.Timestamp) -> str:
    """The label of a cycle: its issue date (with the time only when it is not midnight).

    >>> import pandas as pd
    >>> cycle_label(pd.Timestamp("2026-03-02")), cycle_label(pd.Timestamp("2026-03-02 06:30"))
    ('2026-03-02', '2026-03-02T06-30-00')
    """
    if issued == issued.normalize():
        return issued.strftime("%Y-%m-%d")
    return issued.strftime("%Y-%m-%dT%H-%M-%S")


def label_to_timestamp(label: str) -> pd.Timestamp:
    import pandas as pd

    date, _, time_part = label.partition("T")
    return pd.Timestamp(f"{date} {time_part.replace('-', ':')}".strip())


@dataclass(frozen=True)
class Snapshot:
    cycle: str
    attempt: int
    path: Path

    @property
    def issued(self) -> pd.Timestamp:
        return label_to_timestamp(self.cycle)


class Archive:
    """Snapshots of checked forecasts under one folder."""

    def __init__(self, root: Path) -> None:
        self.root = Path(root)

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
        """The last attempt of each cycle (issued strictly before ``before`` if given)."""
        last: dict[str, Snapshot] = {}
        for s in self.snapshots():
            if before is None or s.issued < before:
                last[s.cycle] = s
        return list(last.values())

    def load(self, snapshots: list[Snapshot]) -> pd.DataFrame:
        """The snapshots' rows, with ``attempt`` and ``source`` = ``"archive"``."""
        import pandas as pd

        parts = [
            pd.read_parquet(s.path).assign(
                **{F.ATTEMPT: s.attempt, F.SOURCE: "archive"}
            )
            for s in snapshots
        ]
        if not parts:
            return pd.DataFrame()
        frame = pd.concat(parts, ignore_index=True)
        frame[F.ATTEMPT] = frame[F.ATTEMPT].astype("Int64")
        return frame

    def stage(self, frame: pd.DataFrame, issued: pd.Timestamp) -> StagedSnapshot:
        """Write ``frame`` in full to the staging folder (step 1 of the protocol above)."""
        incoming = self.root / _INCOMING
        incoming.mkdir(parents=True, exist_ok=True)
        self._sweep(incoming)
        tmp = incoming / f"{uuid.uuid4().hex}.parquet"
        try:
            frame.to_parquet(tmp, index=False)
            with open(tmp, "rb") as fh:
                os.fsync(fh.fileno())
        except BaseException:
            tmp.unlink(missing_ok=True)
            raise
        return StagedSnapshot(self.root, cycle_label(issued), tmp)

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
            dest_dir.mkdir(parents=True, exist_ok=True)
            dest = dest_dir / f"{f.stem}.{uuid.uuid4().hex[:8]}.parquet"
            os.replace(f, dest)
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
                    f.unlink()
            except OSError:
                pass


@dataclass(frozen=True)
class StagedSnapshot:
    """A snapshot written in full under ``<archive>/.incoming``, waiting for its attempt."""

    root: Path
    cycle: str
    path: Path

    def place(self, attempt: int) -> Path:
        """Rename the staged file to ``cycle=<cycle>/attempt-<attempt>.parquet`` (atomic)."""
        cycle_dir = self.root / f"cycle={self.cycle}"
        cycle_dir.mkdir(parents=True, exist_ok=True)
        final = cycle_dir / f"attempt-{attempt:04d}.parquet"
        os.replace(self.path, final)
        _fsync_dir(cycle_dir)
        return final

    def discard(self) -> None:
        """Remove the staged file (the run was not recorded)."""
        self.path.unlink(missing_ok=True)


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
