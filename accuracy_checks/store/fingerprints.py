"""Input fingerprints kept with each recorded run, and the hashing of them in the background.

**Fingerprint** of an input (:func:`input_fingerprints`): for each input file (forecast,
actuals, history, mapping) its path, SHA-256, size in bytes and, where known, its row count; a
folder is hashed as the SHA-256 of its files' relative names and SHA-256s, in name order; a
table or query is named only; a frame given in memory is described by its reader (rows,
content hash; :mod:`accuracy_checks.sources.memory`).

**Hashing in the background** (:class:`FileHashes`): a million-series run's input files are
several hundred MB, whose SHA-256 takes about half a second of CPU. ``hashlib`` releases the
GIL while it hashes, so a thread started with the run hashes the files on the other core while
the run reads and checks them; the record then takes the finished fingerprints. The thread
computes :func:`file_fingerprint` itself, so the digests are the same bytes either way; a file
it has not finished (or could not read) is hashed on the spot at record time, where an error
surfaces as before.
"""

from __future__ import annotations

import hashlib
import threading
from collections.abc import Iterable
from pathlib import Path
from typing import TYPE_CHECKING, Any

if TYPE_CHECKING:
    from accuracy_checks.config import Config
    from accuracy_checks.config.places import Url
    from accuracy_checks.sources.memory import GivenFrames

__all__ = ["FileHashes", "file_fingerprint", "input_fingerprints", "local_input_files"]

_CHUNK = 1 << 20  # bytes read and hashed at a time (hashlib drops the GIL for each)


class _Stopped(Exception):
    """The background hashing was told to stop."""


def file_fingerprint(path: Any, *, stop: threading.Event | None = None) -> dict[str, Any]:
    """``{"path", "sha256", "bytes"}`` of a file, or of a folder's files (see module doc); a
    table or query (``SqlSource``) or a URL is named only (its ``str``). ``stop``: an event
    that, once set, interrupts the hashing (``_Stopped``)."""
    if not isinstance(path, str | Path):
        return {"path": str(path), "sha256": None, "bytes": None}
    path = Path(path)
    if path.is_dir():
        h = hashlib.sha256()
        size = 0
        for f in sorted(p for p in path.rglob("*") if p.is_file()):
            digest, n = _sha256(f, stop)
            h.update(f"{f.relative_to(path).as_posix()}\0{digest}\n".encode())
            size += n
        return {"path": str(path), "sha256": h.hexdigest(), "bytes": size}
    if path.is_file():
        digest, n = _sha256(path, stop)
        return {"path": str(path), "sha256": digest, "bytes": n}
    return {"path": str(path), "sha256": None, "bytes": None}


def _sha256(path: Path, stop: threading.Event | None = None) -> tuple[str, int]:
    """SHA-256 (hex) and size of a file, read in chunks of :data:`_CHUNK` bytes."""
    h = hashlib.sha256()
    buffer = bytearray(_CHUNK)
    view = memoryview(buffer)
    size = 0
    with open(path, "rb", buffering=0) as fh:
        while n := fh.readinto(buffer):
            if stop is not None and stop.is_set():
                raise _Stopped
            h.update(view[:n])
            size += n
    return h.hexdigest(), size


class FileHashes:
    """The :func:`file_fingerprint` of some local files, computed on a daemon thread.

    Use as a context manager around the run: leaving it tells the thread to stop (a failed
    run does not wait for the hashing) and waits the chunk it is in. :meth:`get` waits for
    the thread and returns a file's fingerprint, or ``None`` when the thread did not make it
    (hash it on the spot then)."""

    def __init__(self, paths: Iterable[str | Path]) -> None:
        self._paths = list(dict.fromkeys(str(p) for p in paths))
        self._done: dict[str, dict[str, Any]] = {}
        self._stop = threading.Event()
        self._thread = threading.Thread(target=self._work, name="accuracy-checks-hashing",
                                        daemon=True)
        if self._paths:
            self._thread.start()

    def _work(self) -> None:
        for path in self._paths:
            try:
                self._done[path] = file_fingerprint(path, stop=self._stop)
            except _Stopped:
                return
            except Exception:  # hashed again at record time, which reports it
                continue

    def get(self, path: str | Path) -> dict[str, Any] | None:
        """The fingerprint of ``path`` as :func:`file_fingerprint` gives it, or ``None``."""
        if self._thread.is_alive():
            self._thread.join()
        found = self._done.get(str(path))
        return dict(found) if found is not None else None

    def close(self) -> None:
        """Stop the hashing (what is done is kept) and wait for the thread."""
        self._stop.set()
        if self._thread.is_alive():
            self._thread.join()

    def __enter__(self) -> FileHashes:
        return self

    def __exit__(self, *exc: object) -> None:
        self.close()


def local_input_files(config: Config, *, forecast_path: Path | Url | None = None,
                      actuals_path: Path | Url | None = None,
                      frames: GivenFrames | None = None) -> list[Path]:
    """The local files and folders :func:`input_fingerprints` will hash for a run of
    ``config`` (inputs given as frames and non-local places left out), in that order."""
    places: list[object] = []
    if frames is None or frames.forecast is None:
        places.append(forecast_path or config.forecast.place)
    if frames is None or frames.actuals is None:
        places.append(actuals_path or config.actuals.place)
    if frames is None or frames.history is None:
        places.extend(config.history_paths)
    if (frames is None or frames.mapping is None) and config.segments.mapping_place is not None:
        places.append(config.segments.mapping_place)
    return [Path(p) for p in places if isinstance(p, str | Path)]


def input_fingerprints(config: Config, info: dict[str, Any], *,
                       forecast_path: Path | Url | None = None,
                       actuals_path: Path | Url | None = None,
                       hashes: FileHashes | None = None) -> dict[str, Any]:
    """Fingerprints of every input of a run, with the row counts from the run's ``info``.
    An input given as a frame has no file: its ``info`` entry (``"frame"``, rows, content
    hash; :mod:`accuracy_checks.sources.memory`) is its fingerprint. ``hashes``: files
    already hashed in the background (:class:`FileHashes`); any other is hashed here."""

    def fingerprint(path: Any) -> dict[str, Any]:
        found = hashes.get(path) if hashes is not None and isinstance(path, str | Path) else None
        return found if found is not None else file_fingerprint(path)

    out: dict[str, Any] = {}
    for role, path in (("forecast", forecast_path or config.forecast.place),
                       ("actuals", actuals_path or config.actuals.place)):
        seen = info.get(role)
        if isinstance(seen, dict) and "frame" in seen:
            out[role] = dict(seen)
            continue
        entry = fingerprint(path)
        if isinstance(seen, dict):
            entry.update({k: v for k, v in seen.items() if k != "path"})
        out[role] = entry
    if isinstance(info.get("history"), list):
        out["history"] = list(info["history"])
    elif config.history_paths:
        out["history"] = [fingerprint(p) for p in config.history_paths]
    if isinstance(info.get("mapping"), dict):
        out["mapping"] = dict(info["mapping"])
    elif config.segments.mapping_place is not None:
        out["mapping"] = fingerprint(config.segments.mapping_place)
    earlier = info.get("earlier")
    if isinstance(earlier, dict):
        out["earlier"] = dict(earlier)
    return out
