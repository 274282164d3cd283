"""The merged partial → the pandas engine's accuracy results, through its own judging code.

Each (window, grouping) becomes a :class:`~accuracy_checks.measures.data.MeasureData` without
rows whose ``stats`` are the merged sufficient statistics, so the core measures run their
registry formulas (``from_stats``) on it and the accuracy check's own judging
(:func:`accuracy_checks.checks.accuracy._judged`: overflow, details, judge, wording) turns the
figures into results. The families that reduce rows differently supply their figure frames
from their merged reductions (:mod:`accuracy_checks.dask.accuracy_families`). Breached
results get their worst offenders from the merged top-k candidates, in the pandas engine's
order, worded by the same functions.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any, cast

import numpy as np
import pandas as pd

from accuracy_checks.checks.accuracy import (
    judged_results,
    no_data_result,
    not_configured_results,
    with_offenders,
)
from accuracy_checks.checks.accuracy_groups import EvaluationGroups
from accuracy_checks.checks.judge import Thresholds, span_words
from accuracy_checks.checks.offenders import finite_or_none, share_pct
from accuracy_checks.dask.accuracy_families import family_figures
from accuracy_checks.dask.accuracy_shard import LABEL_SEGMENT
from accuracy_checks.dask.accuracy_tables import (
    GROUP_KEYS,
    AccuracyPartial,
    AccuracyPlan,
    empty_data,
)
from accuracy_checks.evaluation.baselines import known_through
from accuracy_checks.evaluation.join import cycles_used
from accuracy_checks.measures.data import MeasureData
from accuracy_checks.measures.plugins import rejected_plugins
from accuracy_checks.measures.registry import Measure, get_measure
from accuracy_checks.measures.selection import FED_HISTORY, unmet_needs
from accuracy_checks.measures.stats import STAT_COLUMNS
from accuracy_checks.results import ALL_SERIES, BREACHED, CheckResult, Status, json_value
from accuracy_checks.sources import frames as F

__all__ = ["Merged", "finish"]

_COUNTS = ("n", "n_dropped", "n_zero_y", "n_negative_y")


@dataclass
class Merged:
    """The merged partial, addressable by (window, grouping): the groups in the pandas
    engine's order and, per window, their statistics and sums."""

    plan: AccuracyPlan
    partial: AccuracyPartial
    groupings: list[str]
    groups: dict[str, pd.DataFrame]

    def group_index(self, grouping: str) -> pd.MultiIndex:
        g = self.groups[grouping]
        return pd.MultiIndex.from_frame(g[["lag", "seg_rank", "segment"]])

    def table(self, frame: pd.DataFrame | None, window: str, grouping: str,
              columns: list[str]) -> pd.DataFrame:
        """``columns`` of ``frame`` for the groups of ``grouping`` in ``window``, in group order
        (absent groups: zeros)."""
        index = self.group_index(grouping)
        if frame is None or len(frame) == 0:
            return pd.DataFrame(0, index=pd.RangeIndex(len(index)), columns=columns)
        part = frame.loc[(frame["window"] == window) & (frame["grouping"] == grouping)]
        part = part.set_index(["lag", "seg_rank", "segment"])[columns]
        return part.reindex(index, fill_value=0).reset_index(drop=True)

    def data(self, window: str, grouping: str) -> MeasureData:
        """The rowless :class:`MeasureData` of (window, grouping) with the merged stats."""
        groups = self.groups[grouping][[F.LAG, F.SEGMENT]]
        data = empty_data(groups, self.plan.settings)
        stats = self.table(self.partial.stats, window, grouping, list(STAT_COLUMNS))
        stats = stats.astype({c: np.int64 for c in _COUNTS})
        stats["mean_e"] = stats["mean_e"].where(stats["n"] > 0, np.nan)
        data.__dict__["stats"] = stats  # the cached property, computed by the shards
        return data

    def facts(self, window: str, grouping: str, data: MeasureData) -> tuple[np.ndarray, ...]:
        """What ``EvaluationGroups.facts`` gives the judging code, from the merged sums."""
        stats = data.stats
        series = self.table(self.partial.sums, window, grouping, ["n_series"])
        return (stats["n"].to_numpy(), stats["n_dropped"].to_numpy(),
                stats["n_negative_y"].to_numpy(), series["n_series"].to_numpy(dtype=np.int64),
                data.groups[F.LAG].to_numpy(),
                data.groups[F.SEGMENT].astype(str).to_numpy(dtype=object))


class _Facts:
    """Stands in for :class:`EvaluationGroups` where the judging code asks for facts."""

    def __init__(self, facts: tuple[np.ndarray, ...]) -> None:
        self._facts = facts

    def facts(self, data: MeasureData) -> tuple[np.ndarray, ...]:
        return self._facts


def merged_view(plan: AccuracyPlan, partial: AccuracyPartial) -> Merged:
    """The groups of each grouping (every (lag, segment) of any window), in group order."""
    names = sorted(partial.segments, key=str)
    groupings = ["segment"] + (["all"] if set(names) != {ALL_SERIES} else [])
    stats = partial.stats if partial.stats is not None else pd.DataFrame(columns=GROUP_KEYS)
    groups = {}
    for grouping in groupings:
        g = stats.loc[stats["grouping"] == grouping, ["lag", "seg_rank", "segment"]]
        g = g.drop_duplicates().sort_values(["lag", "seg_rank", "segment"], kind="stable")
        groups[grouping] = g.reset_index(drop=True).astype({"lag": np.int64})
    return Merged(plan, partial, groupings, groups)


def finish(plan: AccuracyPlan, partial: AccuracyPartial, book: Thresholds) -> list[CheckResult]:
    """The accuracy results of the merged ``partial`` (see :func:`accuracy_checks.dask.
    accuracy.finish_accuracy`)."""
    defs = [get_measure(m) for m in plan.measures]
    span = span_words(plan.window)
    if partial.n_rows == 0:
        reason = ("no actuals yet" if not plan.window
                  else f"no earlier forecast targets the window {span}")
        out = [no_data_result(ALL_SERIES, lag, m.id, book, reason)
               for lag in plan.lags for m in defs]
    else:
        _check_cut(plan, partial)
        merged = merged_view(plan, partial)
        with np.errstate(over="ignore", invalid="ignore"):
            out = _measure_all(merged, defs, book)
        segments = sorted(partial.segments, key=str) + (
            [ALL_SERIES] if "all" in merged.groupings else [])
        have = {(int(lag), str(seg)) for g in merged.groups.values()
                for lag, seg in g[["lag", "segment"]].itertuples(index=False)}
        for lag in plan.lags:
            for segment in segments:
                if (lag, segment) not in have:
                    out += [no_data_result(segment, lag, m.id, book,
                                           f"no earlier forecast at lag {lag} targets {span}")
                            for m in defs]
    cycles = _cycles_list(partial)
    if cycles:
        out = [CheckResult(**{**r.__dict__, "details": {**r.details, "cycles": cycles}})
               if r.segment == ALL_SERIES else r for r in out]
    out += [CheckResult("accuracy.plugins", Status.WARN, message=p.message, details=p.details)
            for p in rejected_plugins()]
    return out


def _check_cut(plan: AccuracyPlan, partial: AccuracyPartial) -> None:
    """The global MASE/MSIS cut must be one every shard computed: a cut of the plan's issue
    dates (else a shard's sums for it would be missing, and the figure wrong)."""
    if partial.cut is None:
        return
    cuts = known_through(pd.Series(plan.scale_issues, dtype="M8[ns]"), plan.frequency) + 1
    if partial.cut not in set(cuts.tolist()):
        raise ValueError("the earliest evaluated cycle is not among the plan's scale_issues: "
                         "cycle_starts must hold every earlier cycle's issue date")


def _measure_all(merged: Merged, defs: list[Measure], book: Thresholds) -> list[CheckResult]:
    plan = merged.plan
    out: list[CheckResult] = []
    datas: dict[tuple[str, str], MeasureData] = {}
    for measure in defs:
        missing = unmet_needs(measure, plan.settings, FED_HISTORY)
        windows = {"evaluation": plan.window,
                   "tracking": plan.tracking if plan.tracking else plan.window}
        measure_span = span_words(windows[measure.window])
        for grouping in merged.groupings:
            key = (measure.window, grouping)
            if key not in datas:
                datas[key] = merged.data(*key)
            data = datas[key]
            if missing:
                out += not_configured_results(measure, data, missing, book)
                continue
            if measure.from_stats is not None and measure.compute is None:
                values = measure.from_stats(data.stats)
            else:
                values = _figures(measure, merged, measure.window, grouping, data)
            facts = _Facts(merged.facts(measure.window, grouping, data))
            judged = judged_results(measure, values, data, cast(EvaluationGroups, facts), book,
                                    plan.min_obs, measure_span, plan.offenders, plan.keys)
            out += _offenders(judged, measure, merged, measure.window, grouping, data)
    return out


def _figures(measure: Measure, merged: Merged, window: str, grouping: str,
             data: MeasureData) -> pd.DataFrame:
    """A family measure's figure frame from the merged tables, in group order."""
    tables = merged.partial.tables
    cut = merged.partial.cut

    def table(name: str, columns: list[str], variant: str | None) -> pd.DataFrame:
        frame = tables.get(name)
        wanted: dict[str, object] = {"before": cut} if name in ("mase", "msis") else {}
        if variant is not None:
            wanted["variant"] = variant
        for column, value in wanted.items():
            if frame is not None:  # a shard without rows for it keeps no such column
                frame = (frame.loc[frame[column] == value] if column in frame.columns
                         else None)
        return merged.table(frame, window, grouping, columns)

    cells: dict[str, pd.DataFrame | None] = {}
    number = pd.Series(np.arange(len(merged.groups[grouping])),
                       index=merged.group_index(grouping))
    for name in ("periods", "cost"):  # rows per (group, period | row segment)
        frame = tables.get(name)
        if frame is not None:
            frame = frame.loc[(frame["window"] == window) & (frame["grouping"] == grouping)]
            keys = pd.MultiIndex.from_frame(frame[["lag", "seg_rank", "segment"]])
            frame = frame.assign(group=number.reindex(keys).to_numpy())
        cells[name] = frame
    return family_figures(measure, data, table, cells, cut)


def _offenders(results: list[CheckResult], measure: Measure, merged: Merged, window: str,
               grouping: str, data: MeasureData) -> list[CheckResult]:
    """``results`` with the worst offenders of each breached one (``with_offenders``)."""
    limit = merged.plan.offenders
    if limit <= 0 or not any(r.status in BREACHED for r in results):
        return results
    groups = merged.groups[grouping]
    where = {(int(lag), str(seg)): g for g, (lag, seg) in
             enumerate(groups[["lag", "segment"]].itertuples(index=False))}
    total_e = data.stats["sum_e"].to_numpy(dtype=np.float64)
    total_abs = data.stats["sum_abs_e"].to_numpy(dtype=np.float64)
    out = []
    for result in results:
        if result.status in BREACHED and result.lag is not None and result.segment is not None:
            g = where[(int(result.lag), str(result.segment))]
            examples = _examples(merged, window, grouping, g, measure.bias_type,
                                 float(total_e[g]), float(total_abs[g]))
            result = with_offenders(result, examples, measure.bias_type)
        out.append(result)
    return out


def _examples(merged: Merged, window: str, grouping: str, g: int, bias: bool,
              total_e: float, total_abs: float) -> list[dict[str, Any]]:
    """The worst-offender examples of group ``g``, as ``worst_offenders`` words them."""
    candidates = merged.partial.candidates
    if candidates is None or len(candidates) == 0:
        return []
    direction = np.sign(total_e)
    if not bias or not np.isfinite(direction):
        ordering = "abs"
    else:
        ordering = {1.0: "pos", -1.0: "neg"}.get(float(direction), "zero")
    lag, rank, segment = merged.groups[grouping].iloc[g][["lag", "seg_rank", "segment"]]
    pick = candidates.loc[(candidates["window"] == window)
                          & (candidates["grouping"] == grouping)
                          & (candidates["lag"] == lag) & (candidates["seg_rank"] == rank)
                          & (candidates["segment"] == segment)
                          & (candidates["ordering"] == ordering)]
    order = np.lexsort((pick["comb"].to_numpy(), -pick["score"].to_numpy()))
    pick = pick.iloc[order[:merged.plan.offenders]]
    columns = [f"label:{k}" for k in merged.plan.keys]
    names = list(merged.plan.keys)
    if segment == ALL_SERIES:
        columns, names = [*columns, LABEL_SEGMENT], [*names, F.SEGMENT]
    examples = []
    for rec in pick.to_dict("records"):
        example: dict[str, Any] = {n: json_value(rec[c]) for n, c in zip(names, columns,
                                                                          strict=True)}
        example.update({
            "n_obs": int(rec["count"]),
            "error": finite_or_none(rec["sum_e"]),
            "abs_error": finite_or_none(rec["sum_abs"]),
            "share_of_abs_error_pct": share_pct(rec["sum_abs"], total_abs),
            "share_of_bias_pct": share_pct(rec["sum_e"], total_e),
        })
        examples.append(example)
    return examples


def _cycles_list(partial: AccuracyPartial) -> list[dict[str, object]]:
    """The cycles used, as ``evaluation_frame`` lists them."""
    if not partial.cycles:
        return []
    rows = sorted(partial.cycles, key=lambda c: (c[0], c[1] is None, c[1] or 0, c[2]))
    frame = pd.DataFrame({
        F.ISSUED: pd.to_datetime([c[0] for c in rows]),
        F.ATTEMPT: pd.Series([c[1] for c in rows], dtype=object),
        F.SOURCE: [c[2] for c in rows],
        F.ACTUAL: 1.0,
    })
    return cycles_used(frame)
