"""The forecast archive on object storage (``s3://``, ``gs://``, ``az://``, ``memory://``…).

Same layout and the same promise as on disk (:mod:`accuracy_checks.store.archive`): no half
snapshot is ever visible under a final name, and a final name holds only a snapshot the audit
store records. Object stores have no atomic rename, so the order differs:

1. :meth:`RemoteArchive.stage` writes the snapshot in full to
   ``<archive>/.incoming/<random>.parquet`` (an object appears only once its upload is
   complete), outside any lock;
2. inside the store's transaction, holding its write lock, the store takes the cycle's next
   attempt N; final objects of that cycle numbered N or above (none are expected: see below)
   are moved to ``<archive>/.orphans/``; :meth:`RemoteStaged.place` writes a small claim
   ``<archive>/.incoming/<random>.claim`` naming the run, the cycle, N and the staged object;
3. the run is inserted and the transaction commits;
4. :meth:`RemoteStaged.publish` copies the staged object to
   ``cycle=<date>/attempt-<NNNN>.parquet`` (a server-side copy: the final name appears only
   complete, and only after the record exists), then deletes the staged object and its claim.

**A snapshot of parts** (the dask engine's workers write one part each) is staged as
``.incoming/<random>.parquet/part-NNNNN.parquet`` and published under the final prefix
``cycle=<date>/attempt-<NNNN>.parquet/`` by copying each part, then writing the manifest
``_parts.json`` (the parts' names) last: the snapshot exists only once its manifest does, so
a publish cut half way is never read as a snapshot; its claim names the parts, and the next
run finishes it as for one object (:meth:`RemoteArchive.publish_parts`).

A run killed before step 3 leaves no record; its staged object and claim are debris, swept
once they are an hour old. A run killed between steps 3 and 4 leaves a record whose snapshot
is not there yet: the next run finishes it (:meth:`RemoteArchive.finish_pending`, called by
:meth:`Store.finish_snapshots <accuracy_checks.store.Store.finish_snapshots>` before anything
is read) from the claim, if the store records that very run as that attempt and the staged
object is still there. If it is gone, the cycle is "recorded but missing": the engine leaves it
out with an ``archive.snapshot`` warning, as on disk.

**Secrets.** The URL is kept as written; ``${NAME}`` is replaced from the environment only to
open the filesystem. Every path shown (messages, the recorded snapshot path, the report) is
built on the URL as written with any secret masked, and error texts of the storage library are
scrubbed of the expanded values. Credentials otherwise come from the storage library's usual
chain (for S3: ``AWS_ACCESS_KEY_ID``/``AWS_SECRET_ACCESS_KEY``, ``AWS_ENDPOINT_URL``, profiles,
instance roles).
"""

from __future__ import annotations

import contextlib
import json
import os
import time
import uuid
from collections.abc import Callable, Sequence
from dataclasses import dataclass
from pathlib import Path
from typing import TYPE_CHECKING, Any

from accuracy_checks.config.urls import env_names, expand_env, mask_secrets
from accuracy_checks.sources.frames import cycle_label
from accuracy_checks.store.archive import (
    _ATTEMPT_FILE,
    _CYCLE_DIR,
    _INCOMING,
    _ORPHANS,
    _STALE_SECONDS,
    Archive,
    ArchiveError,
    Snapshot,
    SnapshotUnreadable,
    archive_url,
    write_snapshot,
)

if TYPE_CHECKING:
    import pandas as pd
    import pyarrow.fs as pafs

__all__ = ["RemoteArchive", "RemoteStaged", "display_location", "open_archive"]

_CLAIM = ".claim"
#: the manifest of a snapshot of parts, written after its parts (see the module doc)
PARTS_MANIFEST = "_parts.json"


def display_location(url: str) -> str:
    """``url`` as shown: secrets masked, ``${NAME}`` as written, no trailing slash."""
    from accuracy_checks.config import urls

    mask = getattr(urls, "mask_location", mask_secrets)
    return str(mask(url)).rstrip("/")


class RemoteArchive(Archive):
    """Snapshots of checked forecasts under one URL of object storage."""

    def __init__(self, url: str) -> None:
        self.url = url.rstrip("/")
        self.location = display_location(url)
        self._fs: pafs.FileSystem | None = None
        self._base = ""

    # the filesystem opens lazily: building the archive object never touches the network
    @property
    def fs(self) -> pafs.FileSystem:
        if self._fs is None:
            self._fs, self._base = self._open()
        return self._fs

    @property
    def base(self) -> str:
        _ = self.fs
        return self._base

    def _open(self) -> tuple[pafs.FileSystem, str]:
        real = expand_env(self.url, "archive")
        scheme = real.split("://", 1)[0].lower()
        try:
            if scheme == "memory":
                import fsspec
                import pyarrow.fs as pafs

                fs = pafs.PyFileSystem(pafs.FSSpecHandler(fsspec.filesystem("memory")))
                return fs, "/" + real.split("://", 1)[1].strip("/")
            import pyarrow.fs as pafs

            fs, base = pafs.FileSystem.from_uri(real)
        except Exception as exc:
            raise ArchiveError(
                f"The archive {self.location} cannot be opened: {self._scrub(exc)}. Check the "
                "URL in `archive:` and that the storage library for its scheme is installed "
                '(pip install "accuracy-checks[cloud]").') from None
        return fs, base.rstrip("/")

    def _scrub(self, exc: BaseException | str) -> str:
        """An error text of the storage library with every expanded secret masked."""
        text = " ".join(str(exc).split()) or (type(exc).__name__
                                               if isinstance(exc, BaseException) else "")
        for name in env_names(self.url):
            value = os.environ.get(name, "")
            if len(value) >= 4:
                text = text.replace(value, "${" + name + "}")
        return mask_secrets(text)

    def _key(self, rel: str) -> str:
        return f"{self.base}/{rel}"

    def _shown(self, rel: str) -> str:
        return f"{self.location}/{rel}"

    @staticmethod
    def _rel(cycle: str, attempt: int) -> str:
        return f"cycle={cycle}/attempt-{attempt:04d}.parquet"

    def _error(self, doing: str, exc: BaseException) -> ArchiveError:
        return ArchiveError(
            f"The archive {self.location} cannot be {doing}: {self._scrub(exc)}. Check the "
            "URL in `archive:`, that the bucket exists and answers, and that the credentials "
            "(the storage library's usual chain, e.g. AWS_ACCESS_KEY_ID and "
            "AWS_SECRET_ACCESS_KEY) allow listing, reading and writing objects under it "
            "(with --no-snapshot nothing is archived).")

    def _files(self, rel: str = "") -> list[Any]:
        """Every object below ``rel`` (recursive), as pyarrow FileInfo."""
        import pyarrow.fs as pafs

        where = self._key(rel).rstrip("/") if rel else self.base
        try:
            infos = self.fs.get_file_info(pafs.FileSelector(where, recursive=True,
                                                            allow_not_found=True))
        except Exception as exc:
            raise self._error("listed", exc) from None
        return [i for i in infos if i.type == pafs.FileType.File]

    # ------------------------------------------------------------------------------ reading

    def snapshots(self) -> list[Snapshot]:
        out = []
        for info in self._files():
            parts = info.path[len(self.base):].strip("/").split("/")
            if len(parts) == 3 and parts[2] == PARTS_MANIFEST:
                parts = parts[:2]  # a snapshot of parts, complete
            elif len(parts) != 2:
                continue
            m, a = _CYCLE_DIR.match(parts[0]), _ATTEMPT_FILE.match(parts[1])
            if m and a:
                out.append(Snapshot(m.group(1), int(a.group(1)), self._shown("/".join(parts))))
        return sorted(out, key=lambda s: (s.cycle, s.attempt))

    def path_of(self, cycle: str, attempt: int) -> str:  # type: ignore[override]
        return self._shown(self._rel(cycle, attempt))

    def _exists(self, snap: Snapshot) -> bool:
        return bool(self.snapshot_files(snap))

    def snapshot_files(self, snap: Snapshot) -> list[str]:
        """The objects (keys in :attr:`fs`) that hold ``snap``, in reading order: the object
        itself, or the parts its manifest names; empty when it is not there (a snapshot of
        parts without its manifest is not there yet)."""
        import pyarrow.fs as pafs

        key = self._key(self._rel(snap.cycle, snap.attempt))
        try:
            info = self.fs.get_file_info([key, f"{key}/{PARTS_MANIFEST}"])
            if info[0].type == pafs.FileType.File:
                return [key]
            if info[1].type != pafs.FileType.File:
                return []
            with self.fs.open_input_stream(f"{key}/{PARTS_MANIFEST}") as fh:
                names = json.loads(fh.read().decode())["parts"]
        except Exception as exc:
            raise self._error("read", exc) from None
        return [f"{key}/{name}" for name in sorted(names)]

    def read(self, snap: Snapshot, required: Sequence[str] = ()) -> pd.DataFrame:
        import pandas as pd

        files = self.snapshot_files(snap)
        if not files:
            raise SnapshotUnreadable("the file is missing")
        try:
            whole = files == [self._key(self._rel(snap.cycle, snap.attempt))]
            frame = pd.read_parquet(files[0] if whole else files, filesystem=self.fs)
        except Exception as exc:
            raise SnapshotUnreadable(
                f"it is not a readable Parquet file ({self._scrub(exc)})") from None
        return self._finish_read(frame, snap, required)

    # ------------------------------------------------------------------------------ writing

    def check_usable(self, *, write: bool = True) -> None:
        """Raise :class:`ArchiveError` if the bucket does not answer, the URL names an
        object rather than a prefix, or (with ``write``) an object cannot be written and
        deleted under ``.incoming``. The probe object is removed at once."""
        import pyarrow.fs as pafs

        try:
            info = self.fs.get_file_info(self.base)
        except ArchiveError:
            raise
        except Exception as exc:
            raise self._error("reached", exc) from None
        if info.type == pafs.FileType.File:
            raise ArchiveError(
                f"The archive URL {self.location} names an object, not a prefix, so earlier "
                "forecasts cannot be read from it nor this one archived. Point `archive:` in "
                "the config at a prefix (s3://bucket/archive), or remove that object.")
        if not write:
            return
        probe = self._key(f"{_INCOMING}/.probe-{uuid.uuid4().hex}")
        try:
            with self.fs.open_output_stream(probe) as out:
                out.write(b"")
            self.fs.delete_file(probe)
        except Exception as exc:
            raise self._error("written", exc) from None

    def stage(self, frame: pd.DataFrame,  # type: ignore[override]
              issued: pd.Timestamp) -> RemoteStaged:
        """Upload ``frame`` in full under ``.incoming`` (step 1); on failure the partial
        object is deleted and :class:`ArchiveError` raised."""
        self._sweep_incoming()
        name = uuid.uuid4().hex
        self.upload(self._key(f"{_INCOMING}/{name}.parquet"), frame, lambda exc: ArchiveError(
            f"The forecast could not be archived under {self.location}: "
            f"{self._scrub(exc)}. Nothing was recorded and no snapshot was kept. "
            "Check that the bucket answers and that the credentials allow writing "
            "objects under it (with --no-snapshot nothing is archived)."))
        return RemoteStaged(self.url, cycle_label(issued), name, self)

    def upload(self, key: str, frame: pd.DataFrame,
               error: Callable[[Exception], ArchiveError]) -> None:
        """Write ``frame`` as a snapshot's Parquet object at ``key``; on failure the partial
        object is deleted and ``error(exc)`` raised (an interrupt is re-raised as it is)."""
        try:
            with self.fs.open_output_stream(key) as out:
                write_snapshot(frame, out)
        except BaseException as exc:
            self._delete_quietly(key)
            if isinstance(exc, Exception):
                raise error(exc) from None
            raise

    def retire_unrecorded(self, cycle: str, first: int) -> list[str]:  # type: ignore[override]
        """Move the cycle's final objects numbered ``first`` or above to ``.orphans/``
        (copy, then delete). Under the store's write lock, as on disk."""
        moved = []
        folder = self._key(f"cycle={cycle}")
        found = self._files(f"cycle={cycle}")
        # a snapshot of parts loses its manifest first: it is never seen half moved
        found.sort(key=lambda i: not i.path.endswith(f"/{PARTS_MANIFEST}"))
        tags: dict[str, str] = {}
        for info in found:
            rel = info.path[len(folder):].strip("/")
            top, _, rest = rel.partition("/")
            m = _ATTEMPT_FILE.match(top)
            if not m or int(m.group(1)) < first:
                continue
            if rest:  # a part (or the manifest) of a snapshot of parts
                tag = tags.setdefault(top, uuid.uuid4().hex[:8])
                dest = f"{_ORPHANS}/cycle={cycle}/{top[:-8]}.{tag}.parquet"
                try:
                    self.fs.copy_file(info.path, self._key(f"{dest}/{rest}"))
                    self.fs.delete_file(info.path)
                except Exception as exc:
                    raise self._error("written", exc) from None
                if self._shown(dest) not in moved:
                    moved.append(self._shown(dest))
                continue
            name = top
            rel = f"{_ORPHANS}/cycle={cycle}/{name[:-8]}.{uuid.uuid4().hex[:8]}.parquet"
            try:
                self.fs.copy_file(info.path, self._key(rel))
                self.fs.delete_file(info.path)
            except Exception as exc:
                raise self._error("written", exc) from None
            moved.append(self._shown(rel))
        return moved

    def finish_pending(self, recorded_as: Any) -> list[Path | str]:
        """Publish the snapshots of runs killed between their commit and the upload of the
        final object (step 4 above), from their claims. ``recorded_as(run_id, cycle,
        attempt)`` says whether the store records that run as that attempt with a snapshot;
        a claim it does not confirm is left for the sweep. Returns the final paths
        written."""
        done: list[Path | str] = []
        for info in self._files(_INCOMING):
            if not info.path.endswith(_CLAIM):
                continue
            try:
                with self.fs.open_input_stream(info.path) as fh:
                    claim = json.loads(fh.read().decode())
                cycle, attempt = str(claim["cycle"]), int(claim["attempt"])
                staged = self._key(f"{_INCOMING}/{claim['staged']}")
            except Exception:  # a claim damaged or removed meanwhile: the sweep takes it
                continue
            if not recorded_as(str(claim["run_id"]), cycle, attempt):
                continue
            if "parts" in claim:  # a snapshot of parts
                with contextlib.suppress(Exception):  # its parts gone: "recorded but missing"
                    done.append(self.publish_parts(str(claim["staged"]),
                                                   [str(p) for p in claim["parts"]],
                                                   cycle, attempt))
                for part in claim["parts"]:
                    self._delete_quietly(f"{staged}/{part}")
                self._delete_quietly(info.path)
                continue
            final = self._key(self._rel(cycle, attempt))
            try:
                if self.fs.get_file_info(final).type.name != "File":
                    self.fs.copy_file(staged, final)
                    done.append(self._shown(self._rel(cycle, attempt)))
            except Exception:  # the staged object is gone: "recorded but missing"
                pass
            self._delete_quietly(staged)
            self._delete_quietly(info.path)
        return done

    def publish_parts(self, staged: str, parts: Sequence[str], cycle: str,
                      attempt: int) -> str:
        """Copy the staged parts ``.incoming/<staged>/<part>`` of a snapshot of parts to
        ``cycle=<cycle>/attempt-<attempt>.parquet/<part>``, then write its manifest (the
        snapshot exists from then on; see the module doc). A manifest already there: done.
        Returns the final path as shown; raises :class:`ArchiveError` when a copy fails."""
        final = self._key(self._rel(cycle, attempt))
        manifest = f"{final}/{PARTS_MANIFEST}"
        try:
            if self.fs.get_file_info(manifest).type.name == "File":
                return self.path_of(cycle, attempt)
            for part in parts:
                self.fs.copy_file(self._key(f"{_INCOMING}/{staged}/{part}"), f"{final}/{part}")
            with self.fs.open_output_stream(manifest) as out:
                out.write(json.dumps({"parts": sorted(parts)}).encode())
        except Exception as exc:
            raise self._error("written", exc) from None
        return self.path_of(cycle, attempt)

    def _sweep_incoming(self) -> None:
        """Delete staged objects and claims of runs killed more than an hour ago."""
        cutoff = time.time() - _STALE_SECONDS
        with contextlib.suppress(Exception):
            for info in self._files(_INCOMING):
                if info.mtime is not None and info.mtime.timestamp() < cutoff:
                    self._delete_quietly(info.path)

    def _delete_quietly(self, key: str) -> None:
        with contextlib.suppress(Exception):  # nothing more can be done; the sweep retries
            self.fs.delete_file(key)


@dataclass
class RemoteStaged:
    """A snapshot uploaded in full under ``<archive>/.incoming``, waiting for its attempt."""

    root: str
    cycle: str
    name: str
    archive: RemoteArchive
    #: the attempt :meth:`place` claimed
    claimed: int | None = None

    @property
    def path(self) -> str:
        return self.archive._shown(f"{_INCOMING}/{self.name}.parquet")

    def _staged_key(self) -> str:
        return self.archive._key(f"{_INCOMING}/{self.name}.parquet")

    def _claim_key(self) -> str:
        return self.archive._key(f"{_INCOMING}/{self.name}{_CLAIM}")

    def place(self, attempt: int, run_id: str = "") -> str:
        """Claim ``attempt`` for this snapshot (step 2): the final object is written only by
        :meth:`publish`, after the record commits. Returns the final path as shown."""
        claim = {"run_id": run_id, "cycle": self.cycle, "attempt": attempt,
                 "staged": f"{self.name}.parquet"}
        try:
            with self.archive.fs.open_output_stream(self._claim_key()) as out:
                out.write(json.dumps(claim).encode())
        except Exception as exc:
            raise self.archive._error("written", exc) from None
        self.claimed = attempt
        return self.archive.path_of(self.cycle, attempt)

    def publish(self) -> None:
        """Copy the staged object to its final name (step 4), then delete it and its claim.
        Raises :class:`ArchiveError` if the copy fails and the final object is not there
        (the claim stays: the next run finishes it)."""
        if self.claimed is None:
            return
        arch = self.archive
        final = arch._key(arch._rel(self.cycle, self.claimed))
        try:
            arch.fs.copy_file(self._staged_key(), final)
        except Exception as exc:
            with contextlib.suppress(Exception):
                if arch.fs.get_file_info(final).type.name == "File":
                    return  # another run finished it from the claim
            raise arch._error("written", exc) from None
        arch._delete_quietly(self._staged_key())
        arch._delete_quietly(self._claim_key())

    def discard(self) -> None:
        """Delete the staged object and any claim (the run was not recorded)."""
        self.archive._delete_quietly(self._staged_key())
        self.archive._delete_quietly(self._claim_key())


def open_archive(location: object) -> Archive | RemoteArchive:
    """The archive at ``location``: a local folder (:class:`Archive`, the protocol of
    :mod:`accuracy_checks.store.archive`), or a URL of object storage (:class:`RemoteArchive`,
    the same promise without an atomic rename)."""
    url = archive_url(location)
    if url is not None:
        return RemoteArchive(url)
    text = getattr(location, "url", location)
    if isinstance(text, str) and text.lower().startswith("file://"):
        from urllib.parse import unquote, urlsplit

        return Archive(Path(unquote(urlsplit(text).path)))
    return Archive(Path(str(location)))
