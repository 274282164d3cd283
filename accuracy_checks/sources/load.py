"""Every input of one run, read and validated before anything is written: :func:`load_inputs`.

The steps, in order: the segment mapping; the current forecast (its latest issue date is the
run's cycle); the actuals, only the recent periods the checks use when the Parquet pre-reads
allow it (:mod:`accuracy_checks.sources.prereads`); the earlier cycles, from the history files
and from the archive (the reader the caller passes: the archive belongs to the store, a layer
above this one), each cut to the rows of a configured lag inside the evaluation span right
after reading; then one set of categories per key and segment column across every frame, and
the ``segment`` column of each.

Frames given in memory (:class:`~accuracy_checks.sources.memory.GivenFrames`) replace the
config's place of their input and go through the same steps
(:mod:`accuracy_checks.sources.memory`); ``Inputs.info`` then says the input came from a
frame, with its fingerprint instead of a path.
"""

from __future__ import annotations

import time
from collections.abc import Callable
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np
import pandas as pd

from accuracy_checks.config import Config
from accuracy_checks.config.places import Url
from accuracy_checks.evaluation.baselines import ActualsIndex
from accuracy_checks.evaluation.join import cycle_targets, prune_earlier, window_periods
from accuracy_checks.evaluation.spans import actuals_span, evaluation_span, rows_span
from accuracy_checks.results import ALL_SERIES, CheckResult
from accuracy_checks.sources import frames as F
from accuracy_checks.sources.codes import duplicated_rows, n_distinct
from accuracy_checks.sources.history import read_reduced
from accuracy_checks.sources.memory import (
    Given,
    GivenFrames,
    actuals_from_frame,
    forecast_from_frame,
    history_from_frame,
    mapping_from_frame,
)
from accuracy_checks.sources.prereads import actual_periods, actual_series, cycle_starts
from accuracy_checks.sources.readers import read_actuals, read_forecast
from accuracy_checks.sources.segments import (
    assign_segments,
    attach_segments,
    read_mapping,
    segments_of_series,
    unify_categories,
)

__all__ = ["ArchiveReader", "ArchivedCycles", "Inputs", "Progress", "combine_earlier",
           "load_inputs", "quiet"]

Progress = Callable[[str], None]
#: rows of earlier forecasts → the rows the evaluation can use (configured lags, the span)
Prune = Callable[[pd.DataFrame], pd.DataFrame]


def quiet(_: str) -> None:
    """A progress callback that prints nothing."""


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
    #: every actual by (series, period) when ``actuals`` holds only the recent periods' rows
    #: (``load_inputs(reduce_history=True)``); ``None``: ``actuals`` holds every row read
    history: ActualsIndex | None = None

    @property
    def known_series(self) -> list[pd.DataFrame]:
        """Tables of series known besides the actuals read: the mapping, the older actuals."""
        return [t for t in (self.mapping, self.older_series) if t is not None]


@dataclass
class ArchivedCycles:
    """What the archive adds to a run's inputs."""

    #: the pruned rows of each archived cycle the history files do not hold
    frames: list[pd.DataFrame] = field(default_factory=list)
    #: the previous cycle's whole forecast and its label (for the series count)
    previous: pd.DataFrame | None = None
    previous_label: str | None = None
    #: warnings about cycles left out (their snapshot missing, unreadable or unrecorded)
    notes: list[CheckResult] = field(default_factory=list)
    #: how many snapshots were read
    n_read: int = 0


#: reads the archived cycles issued before the run's cycle: (run's issue date, cycles the
#: history files hold, prune) → :class:`ArchivedCycles`
ArchiveReader = Callable[[pd.Timestamp, set[pd.Timestamp], Prune], ArchivedCycles]


def load_inputs(config: Config, *, forecast_path: Path | Url | None = None,
                actuals_path: Path | Url | None = None, progress: Progress = quiet,
                archive: ArchiveReader | None = None,
                frames: GivenFrames | None = None, reduce_history: bool = False) -> Inputs:
    """Read and validate every input (no writes). Raises InputError on unusable input.

    Key columns come back as categoricals sharing one set of categories across every frame,
    so joins and group-bys run on integer codes. ``archive`` reads the earlier cycles kept in
    the archive (the engine's :func:`~accuracy_checks.engine.archived_cycles`: the last
    recorded snapshot of each cycle, warnings in ``Inputs.notes`` for the cycles left out);
    ``None``: the earlier cycles come from the history files only. ``frames`` replace the
    config's place of the inputs they give (:mod:`accuracy_checks.sources.memory`).
    ``reduce_history``: when a measure needs the whole actuals history, keep only the recent
    periods as rows and the rest reduced to ``Inputs.history``
    (:mod:`accuracy_checks.sources.history`; the engine's run asks for it).
    """
    given = frames or GivenFrames()
    keys, seg_cols = list(config.forecast.keys), list(config.segments.columns)
    mapping = (mapping_from_frame(config, given.mapping) if given.mapping is not None
               else read_mapping(config))
    forecast = _read_current(config, forecast_path, seg_cols, progress, given)
    issued = pd.Timestamp(forecast[F.ISSUED].max())
    reduced = (read_reduced(config, actuals_path, keep=rows_span(config)) if reduce_history
               and given.actuals is None and actuals_span(config) is None else None)
    actuals, older = ((reduced.rows, reduced.series) if reduced is not None
                      else _read_actuals(config, actuals_path, progress, given))
    if reduced is not None:
        progress(f"read actuals: {reduced.n_read:,} rows, the last {rows_span(config)} periods "
                 f"kept ({len(reduced.rows):,} rows), the rest reduced to the actuals index "
                 f"in {reduced.seconds:.1f} s")

    t0 = time.perf_counter()
    # earlier forecasts: only rows of a configured lag inside the evaluation span are ever
    # used, so they are cut right at reading (Parquet: filtered while reading)
    span = window_periods(actuals, evaluation_span(config))
    history, history_cycles = _read_history(config, issued, span, seg_cols, given)
    archived = (archive(issued, history_cycles, lambda frame: prune_earlier(
        frame, periods=span, lags=list(config.evaluation.lags), frequency=config.frequency))
        if archive is not None else ArchivedCycles())

    singles = {"forecast": forecast, "actuals": actuals, "mapping": mapping,
               "previous": archived.previous, "older": older}
    got, history, archived_parts = _unify(singles, history, archived.frames,
                                          [*keys, *seg_cols, F.SEGMENT])
    mapping = got.get("mapping")
    forecast = assign_segments(got["forecast"], config, mapping, role="forecast")
    history_frame, archived_frame, earlier, parts = combine_earlier(
        history, archived_parts, config, mapping, keys, progress)
    if history or archived.n_read:
        progress(f"read earlier cycles: {len(earlier):,} rows "
                 f"({len(history_frame):,} from history, {len(archived_frame):,} from the "
                 f"archive) in {time.perf_counter() - t0:.1f} s")
    actuals = attach_segments(got["actuals"], config, mapping,
                              lambda: segments_of_series([forecast, *parts], keys))
    info: dict[str, object] = {
        "forecast": {**_place(given.forecast, forecast_path or config.forecast.place, config),
                     "rows": len(forecast), "series": n_distinct(forecast, keys)},
        "actuals": {**_place(given.actuals, actuals_path or config.actuals.place, config),
                    "rows": len(actuals)},
        "earlier": {"rows": len(earlier), "history_rows": len(history_frame),
                    "archive_rows": len(archived_frame)},
    }
    if given.history is not None:
        info["history"] = [_place(h, None, config) for h in given.history]
    if given.mapping is not None:
        info["mapping"] = _place(given.mapping, None, config)
    return Inputs(forecast, actuals, earlier, mapping, got.get("previous"),
                  archived.previous_label, issued, info, got.get("older"), archived.notes,
                  reduced.index if reduced is not None else None)


def _place(given: Given | None, place: object, config: Config) -> dict[str, object]:
    """Where an input came from, for ``Inputs.info``: its place (a path, or a SQL source
    with its password masked), or the frame's kind and fingerprint (the columns the tool
    reads)."""
    if given is None:
        return {"path": str(place)}
    names = [str(c) for c in given.frame.columns]
    fc, ac = config.forecast, config.actuals
    wanted = {
        "forecast": [*fc.keys, fc.period, fc.issued, fc.value, *fc.quantiles.values(),
                     *config.segments.columns],
        "history": [*fc.keys, fc.period, fc.issued, fc.value, *fc.quantiles.values(),
                    *config.segments.columns],
        "actuals": [*config.actual_keys, ac.period, ac.value],
        "mapping": [*fc.keys, *config.segments.columns],
    }[given.role]
    return given.info([n for n in wanted if n in names])


def _read_current(config: Config, path: Path | Url | None, seg_cols: list[str],
                  progress: Progress, given: GivenFrames) -> pd.DataFrame:
    """The current forecast, with the segment columns it holds."""
    t0 = time.perf_counter()
    if given.forecast is not None:
        forecast = forecast_from_frame(config, given.forecast, segment_columns=seg_cols)
    else:
        forecast = read_forecast(config, path, segment_columns=seg_cols)
    progress(f"read forecast: {len(forecast):,} rows in {time.perf_counter() - t0:.1f} s")
    return forecast


def _read_actuals(config: Config, path: Path | Url | None, progress: Progress, given: GivenFrames
                  ) -> tuple[pd.DataFrame, pd.DataFrame | None]:
    """The actuals: only the recent periods the checks use (:func:`actuals_span`) when the
    Parquet pre-reads (or a frame) can tell them, with the series the older rows know (kept
    for the unexpected-series check); else every row and ``None``."""
    t0 = time.perf_counter()
    needed = actuals_span(config)
    if given.actuals is not None:
        actuals, older = actuals_from_frame(config, given.actuals, needed=needed)
        cut = f" of the last {needed} periods" if older is not None else ""
        progress(f"read actuals: {len(actuals):,} rows{cut} from the frame in "
                 f"{time.perf_counter() - t0:.1f} s")
        return actuals, older
    periods = actual_periods(config, path) if needed is not None else None
    if needed is not None and periods is not None and len(periods) > needed:
        actuals = read_actuals(config, path, periods=list(periods[-needed:]))
        older = actual_series(config, path)
        progress(f"read actuals: {len(actuals):,} rows of the last {needed} periods "
                 f"(older rows: {len(older):,} series known) in "
                 f"{time.perf_counter() - t0:.1f} s")
        return actuals, older
    actuals = read_actuals(config, path)
    progress(f"read actuals: {len(actuals):,} rows in {time.perf_counter() - t0:.1f} s")
    return actuals, None


def _read_history(config: Config, issued: pd.Timestamp, span: list[pd.Timestamp],
                  seg_cols: list[str], given: GivenFrames
                  ) -> tuple[list[pd.DataFrame], set[pd.Timestamp]]:
    """The rows of each history file (or frame) the evaluation can use (cycles issued before
    the run's, configured lags, target in ``span``) and the issue dates of every cycle the
    files hold."""
    lags = list(config.evaluation.lags)
    history = []
    history_cycles: set[pd.Timestamp] = set()
    if given.history is not None:
        for h in given.history:
            part, cycles = history_from_frame(
                config, h, issued=issued, span=span, segment_columns=seg_cols,
                prune=lambda frame, starts: prune_earlier(
                    frame, periods=span, lags=lags, frequency=config.frequency, starts=starts))
            history.append(part)
            history_cycles |= cycles
        return history, history_cycles
    for p in config.history_paths:
        starts = cycle_starts(p, config, periods=span)
        # the cycles known before reading: only their (issue date, period) pairs are read
        pairs = (cycle_targets(starts.loc[starts.index < issued], periods=span, lags=lags,
                               frequency=config.frequency) if starts is not None else None)
        part = read_forecast(config, p, role="history", key="history",
                             segment_columns=seg_cols, allow_empty=True,
                             periods=span if starts is not None else None, cycles=pairs)
        if starts is None:
            starts = part.groupby(F.ISSUED, sort=False)[F.PERIOD].min()
        history_cycles |= {pd.Timestamp(t) for t in starts.index}
        part = part.loc[part[F.ISSUED] < issued]
        history.append(prune_earlier(part, periods=span, lags=lags,
                                     frequency=config.frequency, starts=starts))
    return history, history_cycles


def _unify(singles: dict[str, pd.DataFrame | None], history: list[pd.DataFrame],
           archived: list[pd.DataFrame], columns: list[str]
           ) -> tuple[dict[str, pd.DataFrame], list[pd.DataFrame], list[pd.DataFrame]]:
    """Every frame with one set of categories per column of ``columns``: the single frames
    present (by name), the history parts, the archived parts."""
    present = {name: f for name, f in singles.items() if f is not None}
    unified = unify_categories([*present.values(), *history, *archived], columns)
    got = dict(zip(present, unified, strict=False))
    n, h = len(present), len(history)
    return got, unified[n:n + h], unified[n + h:]


def combine_earlier(history: list[pd.DataFrame], archived: list[pd.DataFrame], config: Config,
                    mapping: pd.DataFrame | None, keys: list[str], progress: Progress = quiet
                    ) -> tuple[pd.DataFrame, pd.DataFrame, pd.DataFrame, list[pd.DataFrame]]:
    """The earlier cycles' canonical rows from the history files' frames and the archived
    cycles' frames (categories already unified): ``(history rows, archived rows, earlier,
    parts)``. History rows get their segments and lose rows repeated across files (the last
    kept); archived rows are re-mapped or keep their stored segments; ``earlier`` stacks the
    non-empty ``parts`` with one set of segment categories. The dask engine builds each
    shard's earlier cycles with it too."""
    history_frame = _history_frame(
        [assign_segments(h, config, mapping, role="history") for h in history], keys, progress)
    archived_frame = _concat([_segments_of_archived(a, config, mapping) for a in archived])
    parts = [p for p in (history_frame, archived_frame) if len(p)]
    earlier = _concat(unify_categories(parts, [F.SEGMENT]) if len(parts) > 1 else parts)
    return history_frame, archived_frame, earlier, parts


def _history_frame(history: list[pd.DataFrame], keys: list[str],
                   progress: Progress) -> pd.DataFrame:
    """The history files' rows as one frame: a row repeated across files (same keys, period
    and issue date) kept once, the last one; ``attempt`` missing, ``source`` "history"."""
    frame = _concat(history)
    if not len(frame):
        return frame
    n_read = len(frame)
    repeated = duplicated_rows(frame, [*keys, F.PERIOD, F.ISSUED], keep="last")
    if repeated.any():
        frame = frame.loc[~repeated]
        progress(f"history: {n_read - len(frame):,} repeated rows dropped "
                 "(the last of each (keys, period, issue date) kept)")
    n = len(frame)
    no_attempt = pd.arrays.IntegerArray(np.zeros(n, dtype=np.int64), np.ones(n, dtype=bool))
    return frame.assign(**{
        F.ATTEMPT: no_attempt,
        F.SOURCE: pd.Categorical.from_codes(np.zeros(n, dtype=np.int8), ["history"])})


def _segments_of_archived(archived: pd.DataFrame, config: Config,
                          mapping: pd.DataFrame | None) -> pd.DataFrame:
    """Segments of archived rows: re-mapped when the mapping holds every segment column (so a
    corrected mapping applies to old cycles too), else as stored with the snapshot."""
    seg = config.segments.columns
    if not seg:
        return archived.assign(**{F.SEGMENT: ALL_SERIES})
    if mapping is not None and all(s in mapping.columns for s in seg):
        return assign_segments(archived.drop(columns=[F.SEGMENT], errors="ignore"),
                               config, mapping, role="archived forecast")
    if F.SEGMENT not in archived.columns:
        return archived.assign(**{F.SEGMENT: F.UNASSIGNED})
    return archived


def _concat(frames: list[pd.DataFrame]) -> pd.DataFrame:
    """The non-empty ``frames`` stacked (an empty frame when none is left)."""
    frames = [f for f in frames if len(f)]
    if not frames:
        return pd.DataFrame()
    return frames[0] if len(frames) == 1 else pd.concat(frames, ignore_index=True)
