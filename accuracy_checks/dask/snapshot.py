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

**On object storage** (:class:`RemoteParts`) the protocol is
:mod:`accuracy_checks.store.remote_archive`'s: each shard task uploads its part to
``.incoming/<uuid>.parquet/part-00007.parquet`` (an object appears only once complete); the
store's transaction writes the claim naming the attempt and the parts; after the commit the
parts are copied under ``cycle=<date>/attempt-NNNN.parquet/`` and the manifest written last
(:meth:`~accuracy_checks.store.remote_archive.RemoteArchive.publish_parts`), so the snapshot
exists only whole; an upload cut after the commit is finished by the next run from the claim.
"""

from __future__ import annotations

import functools
import json
import os
import shutil
import uuid
from dataclasses import dataclass, field

import pandas as pd

from accuracy_checks.config import Config
from accuracy_checks.errors import ConfigError
from accuracy_checks.sources.frames import cycle_label
from accuracy_checks.store.archive import (
    _INCOMING,
    Archive,
    StagedSnapshot,
    archive_url,
)
from accuracy_checks.store.remote_archive import RemoteArchive, open_archive

__all__ = ["RemoteParts", "StagedParts", "in_process", "remote_archive"]


@dataclass(frozen=True)
class StagedParts(StagedSnapshot):
    """A snapshot staged as a folder of parts (one per shard)."""

    @classmethod
    def start(cls, config: Config, issued: pd.Timestamp) -> StagedParts | RemoteParts:
        """An empty staging folder for the run's snapshot (on the archive's disk, which the
        workers must reach), or a staging prefix on object storage (:class:`RemoteParts`)."""
        url = archive_url(config.archive)
        if url is not None and in_process(url):
            raise ConfigError(
                f"The archive {remote_archive(url).location} lives in the memory of one "
                "process, which the dask engine's workers cannot write. Give `archive:` a "
                "folder or a URL of object storage the workers reach, or run with "
                "`engine: pandas` (or --no-snapshot).")
        if url is not None:
            return RemoteParts.start(url, issued)
        local = open_archive(config.archive)  # a folder (a path, or a file:// URL)
        if not isinstance(local, Archive):
            raise ConfigError(
                f"The archive {config.archive} is not a folder the workers can write; give "
                "`archive:` a local or shared folder or a URL of object storage, or run with "
                "`engine: pandas` (or --no-snapshot).")
        root = local.root
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


def in_process(url: str) -> bool:
    """Whether the archive at ``url`` lives in one process's memory (``memory://``): the
    workers can neither read nor write it."""
    return url.lower().startswith("memory://")


@functools.lru_cache(maxsize=8)
def remote_archive(url: str) -> RemoteArchive:
    """The archive at ``url``, opened once per process (on each worker, from the URL: its
    credentials come from the storage library's usual chain there)."""
    return RemoteArchive(url)


@dataclass(frozen=True)
class RemoteParts:
    """A snapshot staged on object storage as parts (one per shard), waiting for its attempt
    (module doc). Holds only text, so it travels to the workers as is."""

    url: str
    cycle: str
    name: str
    #: the attempt :meth:`place` claimed (set once, on the client)
    claimed: list[int] = field(default_factory=list, compare=False)

    @classmethod
    def start(cls, url: str, issued: pd.Timestamp) -> RemoteParts:
        archive = remote_archive(url)
        archive._sweep_incoming()
        return cls(url, cycle_label(issued), uuid.uuid4().hex)

    @property
    def archive(self) -> RemoteArchive:
        return remote_archive(self.url)

    @property
    def root(self) -> str:
        return self.url

    @property
    def path(self) -> str:
        return self.archive._shown(f"{_INCOMING}/{self.name}.parquet")

    def _staged(self, part: str = "") -> str:
        return self.archive._key(f"{_INCOMING}/{self.name}.parquet" + (f"/{part}" if part
                                                                        else ""))

    def _claim(self) -> str:
        return self.archive._key(f"{_INCOMING}/{self.name}.claim")

    def write_part(self, index: int, frame: pd.DataFrame) -> None:
        """Upload one shard's rows (on a worker); a failed upload leaves no object."""
        archive = self.archive
        archive.upload(self._staged(f"part-{index:05d}.parquet"), frame,
                       lambda exc: archive._error("written", exc))

    def _parts(self) -> list[str]:
        prefix = self._staged()
        return sorted(i.path[len(prefix):].strip("/")
                      for i in self.archive._files(f"{_INCOMING}/{self.name}.parquet"))

    def place(self, attempt: int, run_id: str = "") -> str:
        """Claim ``attempt`` for the staged parts (inside the store's transaction); the final
        objects are written by :meth:`publish`, after the commit."""
        claim = {"run_id": run_id, "cycle": self.cycle, "attempt": attempt,
                 "staged": f"{self.name}.parquet", "parts": self._parts()}
        try:
            with self.archive.fs.open_output_stream(self._claim()) as out:
                out.write(json.dumps(claim).encode())
        except Exception as exc:
            raise self.archive._error("written", exc) from None
        self.claimed[:] = [attempt]
        return self.archive.path_of(self.cycle, attempt)

    def publish(self) -> None:
        """The parts copied under the attempt's prefix, its manifest last; then the staged
        parts and the claim deleted. Raises ``ArchiveError`` when a copy fails (the claim
        stays: the next run finishes it)."""
        if not self.claimed:
            return
        parts = self._parts()
        self.archive.publish_parts(f"{self.name}.parquet", parts, self.cycle, self.claimed[0])
        self.discard()

    def discard(self) -> None:
        """Delete the staged parts and any claim."""
        for part in self._parts():
            self.archive._delete_quietly(self._staged(part))
        self.archive._delete_quietly(self._claim())
