"""One run of the gate: read → check → measure → judge → snapshot → report.

Every input is read and validated before anything is written, so an input error (exit 2)
leaves the archive untouched. The snapshot is written last, atomically.
"""

from __future__ import annotations

import time
import uuid
from collections.abc import Callable, Mapping
from dataclasses import dataclass, field
from datetime import UTC, datetime
from pathlib import Path
from types import EllipsisType
from typing import TypeVar

import numpy as np
import pandas as pd

from accuracy_checks.checks.accuracy import run_accuracy
from accuracy_checks.checks.actuals import actuals_checks
from accuracy_checks.checks.coverage import coverage_checks
from accuracy_checks.checks.judge import ThresholdBook
from accuracy_checks.checks.output import output_checks
from accuracy_checks.checks.plugins import run_check_plugins
from accuracy_checks.config import Config
from accuracy_checks.evaluation.join import prune_earlier, window_periods
from accuracy_checks.evaluation.spans import actuals_span, evaluation_span
from accuracy_checks.results import ALL_SERIES, CheckResult, RunReport
from accuracy_checks.sources import frames as F
from accuracy_checks.sources import read as sources
from accuracy_checks.sources.codes import combined_codes
from accuracy_checks.store.archive import (
    Archive,
    Snapshot,
    SnapshotFault,
    SnapshotUnreadable,
    cycle_label,
)

Progress = Callable[[str], None]
T = TypeVar("T")


@dataclass
class Inputs:
    """The canonical frames of one run (see :mod:`accuracy_checks.sources.frames`)."""

    forecast: pd.DataFrame
    actuals: pd.DataFrame
    earlier: pd.DataFrame
    mapping: pd.DataFrame | None
    previous: pd.DataFrame | None
    previous_label: str | None
    issued: pd.Timestamp
    info: dict[str, object]
    #: series the actuals know from periods older than the ones read (``None``: all were read)
    older_series: pd.DataFrame | None = None
    #: results about the inputs themselves, reported with the checks' (e.g. an archived
    #: snapshot that is missing or unreadable, so its cycle was left out)
    notes: list[CheckResult] = field(default_factory=list)

    @property
    def known_series(self) -> list[pd.DataFrame]:
        """Tables of series known besides the actuals read: the mapping, the older actuals."""
        return [t for t in (self.mapping, self.older_series) if t is not None]


def _quiet(_: str) -> None:
    pass


class _Stage:
    def __init__(self, progress: Progress) -> None:
        self.progress = progress

    def __call__(self, text: str, fn: Callable[[], T]) -> T:
        t0 = time.perf_counter()
        self.progress(f"{text} …")
        out = fn()
        self.progress(f"{text}: done in {time.perf_counter() - t0:.1f} s")
        return out


def load_inputs(config: Config, *, forecast_path: Path | None = None,
                actuals_path: Path | None = None, progress: Progress = _quiet,
                recorded: Mapping[str, int] | EllipsisType | None = ...) -> Inputs:
    """Read and validate every input (no writes). Raises InputError on unusable input.

    Key columns come back as categoricals sharing one set of categories across every frame,
    so joins and group-bys run on integer codes.

    Earlier cycles from the archive: the last snapshot of each cycle as the audit store
    records it (``recorded``: cycle → attempt, by default read from ``config``'s store;
    ``None`` = no store yet, take the archive folder as it is). A cycle whose snapshot is
    missing or unreadable is left out, never replaced by an older attempt, and an
    ``archive.snapshot`` warning in ``Inputs.notes`` says so (if it is the previous cycle, the
    series count is not compared with an older one either).
    """
    keys = list(config.forecast.keys)
    seg_cols = list(config.segments.columns)
    mapping = sources.read_mapping(config)

    t0 = time.perf_counter()
    forecast = sources.read_forecast(config, forecast_path, segment_columns=seg_cols)
    progress(f"read forecast: {len(forecast):,} rows in {time.perf_counter() - t0:.1f} s")
    issued = pd.Timestamp(forecast[F.ISSUED].max())

    t0 = time.perf_counter()
    # actuals: only the recent periods the checks use, unless a measure needs the whole
    # history; the series the older rows know are kept for the unexpected-series check
    needed = actuals_span(config)
    periods = sources.actual_periods(config, actuals_path) if needed is not None else None
    older: pd.DataFrame | None = None
    if needed is not None and periods is not None and len(periods) > needed:
        actuals = sources.read_actuals(config, actuals_path, periods=list(periods[-needed:]))
        older = sources.actual_series(config, actuals_path)
        progress(f"read actuals: {len(actuals):,} rows of the last {needed} periods "
                 f"(older rows: {len(older):,} series known) in "
                 f"{time.perf_counter() - t0:.1f} s")
    else:
        actuals = sources.read_actuals(config, actuals_path)
        progress(f"read actuals: {len(actuals):,} rows in {time.perf_counter() - t0:.1f} s")

    t0 = time.perf_counter()
    # earlier forecasts: only rows of a configured lag inside the evaluation span are ever
    # used, so they are cut right at reading (Parquet: filtered while reading)
    span = window_periods(actuals, evaluation_span(config))
    lags = list(config.evaluation.lags)
    history = []
    history_cycles: set[pd.Timestamp] = set()
    for p in config.history_paths:
        starts = sources.cycle_starts(p, config)
        part = sources.read_forecast(config, p, role="history", key="history",
                                     segment_columns=seg_cols, allow_empty=True,
                                     periods=span if starts is not None else None)
        if starts is None:
            starts = part.groupby(F.ISSUED, sort=False)[F.PERIOD].min()
        history_cycles |= {pd.Timestamp(t) for t in starts.index}
        part = part.loc[part[F.ISSUED] < issued]
        history.append(prune_earlier(part, periods=span, lags=lags,
                                     frequency=config.frequency, starts=starts))
    snaps, archived_parts, previous, previous_label, notes = _read_archive(
        config, issued, history_cycles, recorded,
        lambda frame: prune_earlier(frame, periods=span, lags=lags, frequency=config.frequency))

    singles = {"forecast": forecast, "actuals": actuals, "mapping": mapping,
               "previous": previous, "older": older}
    present = {name: f for name, f in singles.items() if f is not None}
    unified = sources.unify_categories([*present.values(), *history, *archived_parts],
                                       [*keys, *seg_cols, F.SEGMENT])
    got = dict(zip(present, unified, strict=False))
    history = unified[len(present):len(present) + len(history)]
    archived_parts = unified[len(present) + len(history):]
    forecast, actuals = got["forecast"], got["actuals"]
    mapping, previous, older = got.get("mapping"), got.get("previous"), got.get("older")

    forecast = sources.assign_segments(forecast, config, mapping, role="forecast")
    history = [sources.assign_segments(h, config, mapping, role="history") for h in history]
    history_frame = _concat(history)
    if len(history_frame):
        n_hist = len(history_frame)
        repeated = sources.duplicated_rows(history_frame, [*keys, F.PERIOD, F.ISSUED], keep="last")
        if repeated.any():
            history_frame = history_frame.loc[~repeated]
        if len(history_frame) < n_hist:
            progress(f"history: {n_hist - len(history_frame):,} repeated rows dropped "
                     "(the last of each (keys, period, issue date) kept)")
        n = len(history_frame)
        no_attempt = pd.arrays.IntegerArray(np.zeros(n, dtype=np.int64), np.ones(n, dtype=bool))
        history_frame = history_frame.assign(**{
            F.ATTEMPT: no_attempt,
            F.SOURCE: pd.Categorical.from_codes(np.zeros(n, dtype=np.int8), ["history"])})
    archived = _concat([_segments_of_archived(a, config, mapping) for a in archived_parts])
    parts = [p for p in (history_frame, archived) if len(p)]
    earlier = sources.unify_categories(parts, [F.SEGMENT]) if len(parts) > 1 else parts
    earlier_frame = _concat(earlier)
    if history or snaps:
        progress(f"read earlier cycles: {len(earlier_frame):,} rows "
                 f"({len(history_frame):,} from history, {len(archived):,} from the archive) "
                 f"in {time.perf_counter() - t0:.1f} s")

    actuals = sources.attach_segments(
        actuals, config, mapping,
        lambda: sources.segments_of_series([forecast, *parts], keys))

    info: dict[str, object] = {
        "forecast": {"path": str(forecast_path or config.forecast.path), "rows": len(forecast),
                     "series": int(np.unique(combined_codes(forecast, keys)).size)},
        "actuals": {"path": str(actuals_path or config.actuals.path), "rows": len(actuals)},
        "earlier": {"rows": len(earlier_frame), "history_rows": len(history_frame),
                    "archive_rows": len(archived)},
    }
    return Inputs(forecast, actuals, earlier_frame, mapping, previous, previous_label, issued,
                  info, older, notes)


ARCHIVE_CHECK = "archive.snapshot"


def _read_archive(config: Config, issued: pd.Timestamp, history_cycles: set[pd.Timestamp],
                  recorded: Mapping[str, int] | EllipsisType | None,
                  prune: Callable[[pd.DataFrame], pd.DataFrame],
                  ) -> tuple[list[Snapshot], list[pd.DataFrame], pd.DataFrame | None,
                             str | None, list[CheckResult]]:
    """The archived earlier cycles the run uses: the snapshots found, their pruned rows (the
    cycles not held by the history files), the previous cycle's whole forecast and label (for
    the series count), and a warning for each used cycle whose snapshot cannot be used."""
    archive = Archive(config.archive)
    if isinstance(recorded, EllipsisType):
        from accuracy_checks.store.core import archived_attempts

        recorded = archived_attempts(config)
    snaps, faults = archive.last_recorded(recorded, before=issued)
    required = [*config.forecast.keys, F.PERIOD, F.ISSUED, F.FORECAST]
    read: dict[str, pd.DataFrame | None] = {}

    def frame_of(snap: Snapshot) -> pd.DataFrame | None:
        if snap.cycle not in read:
            try:
                read[snap.cycle] = archive.read(snap, required)
            except SnapshotUnreadable as exc:
                faults.append(SnapshotFault(snap, "unreadable", str(exc)))
                read[snap.cycle] = None
        return read[snap.cycle]

    # the previous cycle: the latest one the archive should hold, usable or not
    latest = max([s.cycle for s in snaps] + [f.cycle for f in faults], default=None)
    previous, previous_label = None, None
    last = next((s for s in snaps if s.cycle == latest), None)
    if last is not None:
        previous = frame_of(last)
        previous_label = f"{last.cycle} (attempt {last.attempt})"
    parts = []
    for snap in snaps:
        if snap.issued in history_cycles:
            continue
        frame = frame_of(snap)
        if frame is not None:
            parts.append(prune(frame))
    used = [s for s in snaps if s.cycle in read and read[s.cycle] is not None]
    notes = [_snapshot_warning(f, is_previous=f.cycle == latest) for f in
             sorted(faults, key=lambda f: f.cycle)
             if f.issued not in history_cycles or f.cycle == latest]
    if previous is None and latest is not None:
        previous_label = None
        notes.append(_series_count_not_compared(latest))
    return used, parts, previous, previous_label, notes


def _snapshot_warning(fault: SnapshotFault, *, is_previous: bool) -> CheckResult:
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
    from accuracy_checks.checks.coverage import SERIES_COUNT

    return CheckResult(
        SERIES_COUNT, "skipped", segment=ALL_SERIES, measure="series_count_change_pct",
        unit="%", reason="no_data", details={"previous_cycle": cycle},
        message=(f"The number of series is not compared with the previous cycle: the snapshot "
                 f"of cycle {cycle} cannot be used (see {ARCHIVE_CHECK}), and an older cycle "
                 "is not compared in its place"),
    )


def _concat(frames: list[pd.DataFrame]) -> pd.DataFrame:
    frames = [f for f in frames if len(f)]
    if not frames:
        return pd.DataFrame()
    return frames[0] if len(frames) == 1 else pd.concat(frames, ignore_index=True)


def _segments_of_archived(archived: pd.DataFrame, config: Config,
                          mapping: pd.DataFrame | None) -> pd.DataFrame:
    """Segments of archived rows: re-mapped when the mapping holds every segment column (so a
    corrected mapping applies to old cycles too), else as stored with the snapshot."""
    seg = config.segments.columns
    if not seg:
        return archived.assign(**{F.SEGMENT: ALL_SERIES})
    if mapping is not None and all(s in mapping.columns for s in seg):
        return sources.assign_segments(archived.drop(columns=[F.SEGMENT], errors="ignore"),
                                       config, mapping, role="archived forecast")
    if F.SEGMENT not in archived.columns:
        return archived.assign(**{F.SEGMENT: F.UNASSIGNED})
    return archived


def run_checks(config: Config, *, forecast_path: Path | None = None,
               actuals_path: Path | None = None, progress: Progress | None = None,
               snapshot: bool = True, label: str | None = None) -> RunReport:
    """Run every check of ``config`` on the current forecast, record the run, return it.

    Every input is read and validated first: an unusable input raises before anything is
    written. The drift checks (:mod:`accuracy_checks.checks.drift`, unless ``drift.enabled`` is
    false) judge the figures against the earlier cycles in the audit store; then the waivers
    active at the run's start turn the breaches they cover (drift results included) into
    ``waived``; the forecast is staged for the archive (unless ``snapshot=False``, a dry
    run); and the run is recorded in the audit store (``config.store``) in one transaction,
    which allocates the run's attempt of its cycle and moves the staged snapshot to that
    attempt's name (protocol in :mod:`accuracy_checks.store.archive`). ``label`` is an optional
    pipeline run label kept with the record. Raises ``StoreError`` (a ``UsageError``) when the
    store cannot be opened or written, ``ArchiveError`` when the archive cannot be read or
    written: then nothing is recorded and nothing archived. Both are checked before the checks
    run where they can be (a file where a folder should be, a folder that cannot be written,
    a store that does not answer).
    """
    from accuracy_checks.store import apply_waivers, input_fingerprints, open_store
    from accuracy_checks.store.database import check_sqlite_location, validate_url
    from accuracy_checks.store.urls import default_store_url, sqlite_file

    progress = progress or _quiet
    started = datetime.now(UTC)
    run_id = uuid.uuid4().hex
    store_url = default_store_url(config)
    # fail fast, before the checks: a bad store URL or location, an unusable archive
    validate_url(store_url)
    db_file = sqlite_file(store_url)
    if db_file is not None:
        check_sqlite_location(db_file)
    Archive(config.archive).check_usable(write=snapshot)
    recorded: dict[str, int] | None = None
    if db_file is None or db_file.exists():
        # before reading the archive: move aside snapshots of runs killed before their record
        # committed (crash debris, never a recorded snapshot); then which snapshot is the
        # last of each cycle, as recorded
        with open_store(store_url) as store:
            moved = store.retire_orphans(config.archive)
            recorded = store.archived_attempts()
        if moved:
            progress(f"moved {len(moved)} unrecorded snapshot(s) left by interrupted runs "
                     f"to {moved[0].parent.parent}")
    inputs = load_inputs(config, forecast_path=forecast_path, actuals_path=actuals_path,
                         progress=progress, recorded=recorded)
    results = evaluate(config, inputs, progress=progress)

    cycle = cycle_label(inputs.issued)
    with open_store(config) as store:
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
        staged = None
        if snapshot:
            t0 = time.perf_counter()
            staged = Archive(config.archive).stage(inputs.forecast, inputs.issued)
            progress(f"snapshot staged in {time.perf_counter() - t0:.1f} s")
        evaluated = sorted({(r.get("cycle"), r.get("attempt"), r.get("source"))
                            for r in _cycles_of(results)}, key=lambda t: str(t[0]))
        report = RunReport(
            run_id=run_id,
            cycle=cycle,
            attempt=None,
            results=results,
            started_at=started.isoformat(timespec="seconds"),
            finished_at=datetime.now(UTC).isoformat(timespec="seconds"),
            config_path=str(config.source) if config.source else None,
            inputs=inputs.info,
            evaluated_cycles=[{"cycle": c, "attempt": a, "source": s} for c, a, s in evaluated],
            label=label,
        )
        t0 = time.perf_counter()
        try:
            fingerprints = input_fingerprints(config, inputs.info, forecast_path=forecast_path,
                                              actuals_path=actuals_path)
        except BaseException:
            if staged is not None:
                staged.discard()
            raise
        store.record_run(report, config=config, fingerprints=fingerprints, snapshot=staged,
                         progress=progress)
        where = f"; snapshot {report.snapshot}" if report.snapshot else ""
        progress(f"recorded as attempt {report.attempt} of cycle {report.cycle} in the audit "
                 f"store {store.url} in {time.perf_counter() - t0:.1f} s{where}")
    return report


def _cycles_of(results: list[CheckResult]) -> list[dict[str, object]]:
    out: list[dict[str, object]] = []
    for r in results:
        out.extend(r.details.get("cycles", []) if r.check == "accuracy" else [])
    return out


def evaluate(config: Config, inputs: Inputs, *, progress: Progress = _quiet) -> list[CheckResult]:
    """Every check result for already-loaded inputs (pure: no I/O)."""
    keys = list(config.forecast.keys)
    book = ThresholdBook(config)
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
                                                      book=book))
    results += unmatched_thresholds(config, inputs)
    results += run_check_plugins(inputs, config, book)
    return results


def unmatched_thresholds(config: Config, inputs: Inputs) -> list[CheckResult]:
    """A warning for each ``thresholds.segments`` entry that matches no series."""
    import difflib

    names = set(inputs.forecast[F.SEGMENT].unique()) | set(inputs.actuals[F.SEGMENT].unique())
    if len(inputs.earlier):
        names |= set(inputs.earlier[F.SEGMENT].unique())
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
