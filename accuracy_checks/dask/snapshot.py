"""The snapshot written from the workers: a partitioned dataset with the no-half-snapshot
promise.

The staging protocol is the archive's (:mod:`accuracy_checks.store.archive`): the run writes
the whole snapshot under ``<archive>/.incoming`` first, and the store's transaction renames it
to ``cycle=<date>/attempt-NNNN.parquet`` (atomic), after which it is the cycle's snapshot.
Here the staged object is a folder ``.incoming/<uuid>.parquet/`` that each shard task fills
with its part (``part-00007.parquet``: the shard's forecast rows, the columns the pandas engine
archives), each written to a temporary name, flushed and renamed; the rename of the folder
makes the attempt appear whole or not at all. A failed run removes the folder; a killed one
leaves it in ``.incoming``, never under a final name.

Reading it back: a Parquet reader takes the folder as one dataset (``pd.read_parquet``). The
archive's listing and reader find it by name; its existence check asks for a file (a hook in
``store/archive.py``: ``_exists`` with ``Path.exists``), see docs/engines.md.
"""

from __future__ import annotations

import os
import shutil
import uuid
from dataclasses import dataclass
from pathlib import Path

import pandas as pd

from accuracy_checks.config import Config
from accuracy_checks.errors import ConfigError
from accuracy_checks.sources.frames import cycle_label
from accuracy_checks.store.archive import StagedSnapshot

__all__ = ["StagedParts"]

_INCOMING = ".incoming"


@dataclass(frozen=True)
class StagedParts(StagedSnapshot):
    """A snapshot staged as a folder of parts (one per shard)."""

    @classmethod
    def start(cls, config: Config, issued: pd.Timestamp) -> StagedParts:
        """An empty staging folder for the run's snapshot (on the archive's disk, which the
        workers must reach)."""
        if not isinstance(config.archive, Path):
            raise ConfigError(
                f"The archive {config.archive} is on object storage; the dask engine writes "
                "its snapshot from the workers to a folder they share, so give `archive:` a "
                "local or shared folder, or run with `engine: pandas` (or --no-snapshot).")
        root = Path(config.archive)
        folder = root / _INCOMING / f"{uuid.uuid4().hex}.parquet"
        folder.mkdir(parents=True, exist_ok=False)
        return cls(root, cycle_label(issued), folder)

    def write_part(self, index: int, frame: pd.DataFrame) -> None:
        """Write one shard's rows (on a worker): a temporary name, flushed, then renamed."""
        tmp = self.path / f".part-{index:05d}.{uuid.uuid4().hex[:8]}.tmp"
        final = self.path / f"part-{index:05d}.parquet"
        try:
            frame.to_parquet(tmp, index=False)
            with open(tmp, "rb") as fh:
                os.fsync(fh.fileno())
            os.replace(tmp, final)
        finally:
            if tmp.exists():
                tmp.unlink()

    def discard(self) -> None:
        """Remove the staged folder (the run was not recorded)."""
        shutil.rmtree(self.path, ignore_errors=True)
