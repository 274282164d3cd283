"""One shard's side of the dask accuracy stage: its evaluation rows and their reductions.

:func:`evaluation_rows` is :func:`accuracy_checks.evaluation.join.evaluation_frame` on a shard
with the run's global facts (the windows' periods and each cycle's first period come from the
plan, not from the shard's own rows); :func:`reduce_shard` prepares the rows once for every
measure (:class:`~accuracy_checks.checks.accuracy_groups.EvaluationGroups`, as the pandas
engine does) and keeps only per-group reductions and offender candidates.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd

from accuracy_checks.checks.accuracy_groups import EvaluationGroups
from accuracy_checks.dask.accuracy_families import EXTRA_KEYS, family_tables, scale_cut
from accuracy_checks.dask.accuracy_tables import (
    GROUP_KEYS,
    LABELS_SORTED,
    ORDERINGS,
    AccuracyPlan,
    scores,
    top_candidates,
)
from accuracy_checks.evaluation.baselines import ActualsIndex, known_through
from accuracy_checks.evaluation.join import (
    CYCLE_START,
    IN_TRACKING,
    IN_WINDOW,
    SERIES,
    add_lags_for_subset,
    exact_join,
    finite_actuals,
)
from accuracy_checks.measures.data import MeasureData
from accuracy_checks.measures.registry import get_measure
from accuracy_checks.results import ALL_SERIES
from accuracy_checks.sources import frames as F

__all__ = ["Reduced", "evaluation_rows", "reduce_shard"]

#: the column holding the segment of an offender's first row (its label under ``"*"``)
LABEL_SEGMENT = "label_segment"


@dataclass
class Reduced:
    """A shard's reductions (see :class:`~accuracy_checks.dask.accuracy_tables.
    AccuracyPartial`)."""

    segments: dict[str, int]
    cycles: set[tuple[pd.Timestamp, int | None, str]]
    stats: pd.DataFrame
    sums: pd.DataFrame
    candidates: pd.DataFrame
    tables: dict[str, pd.DataFrame]
    cut: int | None


def evaluation_rows(plan: AccuracyPlan, earlier: pd.DataFrame, actuals: pd.DataFrame
                    ) -> tuple[pd.DataFrame, ActualsIndex | None]:
    """The shard's evaluation frame (as ``evaluation_frame`` builds it on the whole run) and
    its actuals index; an empty frame when the shard has nothing to evaluate."""
    actuals = finite_actuals(actuals)
    if len(earlier) == 0 or not plan.periods:
        return pd.DataFrame(), None
    rows = earlier.loc[earlier[F.PERIOD].isin(plan.periods)]
    if CYCLE_START in rows.columns:
        rows = add_lags_for_subset(earlier, rows, plan.frequency)
    else:  # lags count from each cycle's first period over ALL series (the plan's)
        starts = pd.Series(list(plan.cycle_starts.values()),
                           index=pd.DatetimeIndex(list(plan.cycle_starts)), dtype="M8[ns]")
        first = starts.reindex(pd.DatetimeIndex(rows[F.ISSUED])).to_numpy()
        unknown = pd.isna(first) & rows[F.ISSUED].notna().to_numpy()
        if unknown.any():
            missing = sorted({str(d.date()) for d in rows.loc[unknown, F.ISSUED]})
            raise ValueError(f"the plan's cycle_starts lack the issue date(s) {missing}: it "
                             "must hold every earlier cycle's first period over all series")
        rows = add_lags_for_subset(earlier, rows.assign(**{CYCLE_START: first}),
                                   plan.frequency).drop(columns=CYCLE_START)
    rows = rows.loc[rows[F.LAG].isin(plan.lags)]
    if len(rows) == 0:
        return pd.DataFrame(), None
    rows = rows.assign(**{F.FORECAST: rows[F.FORECAST].where(np.isfinite(rows[F.FORECAST]))})
    history = ActualsIndex(actuals, plan.keys, plan.frequency)
    series = history.codes_of(rows)
    position = history.positions(rows[F.PERIOD])
    actual = history.values_at(series, position)
    off_grid = position < history.p0 - (1 << 40)
    if off_grid.any():
        actual[off_grid] = exact_join(rows.loc[off_grid], actuals, plan.keys)
    period = rows[F.PERIOD]
    joined = rows.assign(**{
        F.ACTUAL: actual,
        SERIES: series,
        IN_WINDOW: period.isin(plan.window).to_numpy(),
        IN_TRACKING: period.isin(plan.tracking).to_numpy() if plan.tracking else False,
    }).reset_index(drop=True)
    return joined, history


def series_order(rows: pd.DataFrame, keys: list[str]) -> np.ndarray:
    """The pandas engine's series number of each row, up to a monotone map: the key category
    codes in mixed radix (how :class:`~accuracy_checks.evaluation.baselines.ActualsIndex`
    numbers series; equal in every shard since shards share the categories)."""
    comb = np.zeros(len(rows), dtype=np.int64)
    for name in keys:
        column = rows[name]
        if isinstance(column.dtype, pd.CategoricalDtype):
            codes = column.cat.codes.to_numpy().astype(np.int64)
            size = max(len(column.cat.categories), 1)
        else:  # not the canonical frames: order by the key values themselves
            codes, uniques = pd.factorize(column, sort=True)
            size = max(len(uniques), 1)
        comb = comb * size + np.maximum(codes, 0)
    return comb


def segment_ranks(frame: pd.DataFrame, names: list[str]) -> dict[str, int]:
    """Each segment label's rank in the pandas engine's group order (its category code)."""
    column = frame[F.SEGMENT]
    if isinstance(column.dtype, pd.CategoricalDtype):
        cats = pd.Index([str(c) for c in column.cat.categories])
        return {name: int(cats.get_loc(name)) for name in names}
    return dict.fromkeys(names, 0)  # plain labels: ordered by the label alone


def reduce_shard(plan: AccuracyPlan, frame: pd.DataFrame, history: ActualsIndex | None
                 ) -> Reduced:
    """The shard's per-group statistics, sums and offender candidates, for every window and
    grouping the pandas engine measures."""
    job = EvaluationGroups(frame, plan.keys, plan.settings, history, plan.frequency)
    ranks = segment_ranks(job.frame, job.segment_names)
    stats, sums, candidates = [], [], []
    tables: dict[str, list[pd.DataFrame]] = {}
    scaled = {"mase", "msis"} & set(plan.measures)
    cut = scale_cut(job.frame, job, plan.frequency) if scaled else None
    cuts = _cuts(plan, cut)
    for window in plan.windows:
        for grouping in job.groupings:
            data = job.data(window, grouping)
            labels = _group_labels(data, window, grouping, ranks)
            stats.append(pd.concat([labels, data.stats], axis=1))
            units = data.units()
            sums.append(labels.assign(n_series=data.series_per_group(units)))
            bias = {get_measure(m).bias_type for m in plan.measures
                    if get_measure(m).window == window}
            wanted = [o for o in ORDERINGS if (o == "abs") in bias or (o != "abs") in bias]
            candidates.append(_candidates(data, labels, plan, wanted))
            measured = [m for m in plan.measures if get_measure(m).window == window]
            for name, table in family_tables(measured, data, labels, history, cuts).items():
                tables.setdefault(name, []).append(table)
    joined = {}
    for name, parts in tables.items():
        joined[name] = pd.concat(parts, ignore_index=True)
        joined[name].attrs = {"keys": [*GROUP_KEYS, *EXTRA_KEYS.get(name, [])]}
    return Reduced(
        segments=ranks, cycles=_cycles(job.frame), stats=pd.concat(stats, ignore_index=True),
        sums=pd.concat(sums, ignore_index=True),
        candidates=_flagged(top_candidates(pd.concat(candidates, ignore_index=True),
                                           plan.offenders), frame, plan.keys),
        tables=joined, cut=cut)


def _flagged(candidates: pd.DataFrame, frame: pd.DataFrame, keys: list[str]) -> pd.DataFrame:
    """``candidates`` flagged (:data:`LABELS_SORTED`) when every key column's categories are
    sorted: the order of the labels' text is then the order of the codes."""
    candidates.attrs[LABELS_SORTED] = all(
        isinstance(frame[k].dtype, pd.CategoricalDtype)
        and frame[k].cat.categories.is_monotonic_increasing for k in keys)
    return candidates


def _cuts(plan: AccuracyPlan, own: int | None) -> list[int]:
    """The MASE cuts a shard computes: those of the issue dates that can be the earliest
    evaluated cycle, up to the shard's own (the global cut is the smallest shard cut)."""
    if own is None or not plan.scale_issues:
        return []
    every = known_through(pd.Series(plan.scale_issues), plan.frequency) + 1
    return sorted({int(c) for c in every if c <= own} | {own})


def _group_labels(data: MeasureData, window: str, grouping: str,
                  ranks: dict[str, int]) -> pd.DataFrame:
    segment = data.groups[F.SEGMENT].astype(str).to_numpy(dtype=object)
    return pd.DataFrame({
        "window": window, "grouping": grouping,
        "lag": data.groups[F.LAG].to_numpy(dtype=np.int64),
        "seg_rank": [-1 if s == ALL_SERIES and grouping == "all" else ranks.get(s, 0)
                     for s in segment],
        "segment": segment,
    }, index=pd.RangeIndex(data.n_groups))


def _candidates(data: MeasureData, labels: pd.DataFrame, plan: AccuracyPlan,
                orderings: list[str]) -> pd.DataFrame:
    """Per (group, series) the sums ``worst_offenders`` ranks by, with the label of the
    series' first row: the shard's first ``plan.offenders`` of each group under each of
    ``orderings`` (those the window's measures can ask for; labels read for those only)."""
    units = data.units()
    limit = plan.offenders
    if units.n == 0 or limit <= 0:
        return pd.DataFrame(columns=[*GROUP_KEYS, "ordering", "comb", "score"])
    rows = np.flatnonzero(units.code >= 0)
    unit = units.code[rows]
    sum_e = np.bincount(unit, weights=data.error[rows], minlength=units.n)
    sum_abs = np.bincount(unit, weights=np.abs(data.error[rows]), minlength=units.n)
    count = np.bincount(unit, minlength=units.n)
    first = pd.Series(unit).drop_duplicates().index.to_numpy()
    first_of = np.empty(units.n, dtype=np.int64)
    first_of[unit[first]] = rows[first]
    comb = series_order(data.rows[plan.keys].iloc[first_of], plan.keys)
    # the units in (group, series order); then per ordering two stable sorts: by score, then
    # by group (a radix sort on small integers), so ties keep the series order
    base = np.arange(units.n)
    step_g, step_c = np.diff(units.group), np.diff(comb)
    if not np.all((step_g > 0) | ((step_g == 0) & (step_c >= 0))):
        base = np.lexsort((comb, units.group))
    small = units.group.astype(np.int16 if data.n_groups < (1 << 15) else np.int64)
    picked, chosen_orderings, picked_scores = [], [], []
    for ordering in orderings:
        score = scores(sum_e, sum_abs, ordering)
        order = base[np.argsort(-score[base], kind="stable")]
        order = order[np.argsort(small[order], kind="stable")]
        group = units.group[order]
        rank = np.arange(order.size) - np.searchsorted(group, group, side="left")
        keep = order[rank < limit]
        picked.append(keep)
        chosen_orderings.append(np.full(keep.size, ordering, dtype=object))
        picked_scores.append(score[keep])
    chosen = np.concatenate(picked)
    firsts = data.rows[[*plan.keys, F.SEGMENT]].iloc[first_of[chosen]]
    out = labels.iloc[units.group[chosen]].reset_index(drop=True).assign(
        ordering=np.concatenate(chosen_orderings), comb=comb[chosen], score=np.concatenate(
            picked_scores), sum_e=sum_e[chosen], sum_abs=sum_abs[chosen],
        count=count[chosen].astype(np.int64))
    for name in plan.keys:
        out[f"label:{name}"] = firsts[name].astype(object).to_numpy()
    out[LABEL_SEGMENT] = firsts[F.SEGMENT].astype(object).to_numpy()
    return out


def _cycles(frame: pd.DataFrame) -> set[tuple[pd.Timestamp, int | None, str]]:
    """(issue date, attempt, source) of the window rows that have an actual."""
    used = frame.loc[frame[IN_WINDOW] & frame[F.ACTUAL].notna()]
    out: set[tuple[pd.Timestamp, int | None, str]] = set()
    if len(used) == 0:
        return out
    cols = [F.ISSUED] + [c for c in (F.ATTEMPT, F.SOURCE) if c in used.columns]
    for rec in used[cols].drop_duplicates().astype(object).to_dict("records"):
        attempt = rec.get(F.ATTEMPT)
        out.add((pd.Timestamp(rec[F.ISSUED]),
                 None if attempt is None or pd.isna(attempt) else int(attempt),
                 str(rec.get(F.SOURCE, "history"))))
    return out
