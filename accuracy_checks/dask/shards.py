"""One shard's inputs, as :func:`~accuracy_checks.sources.load.load_inputs` would hold them.

A shard holds every row of its series in every input (forecast, actuals, earlier cycles from
the history files and the archive), in the run's reading order (``__order``,
:mod:`accuracy_checks.dask.read`). :func:`shard_inputs` turns those rows into the canonical
frames the pandas engine's checks take, restricted to the shard's series, by the loader's own
steps: one set of (sorted) categories per key and segment column, the segments from the frames
or the mapping, the history files' repeated rows dropped (the last kept), the actuals'
segments from the forecasts. The facts that need every row (the run's issue date, the
periods read, each cycle's first period) come in the :class:`Plan`, computed first.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from accuracy_checks.config import Config
from accuracy_checks.dask.read import ORDER, SHARD
from accuracy_checks.evaluation.join import CYCLE_START, prune_earlier
from accuracy_checks.sources import frames as F
from accuracy_checks.sources.codes import duplicated_rows
from accuracy_checks.sources.columns import SHOWN
from accuracy_checks.sources.load import combine_earlier
from accuracy_checks.sources.segments import (
    assign_segments,
    attach_segments,
    segments_of_series,
    unify_categories,
)

__all__ = ["HistoryPrune", "Plan", "ShardInputs", "merge_repeated", "prepared_inputs",
           "prune_history_piece", "repeated_actuals", "shard_inputs"]


@dataclass(frozen=True)
class Plan:
    """The run's global facts, from reductions over every row (small, picklable)."""

    #: the run's cycle: the forecast's latest issue date (``NaT``: none)
    issued: pd.Timestamp
    #: the forecast's earliest period (the horizon's first step; ``None``: no dated row)
    first_period: pd.Timestamp | None
    #: rows per distinct issue date of the forecast (a missing date as ``NaT``)
    issue_counts: pd.Series
    #: the periods of the actuals read (``None``: every row)
    actual_periods: tuple[pd.Timestamp, ...] | None
    #: the span of periods the earlier cycles are cut to
    span: tuple[pd.Timestamp, ...]
    #: the start of the coverage checks' activity window (``None``: no actual)
    window_start: pd.Timestamp | None
    #: per history place: issue date → its cycle's first period
    history_starts: tuple[pd.Series, ...] = ()
    #: where the actuals came from (for the repeated-actuals message)
    actuals_place: object = None
    #: the mapping table (broadcast to every shard; ``None``: no mapping)
    mapping: pd.DataFrame | None = None
    #: whether the actuals read are cut to ``actual_periods`` (older rows only name series)
    cut_actuals: bool = False
    extra: dict[str, object] = field(default_factory=dict)


@dataclass
class ShardInputs:
    """One shard's canonical frames (:class:`~accuracy_checks.sources.load.Inputs`' columns,
    rows in reading order, ``__order`` kept beside them)."""

    forecast: pd.DataFrame
    actuals: pd.DataFrame
    earlier: pd.DataFrame
    #: series the actuals' older rows know (``None``: every actual row was read)
    older: pd.DataFrame | None
    mapping: pd.DataFrame | None
    #: actuals rows repeating a series and period: their count and the first :data:`SHOWN`
    #: (keys, period, ``__order``); the shard is not checked further (``None``: none)
    repeated: tuple[int, pd.DataFrame] | None = None


def repeated_actuals(actuals: pd.DataFrame, keys: list[str]
                     ) -> tuple[int, pd.DataFrame] | None:
    """The shard's share of the pandas engine's repeated-actuals refusal (``refuse_repeated_
    actuals``): a series lives in one shard, so the run's repeated rows are the union of the
    shards', their count the sum and the rows named the first by ``__order``."""
    dup = duplicated_rows(actuals, [*keys, F.PERIOD])
    if not dup.any():
        return None
    columns = [*keys, F.PERIOD, *([ORDER] if ORDER in actuals.columns else [])]
    sample = actuals.loc[dup, columns].head(SHOWN)
    return int(dup.sum()), sample.astype({k: object for k in keys})


def merge_repeated(parts: Sequence[tuple[int, pd.DataFrame] | None]
                   ) -> tuple[int, pd.DataFrame] | None:
    """Several shards' repeated actuals as one: counts summed, the first rows kept."""
    found = [p for p in parts if p is not None]
    if not found:
        return None
    rows = pd.concat([f for _, f in found], ignore_index=True)
    if ORDER in rows.columns:
        rows = rows.sort_values(ORDER, kind="stable")
    return sum(n for n, _ in found), rows.head(SHOWN).reset_index(drop=True)


def prune_history_piece(frame: pd.DataFrame, config: Config, plan: Plan,
                        place: int) -> pd.DataFrame:
    """The rows of a history piece the evaluation can use: cycles issued before the run's,
    a configured lag, a target in the span (:func:`~accuracy_checks.evaluation.join.
    prune_earlier` with the place's cycle starts)."""
    frame = frame.loc[frame[F.ISSUED] < plan.issued]
    if not len(frame):
        return frame.iloc[:0].assign(**{CYCLE_START: pd.Series(dtype="datetime64[ns]"),
                                        F.LAG: pd.Series(dtype="int64")})
    starts = plan.history_starts[place]
    keep = [c for c in frame.columns if c in (ORDER, SHARD)]
    pruned = prune_earlier(frame.drop(columns=keep).assign(**{"__row": np.arange(len(frame))}),
                           periods=list(plan.span), lags=list(config.evaluation.lags),
                           frequency=config.frequency, starts=starts)
    rows = pruned.pop("__row").to_numpy()
    for c in keep:
        pruned[c] = frame[c].to_numpy()[rows]
    return pruned


@dataclass(frozen=True)
class HistoryPrune:
    """:func:`prune_history_piece` with the run's config and plan bound (a picklable step
    run on each history piece as it is read)."""

    config: Config
    plan: Plan

    def __call__(self, frame: pd.DataFrame, place: int) -> pd.DataFrame:
        return prune_history_piece(frame, self.config, self.plan, place)


def _by_order(frame: pd.DataFrame | None) -> pd.DataFrame | None:
    if frame is None:
        return None
    if ORDER in frame.columns:
        frame = frame.sort_values(ORDER, kind="stable").reset_index(drop=True)
    return frame.drop(columns=[SHARD], errors="ignore")


def _categorical(frame: pd.DataFrame, columns: Sequence[str]) -> pd.DataFrame:
    """Key columns as categoricals (sorted categories, as the converters give them)."""
    out = {c: pd.Categorical(frame[c].astype("str")) for c in columns
           if c in frame.columns and not isinstance(frame[c].dtype, pd.CategoricalDtype)}
    return frame.assign(**out) if out else frame


def shard_inputs(config: Config, plan: Plan, forecast: pd.DataFrame, actuals: pd.DataFrame,
                 history: pd.DataFrame | None, archived: pd.DataFrame | None) -> ShardInputs:
    """The canonical frames of one shard from its raw rows (module doc)."""
    keys, seg_cols = list(config.forecast.keys), list(config.segments.columns)
    forecast = _by_order(_categorical(forecast, keys))
    actuals = _by_order(_categorical(actuals, keys))
    assert forecast is not None and actuals is not None
    older = None  # the older rows' series are asked later (coverage.resolve_unexpected)
    if plan.cut_actuals:
        kept = actuals[F.PERIOD].isin(list(plan.actual_periods or ())).to_numpy()
        actuals = actuals.loc[kept].reset_index(drop=True)
    repeated = repeated_actuals(actuals, keys)
    if repeated is not None:  # refused on the client for the whole file (run_shards)
        return ShardInputs(forecast, actuals, pd.DataFrame(), None, plan.mapping, repeated)
    history_parts = []
    if history is not None and len(history):
        history_parts = [_by_order(_categorical(history, keys))]
    archived_parts = []
    if archived is not None and len(archived):
        archived_parts = [_by_order(_categorical(archived, keys))]
    singles = {"forecast": forecast, "actuals": actuals, "mapping": plan.mapping,
               "older": older}
    present = {n: f for n, f in singles.items() if f is not None}
    unified = unify_categories([*present.values(), *history_parts, *archived_parts],
                               [*keys, *seg_cols, F.SEGMENT])
    got = dict(zip(present, unified, strict=False))
    n = len(present)
    history_parts = unified[n:n + len(history_parts)]
    archived_parts = unified[n + len(history_parts):]
    mapping = got.get("mapping")
    forecast = assign_segments(got["forecast"], config, mapping, role="forecast")
    _, _, earlier, parts = combine_earlier(history_parts, archived_parts, config, mapping, keys)
    actuals = attach_segments(got["actuals"], config, mapping,
                              lambda: segments_of_series([forecast, *parts], keys))
    return ShardInputs(forecast, actuals, earlier, got.get("older"), mapping)


def prepared_inputs(config: Config, plan: Plan, forecast: pd.DataFrame,
                    actuals: pd.DataFrame, earlier: pd.DataFrame | None,
                    older: pd.DataFrame | None = None) -> ShardInputs:
    """A shard's canonical frames from rows already read and checked on the client: keys
    and segments back to categoricals with one sorted set of categories."""
    keys = list(config.forecast.keys)

    def cats(frame: pd.DataFrame | None) -> pd.DataFrame | None:
        if frame is None:
            return None
        frame = frame.sort_values(ORDER, kind="stable").reset_index(drop=True) \
            if ORDER in frame.columns else frame
        out = {c: pd.Categorical(frame[c]) for c in [*keys, F.SEGMENT] if c in frame.columns}
        return frame.drop(columns=[SHARD], errors="ignore").assign(**out)

    frames = [cats(forecast), cats(actuals), cats(earlier), cats(older), plan.mapping]
    present = [f for f in frames if f is not None]
    unified = iter(unify_categories(present, [*keys, F.SEGMENT]))
    f, a, e, o, m = (next(unified) if x is not None else None for x in frames)
    assert f is not None and a is not None
    return ShardInputs(f, a, e if e is not None else pd.DataFrame(), o, m)
