"""A run's steps around its checks that touch the audit store and the archive.

Before the checks, :func:`prepare_store_and_archive` fails fast on an unusable store or
archive and tidies what interrupted runs left. After them, :func:`drift_and_waivers` adds the
drift results and applies the waivers, the forecast is staged for the archive
(:class:`StagingInBackground`), and :func:`record` writes the run
in one store transaction (protocol in :mod:`accuracy_checks.store.archive`).

Two pieces of that work need no result of the checks and run on threads beside them, on the
machine's other core (measured in ``bench/README.md``): hashing the input files for the
record's fingerprints (:class:`~accuracy_checks.store.fingerprints.FileHashes`, from the
run's start) and writing the staged snapshot (:class:`StagingInBackground`, from the moment
the inputs are read). Both only read the run's inputs; their outcome is taken where the run
took it before (a failure to stage raises at the same step, with the same message), and a
failed run stops or discards them.
"""

from __future__ import annotations

import threading
import time
from datetime import datetime
from pathlib import Path
from typing import TYPE_CHECKING

from accuracy_checks.results import CheckResult, RunReport
from accuracy_checks.sources.load import Inputs, Progress
from accuracy_checks.store.remote_archive import open_archive

if TYPE_CHECKING:
    from accuracy_checks.config import Config
    from accuracy_checks.config.places import Url
    from accuracy_checks.store import Store
    from accuracy_checks.store.archive import StagedSnapshot
    from accuracy_checks.store.fingerprints import FileHashes
    from accuracy_checks.store.remote_archive import RemoteStaged

__all__ = ["StagingInBackground", "drift_and_waivers", "evaluated_cycles",
           "prepare_store_and_archive", "record", "still_staged"]


def prepare_store_and_archive(config: Config, *, snapshot: bool,
                              progress: Progress) -> dict[str, int] | None:
    """Fail fast, before the checks (a bad store URL or location, an unusable archive); move
    aside the snapshots of runs killed before their record committed (crash debris, never a
    recorded snapshot); return which snapshot is the last of each cycle, as recorded
    (``None`` when there is no store yet)."""
    from accuracy_checks.store import open_store
    from accuracy_checks.store.database import check_sqlite_location, validate_url
    from accuracy_checks.store.urls import default_store_url, sqlite_file

    store_url = default_store_url(config)
    validate_url(store_url)
    db_file = sqlite_file(store_url)
    if db_file is not None:
        check_sqlite_location(db_file)
    open_archive(config.archive).check_usable(write=snapshot)
    if db_file is not None and not db_file.exists():
        return None
    with open_store(store_url) as store:
        moved = store.retire_orphans(config.archive)
        finished = store.finish_snapshots(config.archive)
        recorded = store.archived_attempts()
    if moved:
        progress(f"moved {len(moved)} unrecorded snapshot(s) left by interrupted runs "
                 f"to {_parent(_parent(moved[0]))}")
    if finished:
        progress(f"wrote {len(finished)} snapshot(s) of recorded runs that were interrupted "
                 f"before their upload: {', '.join(map(str, finished))}")
    return recorded


def _parent(path: Path | str) -> Path | str:
    """The folder of a local path or of an object's URL."""
    return path.parent if isinstance(path, Path) else path.rsplit("/", 1)[0]


def drift_and_waivers(config: Config, results: list[CheckResult], store: Store, *,
                      cycle: str, started: datetime, progress: Progress) -> list[CheckResult]:
    """``results`` with the drift results added (unless drift is off) and the waivers active
    at ``started`` applied (drift results are waivable like any other)."""
    from accuracy_checks.store import apply_waivers

    if config.drift.enabled:
        from accuracy_checks.checks.drift import drift_checks

        t0 = time.perf_counter()
        found = drift_checks(config, results, store, cycle=cycle)
        results = [*results, *found]
        progress(f"drift checks against earlier cycles: {len(found)} result(s) in "
                 f"{time.perf_counter() - t0:.1f} s")
    results = apply_waivers(results, store.active_waivers(on=started))
    waived = sum(r.status == "waived" for r in results)
    if waived:
        progress(f"{waived} breach(es) waived by active waivers (see the results)")
    return results


class StagingInBackground:
    """The forecast written in full to the archive's staging folder (outside any lock), on a
    thread started as soon as the inputs are read.

    :meth:`result` waits for it and returns the staged snapshot, raising what staging raised
    (an ``ArchiveError``) and telling ``progress`` the time staging took; :meth:`discard`
    waits for it and removes what it staged (a run that failed meanwhile). The thread only
    reads ``inputs.forecast``, which the checks only read too."""

    def __init__(self, config: Config, inputs: Inputs) -> None:
        self._staged: StagedSnapshot | RemoteStaged | None = None
        self._error: BaseException | None = None
        self._seconds = 0.0
        self._thread = threading.Thread(target=self._stage, args=(config, inputs),
                                        name="accuracy-checks-snapshot")
        self._thread.start()

    def _stage(self, config: Config, inputs: Inputs) -> None:
        t0 = time.perf_counter()
        try:
            self._staged = open_archive(config.archive).stage(inputs.forecast, inputs.issued)
        except BaseException as exc:  # raised in the run's thread by result()
            self._error = exc
        self._seconds = time.perf_counter() - t0

    def result(self, progress: Progress) -> StagedSnapshot | RemoteStaged:
        """The staged snapshot (waits for the thread; raises what staging raised)."""
        self._thread.join()
        if self._error is not None:
            error, self._error = self._error, None
            raise error
        assert self._staged is not None
        progress(f"snapshot staged in {self._seconds:.1f} s")
        return self._staged

    def discard(self) -> None:
        """Wait for the thread and remove what it staged, if anything."""
        self._thread.join()
        if self._staged is not None and still_staged(self._staged):
            self._staged.discard()


def record(config: Config, store: Store, report: RunReport,
           staged: StagedSnapshot | RemoteStaged | None, *,
           forecast_path: Path | Url | None, actuals_path: Path | Url | None,
           progress: Progress, hashes: FileHashes | None = None) -> None:
    """Record ``report`` (and place the staged snapshot) in one store transaction; the staged
    file is discarded when the inputs' fingerprints cannot be taken. ``hashes``: the input
    files hashed in the background since the run started."""
    from accuracy_checks.store import input_fingerprints

    t0 = time.perf_counter()
    try:
        fingerprints = input_fingerprints(config, report.inputs, forecast_path=forecast_path,
                                          actuals_path=actuals_path, hashes=hashes)
    except BaseException:
        if staged is not None:
            staged.discard()
        raise
    store.record_run(report, config=config, fingerprints=fingerprints, snapshot=staged,
                     progress=progress)
    where = f"; snapshot {report.snapshot}" if report.snapshot else ""
    progress(f"recorded as attempt {report.attempt} of cycle {report.cycle} in the audit "
             f"store {store.url} in {time.perf_counter() - t0:.1f} s{where}")


def still_staged(staged: StagedSnapshot | RemoteStaged) -> bool:
    """Whether a staged snapshot still waits in the staging folder (not placed yet)."""
    if getattr(staged, "claimed", None) == []:  # the dask engine's parts, not claimed yet
        return True
    path = getattr(staged, "path", None)
    return isinstance(path, Path) and path.exists()


def evaluated_cycles(results: list[CheckResult]) -> list[dict[str, object]]:
    """The earlier cycles the accuracy results used, once each, by cycle."""
    evaluated = sorted({(r.get("cycle"), r.get("attempt"), r.get("source"))
                        for r in _cycles_of(results)}, key=lambda t: str(t[0]))
    return [{"cycle": c, "attempt": a, "source": s} for c, a, s in evaluated]


def _cycles_of(results: list[CheckResult]) -> list[dict[str, object]]:
    """The cycles (with attempt and source) the accuracy results were measured on."""
    out: list[dict[str, object]] = []
    for r in results:
        out.extend(r.details.get("cycles", []) if r.check == "accuracy" else [])
    return out
