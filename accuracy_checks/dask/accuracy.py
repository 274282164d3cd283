"""The accuracy stage as mergeable partials: plan → partial per shard → merge → finish.

The dask engine splits the run's series into shards (every row of a series in one shard) and
computes the accuracy results without gathering rows in one process:

- :func:`accuracy_plan` (client): the global facts every shard needs, from per-period
  reductions the engine computes first over all rows: the distinct periods that have a finite
  actual (they fix the evaluation and tracking windows) and each earlier cycle's first period
  (lags count from it);
- :func:`accuracy_partial` (a worker, per shard): the shard's reductions only: per (window,
  grouping, lag, segment) sufficient statistics and counts, per-series reductions where a
  measure aggregates per-series values, and the top-k worst-offender candidates of each group
  with the pandas engine's ordering key; picklable, never rows;
- :func:`merge_partials` (a tree reduction): associative and order-free;
- :func:`finish_accuracy` (client): the same :class:`~accuracy_checks.results.CheckResult` list
  as :func:`accuracy_checks.checks.accuracy.run_accuracy` on the union of the shards, through the
  same registry, judge, wording and offender examples
  (:mod:`accuracy_checks.dask.accuracy_finish`).

Shard frames: ``earlier``/``actuals`` exactly as :class:`~accuracy_checks.sources.load.Inputs`
holds them (canonical columns, rows in the files' order), restricted to the shard's series.
Key and segment columns are categoricals, each shard with its own sorted categories (the
same relative order as the run's: the loader sorts every key column's categories): the pandas
engine numbers series by their key category codes, and that number breaks ties between
offenders; a shard's candidates carry it as ``comb`` (its own codes), and the merge ranks the
candidates of several shards again by their key labels (``accuracy_tables.label_order``).

Group identity across shards: ``(window, grouping, lag, seg_rank, segment)``; ``seg_rank`` is
the segment's category code in its shard (the pandas engine orders groups by it), ``-1`` for
``"*"``; shards that number the segments apart are renumbered by one order before they merge
(:func:`_one_segment_order`).
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from dataclasses import replace

import numpy as np
import pandas as pd

from accuracy_checks.checks.judge import Thresholds
from accuracy_checks.config import Config
from accuracy_checks.dask import accuracy_shard as shard
from accuracy_checks.dask.accuracy_families import FAMILIES
from accuracy_checks.dask.accuracy_finish import finish
from accuracy_checks.dask.accuracy_tables import (
    GROUP_KEYS,
    AccuracyPartial,
    AccuracyPlan,
    merge_candidates,
    merge_sums,
)
from accuracy_checks.errors import ConfigError
from accuracy_checks.evaluation.grid import grid_positions
from accuracy_checks.measures.registry import get_measure
from accuracy_checks.measures.selection import measure_settings, measures_to_report
from accuracy_checks.measures.stats import merge_stats
from accuracy_checks.results import CheckResult
from accuracy_checks.sources import frames as F

__all__ = ["AccuracyPartial", "AccuracyPlan", "accuracy_partial", "accuracy_plan",
           "finish_accuracy", "merge_partials"]

#: the built-in measures the dask engine computes: every built-in one (a plugin measure, or a
#: built-in id a plugin replaced, is refused by the plan)
AVAILABLE = frozenset({"me", "bias_pct", "mae", "mape", "wape", "rmse", "sde", *FAMILIES})


def accuracy_plan(config: Config, *, actual_periods: Sequence[pd.Timestamp],
                  cycle_starts: Mapping[pd.Timestamp, pd.Timestamp]) -> AccuracyPlan:
    """The global facts every shard needs.

    ``actual_periods``: the distinct periods with at least one finite actual, over all series
    (``actuals.period[isfinite(actuals.actual)].unique()``); they fix the evaluation and
    tracking windows. ``cycle_starts``: each earlier cycle's first period over all series
    (``earlier.groupby("issued").period.min()`` as a mapping issue date → period); lags are
    counted from it (rows carrying ``__cycle_start`` use their own). Raises
    :class:`~accuracy_checks.errors.ConfigError` for a measure the dask engine cannot compute
    yet (the message says to use ``engine: pandas``).
    """
    measures = measures_to_report(config)
    for m in measures:
        origin = get_measure(m).origin
        if m not in AVAILABLE or origin != "built-in":
            source = "" if origin == "built-in" else f" (it comes from {origin})"
            raise ConfigError(
                f"The measure {m!r}{source} is not yet available on the dask engine, which "
                f"computes the built-in {', '.join(sorted(AVAILABLE))}. Use `engine: pandas` "
                f"for this config, or leave {m!r} out of evaluation.measures and thresholds.")
    tracking = any(get_measure(m).window == "tracking" for m in measures)
    ev = config.evaluation
    span = max(ev.window, ev.tracking_window) if tracking else ev.window
    every = sorted({pd.Timestamp(p) for p in actual_periods if not pd.isna(p)})
    periods = every[-span:] if span > 0 else []
    return AccuracyPlan(
        keys=list(config.forecast.keys), frequency=config.frequency,
        lags=[int(lag) for lag in ev.lags], min_obs=ev.min_obs, offenders=ev.offenders,
        measures=measures, settings=measure_settings(config),
        window=periods[-ev.window:] if ev.window > 0 else [],
        tracking=periods[-ev.tracking_window:] if tracking and ev.tracking_window > 0 else [],
        periods=periods,
        cycle_starts={pd.Timestamp(k): pd.Timestamp(v) for k, v in cycle_starts.items()},
        scale_issues=_scale_issues(config, cycle_starts, periods[-ev.window:] if ev.window > 0
                                   else []) if {"mase", "msis"} & set(measures) else [],
    )


def _scale_issues(config: Config, cycle_starts: Mapping[pd.Timestamp, pd.Timestamp],
                  window: list[pd.Timestamp]) -> list[pd.Timestamp]:
    """The issue dates whose cycle reaches the evaluation window at a configured lag (the
    earliest cycle evaluated, which fixes MASE's scale, is one of them)."""
    if not window or not cycle_starts:
        return []
    issues = sorted(pd.Timestamp(k) for k in cycle_starts)
    starts = pd.Series([pd.Timestamp(cycle_starts[k]) for k in issues])
    first, _ = grid_positions(starts, config.frequency)
    (low,), _ = grid_positions(pd.Series([window[0]]), config.frequency)
    reach = first + max(config.evaluation.lags) - 1 >= low
    return [d for d, ok in zip(issues, reach, strict=True) if ok]


def accuracy_partial(plan: AccuracyPlan, earlier: pd.DataFrame,
                     actuals: pd.DataFrame) -> AccuracyPartial:
    """One shard's mergeable reduction.

    ``earlier``/``actuals``: the canonical frames exactly as ``Inputs.earlier`` /
    ``Inputs.actuals`` hold them (sources/load.py), restricted to the series of this shard:
    every row of each of those series, and no other series (rows in the files' order; key and
    segment categoricals with sorted categories: the run's, or the shard's own, in the same
    relative order; module doc). Returns only per-(lag, segment),
    per-(lag, segment, period) or per-series reductions and top-k candidates (never rows);
    picklable.
    """
    frame, history = shard.evaluation_rows(plan, earlier, actuals)
    if len(frame) == 0:
        return AccuracyPartial()
    reduced = shard.reduce_shard(plan, frame, history)
    return AccuracyPartial(
        n_rows=len(frame), segments=reduced.segments, cycles=reduced.cycles,
        stats=reduced.stats, sums=reduced.sums, candidates=reduced.candidates,
        tables=reduced.tables, cut=reduced.cut)


def merge_partials(parts: Sequence[AccuracyPartial]) -> AccuracyPartial:
    """The partial of the union of the parts' shards (associative, order-free)."""
    kept = [p for p in parts if p.n_rows]
    if not kept:
        return AccuracyPartial()
    if len(kept) == 1:
        return kept[0]
    kept, segments = _one_segment_order(kept)
    cycles: set[tuple[pd.Timestamp, int | None, str]] = set()
    for p in kept:
        cycles |= p.cycles
    limit = max((_limit(p.candidates) for p in kept), default=0)
    tables = {}
    for name in sorted({n for p in kept for n in p.tables}):
        frames = [p.tables[name] for p in kept if name in p.tables]
        tables[name] = merge_sums(frames, frames[0].attrs.get("keys", GROUP_KEYS))
        tables[name].attrs = dict(frames[0].attrs)
    cuts = [p.cut for p in kept if p.cut is not None]
    return AccuracyPartial(
        n_rows=sum(p.n_rows for p in kept), segments=segments, cycles=cycles,
        stats=merge_stats([p.stats for p in kept if p.stats is not None], GROUP_KEYS),
        sums=merge_sums([p.sums for p in kept if p.sums is not None]),
        candidates=merge_candidates([p.candidates for p in kept if p.candidates is not None],
                                    limit),
        tables=tables, cut=min(cuts) if cuts else None,
    )


def _one_segment_order(parts: list[AccuracyPartial]
                       ) -> tuple[list[AccuracyPartial], dict[str, int]]:
    """The parts with one numbering of the segments, and that numbering.

    Each shard ranks its segments by its own categories, a restriction of the run's order.
    When the parts agree (every label one rank, every rank one label) their ranks stand;
    otherwise the union is ranked again by the label's text, ``unassigned`` last (the order
    of the run's categories for a segment column: sorted values, then the actuals whose
    segment is unknown), and every ``seg_rank`` column is renumbered before the merge."""
    segments: dict[str, int] = {}
    agree = True
    for p in parts:
        for label, rank in p.segments.items():
            agree &= segments.setdefault(label, rank) == rank
    agree &= len(set(segments.values())) == len(segments)
    if agree:
        return parts, segments
    labels = sorted(segments, key=lambda label: (label == F.UNASSIGNED, label))
    new = {label: i for i, label in enumerate(labels)}
    return [_renumbered(p, new) for p in parts], new


def _renumbered(part: AccuracyPartial, ranks: dict[str, int]) -> AccuracyPartial:
    """``part`` with every ``seg_rank`` (but ``-1``, the ``"*"`` rows) taken from ``ranks``."""

    def frame(f: pd.DataFrame | None) -> pd.DataFrame | None:
        if f is None or "seg_rank" not in f.columns or not len(f):
            return f
        rank = f["seg_rank"].to_numpy()
        mapped = f["segment"].map(ranks).to_numpy()
        out = f.assign(seg_rank=np.where(rank == -1, -1, mapped).astype(rank.dtype))
        out.attrs = dict(f.attrs)
        return out

    return replace(part, segments=dict(ranks), stats=frame(part.stats), sums=frame(part.sums),
                   candidates=frame(part.candidates),
                   tables={name: frame(t) for name, t in part.tables.items()})


def _limit(candidates: pd.DataFrame | None) -> int:
    """The k the candidates were cut to (stored on the frame)."""
    if candidates is None:
        return 0
    return int(candidates.attrs.get("limit", 0))


def finish_accuracy(plan: AccuracyPlan, partial: AccuracyPartial, *,
                    book: Thresholds) -> list[CheckResult]:
    """Exactly what ``checks.accuracy.run_accuracy(config, earlier, actuals, book=book)``
    returns on the union of the shards: same checks, statuses, counts, examples, messages,
    values to 1e-9 relative."""
    return finish(plan, partial, book)
