"""One run of the gate: read → check → measure → judge → snapshot → report.

Every input is read and validated before anything is written, so an input error (exit 2)
leaves the archive untouched. The snapshot is written last, atomically.
"""

from __future__ import annotations

import time
import uuid
from collections.abc import Callable
from dataclasses import dataclass
from datetime import UTC, datetime
from pathlib import Path
from typing import TypeVar

import pandas as pd

from accuracy_checks import frames as F
from accuracy_checks import sources
from accuracy_checks.accuracy import accuracy_results
from accuracy_checks.archive import Archive, cycle_label
from accuracy_checks.checks.coverage import coverage_checks
from accuracy_checks.checks.output import output_checks
from accuracy_checks.config import Config
from accuracy_checks.evaluation import evaluation_frame
from accuracy_checks.measures import CORE_MEASURES
from accuracy_checks.results import ALL_SERIES, CheckResult, RunReport
from accuracy_checks.thresholds import ThresholdBook

Progress = Callable[[str], None]
T = TypeVar("T")


@dataclass
class Inputs:
    """The canonical frames of one run (see :mod:`accuracy_checks.frames`)."""

    forecast: pd.DataFrame
    actuals: pd.DataFrame
    earlier: pd.DataFrame
    mapping: pd.DataFrame | None
    previous: pd.DataFrame | None
    previous_label: str | None
    issued: pd.Timestamp
    info: dict[str, object]


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
                actuals_path: Path | None = None, progress: Progress = _quiet) -> Inputs:
    """Read and validate every input (no writes). Raises InputError on unusable input."""
    keys = list(config.forecast.keys)
    seg_cols = list(config.segments.columns)
    mapping = sources.read_mapping(config)

    t0 = time.perf_counter()
    forecast = sources.read_forecast(config, forecast_path, segment_columns=seg_cols)
    forecast = sources.assign_segments(forecast, config, mapping, role="forecast")
    progress(f"read forecast: {len(forecast):,} rows in {time.perf_counter() - t0:.1f} s")
    issued = pd.Timestamp(forecast[F.ISSUED].max())

    t0 = time.perf_counter()
    actuals = sources.read_actuals(config, actuals_path)
    progress(f"read actuals: {len(actuals):,} rows in {time.perf_counter() - t0:.1f} s")

    t0 = time.perf_counter()
    history = [
        sources.assign_segments(
            sources.read_forecast(config, p, role="history", key="history",
                                  segment_columns=seg_cols, allow_empty=True),
            config, mapping, role="history")
        for p in config.history_paths
    ]
    history_frame = (
        pd.concat(history, ignore_index=True) if history else pd.DataFrame()
    )
    if len(history_frame):
        history_frame = history_frame.loc[history_frame[F.ISSUED] < issued]
        history_frame = history_frame.drop_duplicates([*keys, F.PERIOD, F.ISSUED], keep="last")
        history_frame = history_frame.assign(
            **{F.ATTEMPT: pd.array([pd.NA] * len(history_frame), dtype="Int64"),
               F.SOURCE: "history"})

    archive = Archive(config.archive)
    snaps = archive.latest_attempts(before=issued)
    in_history = set(history_frame[F.ISSUED].unique()) if len(history_frame) else set()
    from_archive = [s for s in snaps if s.issued not in in_history]
    archived = archive.load(from_archive)
    if len(archived):
        archived = _segments_of_archived(archived, config, mapping)
    parts = [p for p in (history_frame, archived) if len(p)]
    earlier = pd.concat(parts, ignore_index=True) if parts else pd.DataFrame()
    if history or snaps:
        progress(f"read earlier cycles: {len(earlier):,} rows "
                 f"({len(history_frame):,} from history, {len(archived):,} from the archive) "
                 f"in {time.perf_counter() - t0:.1f} s")

    previous, previous_label = None, None
    if snaps:
        last = snaps[-1]
        previous = archive.load([last])
        previous_label = f"{last.cycle} (attempt {last.attempt})"

    known = sources.segments_of_series([forecast, *(p for p in parts)], keys)
    actuals = sources.attach_segments(actuals, config, mapping, known)

    info: dict[str, object] = {
        "forecast": {"path": str(forecast_path or config.forecast.path), "rows": len(forecast),
                     "series": int(forecast[keys].drop_duplicates().shape[0])},
        "actuals": {"path": str(actuals_path or config.actuals.path), "rows": len(actuals)},
        "earlier": {"rows": len(earlier), "history_rows": len(history_frame),
                    "archive_rows": len(archived)},
    }
    return Inputs(forecast, actuals, earlier, mapping, previous, previous_label, issued, info)


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
               snapshot: bool = True) -> RunReport:
    """Run every check of ``config`` on the current forecast; snapshot it; return the report."""
    progress = progress or _quiet
    started = datetime.now(UTC)
    run_id = uuid.uuid4().hex
    inputs = load_inputs(config, forecast_path=forecast_path, actuals_path=actuals_path,
                         progress=progress)
    results = evaluate(config, inputs, progress=progress)

    snap = None
    if snapshot:
        t0 = time.perf_counter()
        snap = Archive(config.archive).snapshot(inputs.forecast, inputs.issued)
        progress(f"snapshot written: {snap.path} in {time.perf_counter() - t0:.1f} s")

    evaluated = sorted({(r.get("cycle"), r.get("attempt"), r.get("source"))
                        for r in _cycles_of(results)}, key=lambda t: str(t[0]))
    return RunReport(
        run_id=run_id,
        cycle=cycle_label(inputs.issued),
        attempt=snap.attempt if snap else None,
        results=results,
        started_at=started.isoformat(timespec="seconds"),
        finished_at=datetime.now(UTC).isoformat(timespec="seconds"),
        config_path=str(config.source) if config.source else None,
        inputs=inputs.info,
        evaluated_cycles=[{"cycle": c, "attempt": a, "source": s} for c, a, s in evaluated],
        snapshot=str(snap.path) if snap else None,
    )


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
    results: list[CheckResult] = []
    results += stage("output checks", lambda: output_checks(
        inputs.forecast, keys=keys, quantile_columns=qcols,
        allow_negative=allow if isinstance(allow, bool) else set(allow)))
    results += stage("coverage checks", lambda: coverage_checks(
        inputs.forecast, inputs.actuals, keys=keys, frequency=config.frequency,
        horizon=config.horizon, active_periods=config.coverage.active_periods, book=book,
        known_series=inputs.mapping, previous=inputs.previous,
        previous_label=inputs.previous_label))

    def accuracy() -> list[CheckResult]:
        ev = evaluation_frame(inputs.earlier, inputs.actuals, keys=keys,
                              frequency=config.frequency, lags=config.evaluation.lags,
                              window=config.evaluation.window)
        out = accuracy_results(ev.frame, keys=keys, book=book, measures=measures_to_report(config),
                               lags=config.evaluation.lags, min_obs=config.evaluation.min_obs,
                               window=ev.window)
        if ev.cycles:
            out = [CheckResult(**{**r.__dict__, "details": {**r.details, "cycles": ev.cycles}})
                   if r.segment == ALL_SERIES else r for r in out]
        return out

    results += stage("accuracy", accuracy)
    results += unmatched_thresholds(config, inputs)
    return results


def measures_to_report(config: Config) -> list[str]:
    """The core measures, plus any other registry measure a threshold names."""
    from accuracy_checks.measures import MEASURES

    named = set(config.thresholds.default)
    for levels in config.thresholds.segments.values():
        named |= set(levels)
    extra = [m for m in MEASURES if m in named and m not in CORE_MEASURES]
    return [*CORE_MEASURES, *extra]


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
