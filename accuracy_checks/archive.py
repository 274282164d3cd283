"""The forecast archive: one Parquet snapshot of each checked forecast, by cycle and attempt.

Layout: ``<archive>/cycle=<YYYY-MM-DD>/attempt-<NNNN>.parquet`` holding the canonical
columns (keys, ``period``, ``issued``, ``forecast``, quantile columns, ``segment``). A snapshot
is written to ``<archive>/.incoming/`` first and then hard-linked to its final name, which
fails if the name is taken: an interrupted run leaves no half snapshot under a final name, and
two runs of the same cycle that start together still get distinct, consecutive attempt numbers.
"""

from __future__ import annotations

import os
import re
import time
import uuid
from dataclasses import dataclass
from pathlib import Path

import pandas as pd

from accuracy_checks import frames as F

_CYCLE_DIR = re.compile(r"^cycle=(\d{4}-\d{2}-\d{2}(?:T\d{2}-\d{2}-\d{2})?)$")
_ATTEMPT_FILE = re.compile(r"^attempt-(\d{4,})\.parquet$")
_INCOMING = ".incoming"
_STALE_SECONDS = 3600


def cycle_label(issued: pd.Timestamp) -> str:
    """The label of a cycle: its issue date (with the time only when it is not midnight).

    >>> cycle_label(pd.Timestamp("2026-03-02")), cycle_label(pd.Timestamp("2026-03-02 06:30"))
    ('2026-03-02', '2026-03-02T06-30-00')
    """
    if issued == issued.normalize():
        return issued.strftime("%Y-%m-%d")
    return issued.strftime("%Y-%m-%dT%H-%M-%S")


def label_to_timestamp(label: str) -> pd.Timestamp:
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

    def snapshot(self, frame: pd.DataFrame, issued: pd.Timestamp) -> Snapshot:
        """Write ``frame`` as the next attempt of its cycle, atomically."""
        label = cycle_label(issued)
        incoming = self.root / _INCOMING
        incoming.mkdir(parents=True, exist_ok=True)
        self._sweep(incoming)
        tmp = incoming / f"{uuid.uuid4().hex}.parquet"
        try:
            frame.to_parquet(tmp, index=False)
            with open(tmp, "rb") as fh:
                os.fsync(fh.fileno())
            cycle_dir = self.root / f"cycle={label}"
            cycle_dir.mkdir(parents=True, exist_ok=True)
            attempt = self._next_attempt(cycle_dir)
            while True:
                final = cycle_dir / f"attempt-{attempt:04d}.parquet"
                try:
                    os.link(tmp, final)
                    break
                except FileExistsError:
                    attempt += 1
            _fsync_dir(cycle_dir)
            return Snapshot(label, attempt, final)
        finally:
            tmp.unlink(missing_ok=True)

    @staticmethod
    def _next_attempt(cycle_dir: Path) -> int:
        taken = [
            int(m.group(1)) for f in cycle_dir.iterdir() if (m := _ATTEMPT_FILE.match(f.name))
        ]
        return max(taken, default=0) + 1

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
