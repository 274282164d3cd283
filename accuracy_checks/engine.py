"""One run of the gate: read → check → measure → judge → snapshot → report.

Every input is read and validated before anything is written
(:func:`accuracy_checks.sources.load_inputs`, with the archived cycles of
:func:`archived_cycles`), so an input error (exit 2) leaves the archive untouched;
:func:`evaluate` computes every result (pure); :func:`run_checks` adds the drift checks and
the waivers from the audit store, stages the snapshot and records the run in one store
transaction (protocol in :mod:`accuracy_checks.store.archive`; those steps are in
:mod:`accuracy_checks.recording`, which also runs the hashing of the input files and the
writing of the snapshot on threads beside the checks).
"""

from __future__ import annotations

import time
import uuid
from collections.abc import Callable, Collection, Mapping
from dataclasses import dataclass
from datetime import UTC, datetime
from pathlib import Path
from types import EllipsisType
from typing import TYPE_CHECKING, Any, TypeVar

import pandas as pd

from accuracy_checks.checks.accuracy import run_accuracy
from accuracy_checks.checks.actuals import actuals_checks
from accuracy_checks.checks.coverage import SERIES_COUNT, coverage_checks
from accuracy_checks.checks.judge import Thresholds
from accuracy_checks.checks.output import output_checks
from accuracy_checks.checks.plugins import run_check_plugins
from accuracy_checks.config import Config
from accuracy_checks.config.places import Url
from accuracy_checks.errors import UsageError
from accuracy_checks.recording import (
    StagingInBackground,
    drift_and_waivers,
    evaluated_cycles,
    prepare_store_and_archive,
    record,
    still_staged,
)
from accuracy_checks.results import ALL_SERIES, CheckResult, RunReport
from accuracy_checks.sources import frames as F
from accuracy_checks.sources.frames import cycle_label
from accuracy_checks.sources.load import (
    ArchivedCycles,
    ArchiveReader,
    Inputs,
    Progress,
    load_inputs,
    quiet,
)
from accuracy_checks.sources.memory import GivenFrames
from accuracy_checks.store.archive import (
    Snapshot,
    SnapshotFault,
    SnapshotUnreadable,
    StagedSnapshot,
)
from accuracy_checks.store.remote_archive import open_archive

if TYPE_CHECKING:
    from accuracy_checks.config.engines import Engine
    from accuracy_checks.store.remote_archive import RemoteStaged

__all__ = ["ARCHIVE_CHECK", "archived_cycles", "evaluate", "given_frames", "run_checks",
           "unmatched_segments", "unmatched_thresholds"]

T = TypeVar("T")
ARCHIVE_CHECK = "archive.snapshot"


class _Stage:
    """Runs a step of :func:`evaluate`, telling ``progress`` when it starts and how long it
    took."""

    def __init__(self, progress: Progress) -> None:
        self.progress = progress

    def __call__(self, text: str, fn: Callable[[], T]) -> T:
        t0 = time.perf_counter()
        self.progress(f"{text} …")
        out = fn()
        self.progress(f"{text}: done in {time.perf_counter() - t0:.1f} s")
        return out


# ------------------------------------------------------------------ the archived cycles


def archived_cycles(config: Config,
                    recorded: Mapping[str, int] | EllipsisType | None = ...) -> ArchiveReader:
    """The reader of ``config``'s archived earlier cycles that :func:`load_inputs` calls.

    It reads the last snapshot of each cycle as the audit store records it (``recorded``:
    cycle → attempt, by default read from ``config``'s store; ``None`` = no store yet, take
    the archive folder as it is). A cycle whose snapshot is missing, unreadable or unrecorded
    is left out, never replaced by an older attempt, and an ``archive.snapshot`` warning in
    ``Inputs.notes`` says so (if it is the previous cycle, the series count is not compared
    with an older one either).
    """
    return _ArchiveReading(config, recorded)


@dataclass(frozen=True)
class _ArchiveReading:
    """:func:`archived_cycles`' reader; :meth:`choose` makes the same choice of snapshots
    without reading their rows (the dask engine reads them on its workers)."""

    config: Config
    recorded: Mapping[str, int] | EllipsisType | None

    def _attempts(self) -> Mapping[str, int] | None:
        if isinstance(self.recorded, EllipsisType):
            from accuracy_checks.store.core import archived_attempts

            return archived_attempts(self.config)
        return self.recorded

    def __call__(self, issued: pd.Timestamp, history_cycles: set[pd.Timestamp],
                 prune: Callable[[pd.DataFrame], pd.DataFrame]) -> ArchivedCycles:
        return _read_archive(self.config, issued, history_cycles, self._attempts(), prune)

    def choose(self, issued: pd.Timestamp, history_cycles: set[pd.Timestamp],
               opener: Callable[[Any, Snapshot, list[str]], Any]) -> ArchivedCycles:
        """The reader's choice, warnings and previous cycle, with each snapshot used given
        by ``opener(archive, snapshot, required columns)`` in place of its rows (``frames``
        and ``previous`` hold what it returns; it raises ``SnapshotUnreadable`` as
        ``Archive.read`` does)."""
        return _read_archive(self.config, issued, history_cycles, self._attempts(),
                             lambda frame: frame, opener)


def _read_archive(config: Config, issued: pd.Timestamp, history_cycles: set[pd.Timestamp],
                  recorded: Mapping[str, int] | None,
                  prune: Callable[[pd.DataFrame], pd.DataFrame],
                  opener: Callable[[Any, Snapshot, list[str]], Any] | None = None
                  ) -> ArchivedCycles:
    """The archived earlier cycles the run uses: their pruned rows (the cycles not held by
    the history files), the previous cycle's whole forecast and label (for the series count),
    and a warning for each used cycle whose snapshot cannot be used."""
    archive = open_archive(config.archive)
    snaps, faults = archive.last_recorded(recorded, before=issued)
    required = [*config.forecast.keys, F.PERIOD, F.ISSUED, F.FORECAST]
    read: dict[str, pd.DataFrame | None] = {}

    def frame_of(snap: Snapshot) -> pd.DataFrame | None:
        if snap.cycle not in read:
            try:
                read[snap.cycle] = (archive.read(snap, required) if opener is None
                                    else opener(archive, snap, required))
            except SnapshotUnreadable as exc:
                faults.append(SnapshotFault(snap, "unreadable", str(exc)))
                read[snap.cycle] = None
        return read[snap.cycle]

    # the previous cycle: the latest one the archive should hold, usable or not
    latest = max([s.cycle for s in snaps] + [f.cycle for f in faults], default=None)
    out = ArchivedCycles()
    last = next((s for s in snaps if s.cycle == latest), None)
    if last is not None:
        out.previous = frame_of(last)
        out.previous_label = f"{last.cycle} (attempt {last.attempt})"
    for snap in snaps:
        frame = frame_of(snap) if snap.issued not in history_cycles else None
        if frame is not None:
            out.frames.append(prune(frame))
    out.n_read = sum(1 for s in snaps if read.get(s.cycle) is not None)
    out.notes = [_snapshot_warning(f, is_previous=f.cycle == latest) for f in
                 sorted(faults, key=lambda f: f.cycle)
                 if f.issued not in history_cycles or f.cycle == latest]
    if out.previous is None and latest is not None:
        out.previous_label = None
        out.notes.append(_series_count_not_compared(latest))
    return out


def _snapshot_warning(fault: SnapshotFault, *, is_previous: bool) -> CheckResult:
    """The ``archive.snapshot`` warning of a cycle left out, with how to fix it."""
    s = fault.snapshot
    also = (" The series count is not compared with an older cycle in its place either."
            if is_previous else "")
    fix = ("Restore the file from a backup, or re-run that cycle with its forecast "
           "(`accuracy-checks run --forecast FILE`) to record a new attempt."
           if fault.problem != "unrecorded" else
           "If the file is genuine, re-run that cycle with its forecast to record it; "
           "otherwise move it away.")
    return CheckResult(
        ARCHIVE_CHECK, "warn",
        message=(f"Cycle {s.cycle} is left out of the evaluation: {fault.describe()}. "
                 f"An older attempt is not used in its place.{also} {fix}"),
        details={"cycle": s.cycle, "attempt": s.attempt, "path": str(s.path),
                 "problem": fault.problem, **({"detail": fault.detail} if fault.detail else {})},
    )


def _series_count_not_compared(cycle: str) -> CheckResult:
    """The skipped series count when the previous cycle's snapshot cannot be used."""
    return CheckResult(
        SERIES_COUNT, "skipped", segment=ALL_SERIES, measure="series_count_change_pct",
        unit="%", reason="no_data", details={"previous_cycle": cycle},
        message=(f"The number of series is not compared with the previous cycle: the snapshot "
                 f"of cycle {cycle} cannot be used (see {ARCHIVE_CHECK}), and an older cycle "
                 "is not compared in its place"),
    )


# ------------------------------------------------------------------------------ one run


def run_checks(config: Config, *, forecast_path: Path | Url | None = None,
               actuals_path: Path | Url | None = None, progress: Progress | None = None,
               snapshot: bool = True, label: str | None = None,
               forecast: object = None, actuals: object = None, history: object = None,
               mapping: object = None, engine: str | None = None,
               scheduler: str | None = None) -> RunReport:
    """Run every check of ``config`` on the current forecast, record the run, return it.

    ``forecast``, ``actuals``, ``history`` (one frame or a list) and ``mapping`` take pandas
    DataFrames or pyarrow Tables with the configured column names: a frame given replaces
    the config's place for that input and is validated like a file, a bad one raising the
    same :class:`~accuracy_checks.errors.InputError` naming the frame and the column
    (:mod:`accuracy_checks.sources.memory`). ``forecast_path``/``actuals_path`` override the
    config's paths instead (not both for one input).

    Every input is read and validated first: an unusable input raises before anything is
    written. The drift checks (:mod:`accuracy_checks.checks.drift`, unless ``drift.enabled`` is
    false) judge the figures against the earlier cycles in the audit store; then the waivers
    active at the run's start turn the breaches they cover (drift results included) into
    ``waived``; the forecast is staged for the archive (unless ``snapshot=False``, a dry
    run; written on a thread while the checks run, once the inputs are read); and the run
    is recorded in the audit store (``config.store``) in one transaction, which allocates
    the run's attempt of its cycle and moves the staged snapshot to that attempt's name
    (protocol in :mod:`accuracy_checks.store.archive`). ``label`` is an optional pipeline run
    label kept with the record. Raises ``StoreError`` (a ``UsageError``) when the
    store cannot be opened or written, ``ArchiveError`` when the archive cannot be read or
    written: then nothing is recorded and nothing archived. Both are checked before the checks
    run where they can be (a file where a folder should be, a folder that cannot be written,
    a store that does not answer).

    ``engine`` (``pandas`` or ``dask``) and ``scheduler`` (a Dask scheduler's address) override
    the config's ``engine`` key. The dask engine (:mod:`accuracy_checks.dask`) replaces the
    reading and the checks (same results); drift, waivers and the record are the same code.
    """
    from accuracy_checks.store import open_store
    from accuracy_checks.store.fingerprints import FileHashes, local_input_files

    progress = progress or quiet
    started = datetime.now(UTC)
    run_id = uuid.uuid4().hex
    frames = given_frames(forecast=forecast, actuals=actuals, history=history,
                          mapping=mapping, forecast_path=forecast_path,
                          actuals_path=actuals_path)
    settings = _engine_settings(config, engine, scheduler)
    recorded = prepare_store_and_archive(config, snapshot=snapshot, progress=progress)
    staged: StagedSnapshot | RemoteStaged | None = None
    staging: StagingInBackground | None = None
    with FileHashes(local_input_files(config, forecast_path=forecast_path,
                                      actuals_path=actuals_path, frames=frames)) as hashes:
        try:
            if settings.name == "dask":
                from accuracy_checks.dask.cluster import open_client
                from accuracy_checks.dask.run import evaluate_on_dask, refuse_plugins

                refuse_plugins()
                with open_client(settings) as client:
                    done = evaluate_on_dask(
                        config, client, forecast_path=forecast_path, actuals_path=actuals_path,
                        progress=progress, archive=archived_cycles(config, recorded),
                        frames=frames, snapshot=snapshot)
                results = done.results + unmatched_segments(config, done.segments)
                issued, info, staged = done.issued, done.info, done.staged
            else:
                inputs = load_inputs(config, forecast_path=forecast_path,
                                     actuals_path=actuals_path, progress=progress,
                                     archive=archived_cycles(config, recorded), frames=frames,
                                     reduce_history=True)
                if snapshot:
                    staging = StagingInBackground(config, inputs)
                results = evaluate(config, inputs, progress=progress)
                issued, info = inputs.issued, inputs.info
            cycle = cycle_label(issued)
            with open_store(config) as store:
                results = drift_and_waivers(config, results, store, cycle=cycle,
                                            started=started, progress=progress)
                if staging is not None:
                    staged, staging = staging.result(progress), None
                report = RunReport(
                    run_id=run_id,
                    cycle=cycle,
                    attempt=None,
                    results=results,
                    started_at=started.isoformat(timespec="seconds"),
                    finished_at=datetime.now(UTC).isoformat(timespec="seconds"),
                    config_path=str(config.source) if config.source else None,
                    inputs=info,
                    evaluated_cycles=evaluated_cycles(results),
                    label=label,
                )
                record(config, store, report, staged, forecast_path=forecast_path,
                       actuals_path=actuals_path, progress=progress, hashes=hashes)
        except BaseException:
            if staging is not None:
                staging.discard()
            if staged is not None and still_staged(staged):
                staged.discard()
            raise
    return report


def _engine_settings(config: Config, engine: str | None, scheduler: str | None) -> Engine:
    """The config's ``engine`` key with the command line's overrides."""
    from accuracy_checks.config.engines import Engine

    current = config.engine
    name = engine or current.name
    if name not in ("pandas", "dask"):
        raise UsageError(f"Unknown engine {name!r}: give pandas or dask.")
    if name == "pandas":
        if scheduler:
            raise UsageError("--scheduler applies to the dask engine: add --engine dask.")
        return Engine(name="pandas")
    if scheduler:
        return Engine(name="dask", scheduler=scheduler)
    return current if current.name == "dask" else Engine(name="dask")


def given_frames(*, forecast: object = None, actuals: object = None, history: object = None,
                 mapping: object = None, forecast_path: Path | Url | None = None,
                 actuals_path: Path | Url | None = None) -> GivenFrames | None:
    """The frames given to a run (``None`` when none is); a frame and a path for the same
    input is a :class:`~accuracy_checks.errors.UsageError`, a value that is not a frame an
    :class:`~accuracy_checks.errors.InputError`."""
    for name, frame, path in (("forecast", forecast, forecast_path),
                              ("actuals", actuals, actuals_path)):
        if frame is not None and path is not None:
            raise UsageError(f"Both a {name} frame (argument `{name}`) and a {name} path "
                             f"(`{name}_path`) were given: give one of them.")
    frames = GivenFrames(forecast=forecast, actuals=actuals, history=history, mapping=mapping)
    return frames if frames.any else None


def evaluate(config: Config, inputs: Inputs, *, progress: Progress = quiet) -> list[CheckResult]:
    """Every check result for already-loaded inputs (pure: no I/O)."""
    keys = list(config.forecast.keys)
    book = Thresholds(config)
    stage = _Stage(progress)
    qcols = [F.quantile_column(t) for t in config.forecast.quantiles]
    allow = config.forecast.allow_negative
    results: list[CheckResult] = list(inputs.notes)  # about the inputs (archive faults)
    results += stage("output checks", lambda: output_checks(
        inputs.forecast, keys=keys, quantile_columns=qcols,
        quantile_names=list(config.forecast.quantiles.values()),
        allow_negative=allow if isinstance(allow, bool) else set(allow)))
    results += actuals_checks(inputs.actuals, keys=keys, column=config.actuals.value)
    results += stage("coverage checks", lambda: coverage_checks(
        inputs.forecast, inputs.actuals, keys=keys, frequency=config.frequency,
        horizon=config.horizon, active_periods=config.coverage.active_periods, book=book,
        known_series=inputs.known_series, previous=inputs.previous,
        previous_label=inputs.previous_label))

    results += stage("accuracy", lambda: run_accuracy(config, inputs.earlier, inputs.actuals,
                                                      book=book, history=inputs.history))
    results += unmatched_thresholds(config, inputs)
    results += run_check_plugins(inputs, config, book)
    return results


def unmatched_thresholds(config: Config, inputs: Inputs) -> list[CheckResult]:
    """A warning for each ``thresholds.segments`` entry that matches no series."""
    names = set(inputs.forecast[F.SEGMENT].unique()) | set(inputs.actuals[F.SEGMENT].unique())
    if len(inputs.earlier):
        names |= set(inputs.earlier[F.SEGMENT].unique())
    return unmatched_segments(config, names)


def unmatched_segments(config: Config, names: Collection[object]) -> list[CheckResult]:
    """A warning for each ``thresholds.segments`` entry not among the segment ``names`` of
    the data (forecast, actuals, earlier cycles)."""
    import difflib

    names = set(names)
    names.discard(F.UNASSIGNED)
    out = []
    for seg in config.thresholds.segments:
        if seg == ALL_SERIES or seg in names:
            continue
        close = difflib.get_close_matches(seg, sorted(map(str, names)), n=1, cutoff=0.6)
        hint = f" Did you mean {close[0]!r}?" if close else ""
        known = ", ".join(sorted(map(str, names))[:12])
        out.append(CheckResult(
            "config.thresholds", "warn", segment=seg,
            message=(f"thresholds.segments.{seg} matches no series, so its levels judge "
                     f"nothing.{hint} Segments in the data: {known}."),
        ))
    return out
