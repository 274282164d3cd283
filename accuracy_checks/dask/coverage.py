"""The coverage checks as mergeable partials: per segment, counts and example candidates.

A shard holds whole series, so each series is judged in its shard exactly as the pandas engine
judges it (:mod:`accuracy_checks.checks.coverage`, :mod:`accuracy_checks.checks.horizon`),
given the run's global facts from the :class:`~accuracy_checks.dask.shards.Plan`: the start of
the activity window (the last ``active_periods`` periods holding an actual, over every
series) and the horizon's first period (the forecast's earliest period). Per check and
reported segment the partial keeps the number of relevant and offending series, summed counts
and the first ``max_examples`` offending series with the pandas engine's ordering key (series
are numbered by first appearance: forecast rows first, then the actuals'; missing series by
recent volume first). :func:`finish_coverage` words and judges them with the same helpers
(:class:`~accuracy_checks.checks.series_index.SegmentPart`, ``judged``, ``skipped``).
"""

from __future__ import annotations

import heapq
from collections.abc import Sequence
from dataclasses import dataclass, field
from typing import Any

import numpy as np
import pandas as pd

from accuracy_checks.checks.coverage import (
    M_MISSING,
    M_UNEXPECTED,
    MISSING_SERIES,
    UNEXPECTED_SERIES,
    known_by_table,
    missing_series_message,
    no_active_series_message,
    series_count_result,
    unexpected_series_message,
)
from accuracy_checks.checks.examples import example_value, plural
from accuracy_checks.checks.horizon import (
    HORIZON,
    HORIZON_MEASURE,
    HorizonSteps,
    horizon_message,
    horizon_problems,
    no_series_message,
)
from accuracy_checks.checks.judge import Thresholds
from accuracy_checks.checks.series_index import (
    SegmentPart,
    SeriesIndex,
    first_rows,
    identify_series,
    judged,
    skipped,
)
from accuracy_checks.dask.read import ORDER
from accuracy_checks.dask.shards import Plan
from accuracy_checks.evaluation.grid import grid_dates, grid_positions
from accuracy_checks.results import ALL_SERIES, CheckResult
from accuracy_checks.sources.frames import ACTUAL, PERIOD

__all__ = ["CoveragePartial", "coverage_partial", "finish_coverage", "merge_coverage"]

_ACTUALS_ONLY = 1 << 62  # an actuals-only series comes after every forecast series
_HORIZON_COUNTS = ("with_gaps", "with_rows_beyond", "with_off_grid_rows", "missing_steps",
                   "rows_beyond", "off_grid_rows")


@dataclass
class Part:
    """One check in one segment: relevant and offending series, counts, example candidates
    (sort key, example)."""

    n: int = 0
    n_bad: int = 0
    counts: dict[str, int] = field(default_factory=dict)
    shown: list[tuple[tuple[float, int], dict[str, Any]]] = field(default_factory=list)

    def merge(self, other: Part, k: int) -> Part:
        counts = {c: self.counts.get(c, 0) + other.counts.get(c, 0)
                  for c in dict.fromkeys([*self.counts, *other.counts])}
        return Part(self.n + other.n, self.n_bad + other.n_bad, counts,
                    heapq.nsmallest(k, [*self.shown, *other.shown], key=lambda s: s[0]))


@dataclass
class CoveragePartial:
    """Per check, per segment (``"*"`` included) :class:`Part` s; the segments to report; the
    forecast's series count."""

    parts: dict[tuple[str, str], Part] = field(default_factory=dict)
    segments: set[str] = field(default_factory=set)
    n_forecast_series: int = 0
    #: forecast series unknown to the actuals read and the mapping, when the actuals' older
    #: rows are still to be asked (:func:`resolve_unexpected`): (keys, segment, order, rows)
    unknown: list[tuple[tuple[str, ...], str, int, int]] = field(default_factory=list)


def merge_coverage(parts: Sequence[CoveragePartial], k: int) -> CoveragePartial:
    """The partial of the union of the parts' shards (associative, order-free)."""
    out = CoveragePartial()
    for p in parts:
        for key, part in p.parts.items():
            out.parts[key] = out.parts.get(key, Part()).merge(part, k)
        out.segments |= p.segments
        out.n_forecast_series += p.n_forecast_series
        out.unknown += p.unknown
    return out


def _order_keys(series: SeriesIndex, forecast: pd.DataFrame,
                actuals: pd.DataFrame) -> np.ndarray:
    """Each series' place in the pandas engine's numbering: its first forecast row, else
    after every forecast series, its first actuals row."""
    keys = np.zeros(series.n, dtype=np.int64)
    f = np.flatnonzero(series.in_forecast)
    keys[f] = forecast[ORDER].to_numpy()[first_rows(series.f_ids, f)]
    a = np.flatnonzero(~series.in_forecast)
    keys[a] = _ACTUALS_ONLY + actuals[ORDER].to_numpy()[first_rows(series.a_ids, a)]
    return keys


def _steps(series: SeriesIndex, forecast: pd.DataFrame, plan: Plan, frequency: str,
           horizon: int) -> HorizonSteps:
    """``checks.horizon.horizon_steps`` with the run's first period (not the shard's)."""
    periods = pd.DatetimeIndex(forecast[PERIOD])
    dated = ~np.asarray(periods.isna())
    pos = np.full(len(forecast), -1, dtype=np.int64)
    on = np.zeros(len(forecast), dtype=bool)
    present = np.zeros((series.n, horizon), dtype=bool)
    if plan.first_period is None:
        no_extra = np.zeros(series.n, dtype=np.int64)
        all_off = np.bincount(series.f_ids, minlength=series.n)
        return HorizonSteps(None, pd.DatetimeIndex([]), present, no_extra, all_off, pos, on,
                            dated, 0)
    first = pd.Timestamp(plan.first_period)
    base_pos, _ = grid_positions(pd.DatetimeIndex([first]), frequency)
    if dated.any():
        pos[dated], on[dated] = grid_positions(periods[dated], frequency)
    base = int(base_pos[0])
    step = pos - base
    placed = on & dated
    inside = placed & (step < horizon)
    present.reshape(-1)[series.f_ids[inside] * horizon + step[inside]] = True
    extra = np.bincount(series.f_ids[placed & (step >= horizon)], minlength=series.n)
    off_grid = np.bincount(series.f_ids[~placed], minlength=series.n)
    return HorizonSteps(first, grid_dates(first, horizon, frequency), present, extra, off_grid,
                        pos, on, dated, base)


def coverage_partial(forecast: pd.DataFrame, actuals: pd.DataFrame, plan: Plan, *,
                     keys: list[str], frequency: str, horizon: int,
                     known_series: Sequence[pd.DataFrame], max_examples: int,
                     defer_unexpected: bool = False) -> CoveragePartial:
    """One shard's coverage partial (frames in reading order, whole series).
    ``defer_unexpected``: the actuals hold only the recent periods; the forecast series they
    and ``known_series`` do not know are listed in ``unknown`` for :func:`resolve_unexpected`
    (the older rows name the series they know)."""
    k = max_examples
    series = identify_series(forecast, actuals, keys)
    order = _order_keys(series, forecast, actuals)
    names = np.asarray(series.segment_names, dtype=object)[series.segment]
    values = actuals[ACTUAL].to_numpy(dtype=np.float64, na_value=np.nan)
    periods = actuals[PERIOD].to_numpy(dtype="datetime64[ns]")
    if plan.window_start is None:
        active = np.zeros(series.n, dtype=bool)
        volume: np.ndarray = np.zeros(series.n)
    else:
        has_value = ~np.isnan(values) & ~np.isnat(periods)
        in_window = has_value & (periods >= plan.window_start)
        ids = series.a_ids[in_window]
        active = np.bincount(ids, minlength=series.n) > 0
        volume = np.bincount(ids, weights=values[in_window], minlength=series.n)
    out = CoveragePartial(n_forecast_series=int(series.in_forecast.sum()))
    relevant_any = series.in_forecast | active
    out.segments = {str(s) for s in np.unique(names[relevant_any])} - {ALL_SERIES}
    segments = [(ALL_SERIES, None), *((s, names == s) for s in sorted(out.segments))]

    def add(check: str, relevant: np.ndarray, offending: np.ndarray, sort: np.ndarray,
            example: Any, counts: Any = None) -> None:
        for seg, mask in segments:
            rel = relevant if mask is None else relevant & mask
            bad = offending if mask is None else offending & mask
            ids = np.flatnonzero(bad)
            shown = ids[np.lexsort((order[ids], sort[ids]))[:k]]
            examples = example(shown)
            out.parts[(check, seg)] = Part(
                int(rel.sum()), int(bad.sum()), counts(rel) if counts else {},
                [((float(sort[i]), int(order[i])), e)
                 for i, e in zip(shown.tolist(), examples, strict=True)])

    missing = active & ~series.in_forecast

    def missing_examples(shown: np.ndarray) -> list[dict[str, Any]]:
        examples = series.examples(actuals, series.a_ids, shown, keys)
        for example, vol in zip(examples, volume[shown], strict=True):
            example["recent_actuals"] = example_value(vol)
        return examples

    add(MISSING_SERIES, active, missing, -volume, missing_examples)

    known = series.in_actuals.copy()
    for table in known_series:
        known |= known_by_table(series, forecast, keys, table)
    rows = np.bincount(series.f_ids, minlength=series.n)
    no_sort = np.zeros(series.n)

    def unexpected_examples(shown: np.ndarray) -> list[dict[str, Any]]:
        examples = series.examples(forecast, series.f_ids, shown, keys)
        for example, n in zip(examples, rows[shown], strict=True):
            example["rows"] = int(n)
        return examples

    if defer_unexpected:
        ids = np.flatnonzero(series.in_forecast & ~known)
        key_rows = forecast.iloc[first_rows(series.f_ids, ids)]
        values = list(zip(*(key_rows[k].astype(str).tolist() for k in keys), strict=True))
        out.unknown = [(tuple(v), str(names[i]), int(order[i]), int(rows[i]))
                       for v, i in zip(values, ids.tolist(), strict=True)]
        add(UNEXPECTED_SERIES, series.in_forecast, np.zeros(series.n, dtype=bool), no_sort,
            unexpected_examples)
    else:
        add(UNEXPECTED_SERIES, series.in_forecast, series.in_forecast & ~known, no_sort,
            unexpected_examples)

    steps = _steps(series, forecast, plan, frequency, horizon)
    gaps = series.in_forecast & ~steps.present.all(axis=1)
    n_gap_steps = (horizon - steps.present.sum(axis=1)) * series.in_forecast
    incomplete = gaps | (steps.extra > 0) | (steps.off_grid > 0)

    def horizon_examples(shown: np.ndarray) -> list[dict[str, Any]]:
        examples = series.examples(forecast, series.f_ids, shown, keys)
        problems = horizon_problems(steps, forecast, series, shown, horizon)
        for example, text in zip(examples, problems, strict=True):
            example["problem"] = text
        return examples

    def horizon_counts(in_seg: np.ndarray) -> dict[str, int]:
        return {
            "with_gaps": int((gaps & in_seg).sum()),
            "with_rows_beyond": int(((steps.extra > 0) & in_seg).sum()),
            "with_off_grid_rows": int(((steps.off_grid > 0) & in_seg).sum()),
            "missing_steps": int(n_gap_steps[in_seg].sum()),
            "rows_beyond": int(steps.extra[in_seg].sum()),
            "off_grid_rows": int(steps.off_grid[in_seg].sum()),
        }

    add(HORIZON, series.in_forecast, series.in_forecast & incomplete, no_sort,
        horizon_examples, horizon_counts)
    return out


def _part(segment: str, part: Part) -> SegmentPart:
    """The checks' wording helper for merged counts."""
    relevant = np.ones(part.n, dtype=bool)
    offending = np.zeros(part.n, dtype=bool)
    offending[:part.n_bad] = True
    return SegmentPart(segment, "" if segment == ALL_SERIES else f" in segment {segment}",
                       relevant, offending)


def finish_coverage(partial: CoveragePartial, plan: Plan, *, frequency: str, horizon: int,
                    active_periods: int, book: Thresholds, known_tables: bool,
                    previous_series: int | None, previous_label: str | None,
                    max_examples: int) -> list[CheckResult]:
    """``checks.coverage.coverage_checks`` on the union of the shards."""
    k = max_examples
    segments = [ALL_SERIES, *sorted(partial.segments)]
    out: list[CheckResult] = []
    window = {"active_periods": active_periods,
              "window_start": example_value(plan.window_start)}
    for seg in segments:
        got = partial.parts.get((MISSING_SERIES, seg), Part())
        p = _part(seg, got)
        if p.n == 0:
            out.append(skipped(MISSING_SERIES, M_MISSING, seg, "%",
                               no_active_series_message(p, active_periods)))
            continue
        value = 100.0 * p.n_bad / p.n
        out.append(judged(
            book, check=MISSING_SERIES, measure=M_MISSING, segment=seg, value=value,
            unit="%", n_series=p.n_bad, message=missing_series_message(p, value),
            examples=[e for _, e in got.shown[:k]],
            details={"active": p.n, "missing": p.n_bad, **window}))
    source = "the actuals" + (" and the table of known series" if known_tables else "")
    for seg in segments:
        got = partial.parts.get((UNEXPECTED_SERIES, seg), Part())
        p = _part(seg, got)
        if p.n == 0:
            out.append(skipped(UNEXPECTED_SERIES, M_UNEXPECTED, seg, "count",
                               no_series_message(p)))
            continue
        out.append(judged(
            book, check=UNEXPECTED_SERIES, measure=M_UNEXPECTED, segment=seg,
            value=p.n_bad, unit="count", n_series=p.n_bad,
            message=unexpected_series_message(p, source),
            examples=[e for _, e in got.shown[:k]], details={"forecast_series": p.n}))
    first = example_value(plan.first_period) if plan.first_period is not None else None
    grid = f"{plural(horizon, 'period')} from {first} on the {frequency} grid"
    for seg in segments:
        got = partial.parts.get((HORIZON, seg), Part())
        p = _part(seg, got)
        if p.n == 0:
            out.append(skipped(HORIZON, HORIZON_MEASURE, seg, "count",
                               no_series_message(p)))
            continue
        details: dict[str, Any] = {"first_period": first, "horizon": horizon,
                                   "frequency": frequency, "series": p.n}
        details.update({c: got.counts.get(c, 0) for c in _HORIZON_COUNTS})
        out.append(judged(
            book, check=HORIZON, measure=HORIZON_MEASURE, segment=seg, value=p.n_bad,
            unit="count", n_series=p.n_bad,
            n_obs=details["rows_beyond"] + details["off_grid_rows"],
            message=horizon_message(p, details, grid), examples=[e for _, e in got.shown[:k]],
            details=details))
    if previous_series is not None:
        out.append(series_count_result(partial.n_forecast_series, previous_series,
                                       previous_label, book))
    return out


def resolve_unexpected(partial: CoveragePartial, known: set[tuple[str, ...]], keys: list[str],
                       k: int) -> None:
    """Count the deferred unknown series the older actuals did not name (``known``: the key
    values of those they did) as unexpected, in place: per segment and ``"*"``, with the
    first ``k`` in the pandas engine's order as examples."""
    left = sorted((u for u in partial.unknown if u[0] not in known), key=lambda u: u[2])
    partial.unknown = []
    for seg in [ALL_SERIES, *sorted(partial.segments)]:
        mine = [u for u in left if seg == ALL_SERIES or u[1] == seg]
        part = partial.parts.get((UNEXPECTED_SERIES, seg))
        if part is None:
            continue
        part.n_bad = len(mine)
        part.shown = [((0.0, order), {**dict(zip(keys, values, strict=True)), "segment": s,
                                      "rows": rows})
                      for values, s, order, rows in mine[:k]]
