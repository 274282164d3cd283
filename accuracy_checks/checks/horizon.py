"""``coverage.horizon``: does every forecast series have one row per period of the horizon?

The cycle's first period is the earliest forecast period (of any series). Every series must
have one row at each grid step 0 … horizon−1 from it. A series is incomplete when a step has
no row (gap), a row lies beyond the last step (extra), or a period is off the grid (or
missing). Measure ``incomplete_series`` (unit ``count``): value = number of incomplete series,
judged per segment; examples name each incomplete series' missing, extra and off-grid dates.

Three jobs, one function each: place every row on the grid (:func:`horizon_steps`, once per
run: :func:`~accuracy_checks.evaluation.grid.grid_positions`), say what is wrong with a
handful of series (:func:`horizon_problems`), and judge each segment (:func:`horizon_results`).
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass
from typing import Any

import numpy as np
import pandas as pd

from accuracy_checks.checks.examples import example_value, plural
from accuracy_checks.checks.judge import Thresholds
from accuracy_checks.checks.series_index import (
    SegmentPart,
    Segments,
    SeriesIndex,
    by_segment,
    date_codes,
    judged,
    skipped,
)
from accuracy_checks.evaluation.grid import grid_dates, grid_positions
from accuracy_checks.results import CheckResult
from accuracy_checks.sources.frames import PERIOD

__all__ = ["HORIZON", "HorizonSteps", "horizon_results", "horizon_steps"]

HORIZON = "coverage.horizon"
HORIZON_MEASURE = "incomplete_series"
# dates listed per problem in a horizon example before "(+n more)"
_DATES_SHOWN = 4


@dataclass(frozen=True)
class HorizonSteps:
    """Where every forecast row lies on the horizon, and the per-series counts."""

    first: pd.Timestamp | None
    step_dates: pd.DatetimeIndex
    present: np.ndarray  # (n_series, horizon) bool: a row on the grid at that step
    extra: np.ndarray  # per series: rows beyond the horizon
    off_grid: np.ndarray  # per series: rows off the grid or without a period
    row_pos: np.ndarray  # grid position of each forecast row (undated rows: -1)
    row_on: np.ndarray  # per row: on the grid
    row_dated: np.ndarray  # per row: has a period
    base: int  # grid position of the first period

    def row_step(self) -> np.ndarray:
        """The horizon step of each forecast row (meaningful where on the grid and dated)."""
        return self.row_pos - self.base


def horizon_steps(series: SeriesIndex, forecast: pd.DataFrame, frequency: str,
                  horizon: int) -> HorizonSteps:
    """Place every forecast row on the ``frequency`` grid from the earliest forecast period.

    The distinct periods are placed (:func:`~accuracy_checks.evaluation.grid.grid_positions`)
    and the rows take their period's place through its code
    (:func:`~accuracy_checks.checks.series_index.date_codes`)."""
    codes, uniques = date_codes(forecast[PERIOD], sort=False)
    dated = codes >= 0
    all_dated = bool(dated.all())
    present = np.zeros((series.n, horizon), dtype=bool)
    if len(uniques) == 0:
        no_extra = np.zeros(series.n, dtype=np.int64)
        all_off = np.bincount(series.f_ids, minlength=series.n)
        return HorizonSteps(None, pd.DatetimeIndex([]), present, no_extra, all_off,
                            np.full(len(forecast), -1, dtype=np.int64),
                            np.zeros(len(forecast), dtype=bool), dated, 0)
    unique_pos, unique_on = grid_positions(uniques, frequency)
    earliest = int(np.argmin(uniques.asi8))
    first = uniques[earliest]
    base = int(unique_pos[earliest])
    unique_step = unique_pos - base
    # per distinct period: on the grid and inside the horizon, or on the grid beyond it
    unique_inside = unique_on & (unique_step < horizon)
    unique_beyond = unique_on & (unique_step >= horizon)
    # few arrays of the forecast's length: each one costs its pages (13 M rows: 100 MB)
    if all_dated:
        pos, on = unique_pos[codes], unique_on[codes]
    else:
        pos = np.full(len(forecast), -1, dtype=np.int64)
        on = np.zeros(len(forecast), dtype=bool)
        pos[dated], on[dated] = unique_pos[codes[dated]], unique_on[codes[dated]]
    cells = np.multiply(series.f_ids, horizon)
    cells += pos
    cells -= base  # f_id · horizon + step
    if all_dated and unique_inside.all():  # the usual file: every row has its cell
        present.reshape(-1)[cells] = True
    else:
        inside = dated & unique_inside[codes]
        present.reshape(-1)[cells[inside]] = True
    del cells
    no_rows = np.zeros(series.n, dtype=np.int64)
    extra = (np.bincount(series.f_ids[dated & unique_beyond[codes]], minlength=series.n)
             if unique_beyond.any() else no_rows)
    placed = on & dated
    off_grid = (no_rows if placed.all() else
                np.bincount(series.f_ids[~placed], minlength=series.n))
    return HorizonSteps(first, grid_dates(first, horizon, frequency), present, extra, off_grid,
                        pos, on, dated, base)


# --------------------------------------------------------------------------- examples


def _dates_text(label: str, dates: Sequence[Any]) -> str:
    shown = ", ".join(
        str(example_value(d)) if d is not None else "no date" for d in dates[:_DATES_SHOWN]
    )
    more = f" (+{len(dates) - _DATES_SHOWN} more)" if len(dates) > _DATES_SHOWN else ""
    return f"{label} {shown}{more}"


def horizon_problems(steps: HorizonSteps, forecast: pd.DataFrame, series: SeriesIndex,
                     ids: np.ndarray, horizon: int) -> list[str]:
    """What is wrong with each series in ``ids`` (a handful), with exact dates."""
    if len(ids) == 0:
        return []
    wanted = np.zeros(series.n, dtype=bool)
    wanted[ids] = True
    rows = np.flatnonzero(wanted[series.f_ids])
    periods = pd.DatetimeIndex(forecast[PERIOD].iloc[rows])
    undated = np.asarray(periods.isna())
    row_ids = series.f_ids[rows]
    placed = steps.row_on[rows] & steps.row_dated[rows]
    beyond = placed & (steps.row_pos[rows] - steps.base >= horizon)
    texts = []
    for sid in ids.tolist():
        parts = []
        gaps = np.flatnonzero(~steps.present[sid])
        if len(gaps):
            parts.append(_dates_text("missing", list(steps.step_dates[gaps])))
        mine = row_ids == sid
        if (beyond & mine).any():
            parts.append(_dates_text("beyond the horizon", sorted(set(periods[beyond & mine]))))
        if (~placed & mine).any():
            listed: list[Any] = sorted(set(periods[~placed & mine & ~undated]))
            if (undated & mine).any():
                listed.append(None)
            parts.append(_dates_text("off-grid", listed))
        texts.append("; ".join(parts))
    return texts


# --------------------------------------------------------------------------- results


#: the counts of a result's details, per series (:func:`_series_counts`), in their order
_COUNTS = ("with_gaps", "with_rows_beyond", "with_off_grid_rows", "missing_steps",
           "rows_beyond", "off_grid_rows")


def _series_counts(steps: HorizonSteps, gaps: np.ndarray,
                   n_gap_steps: np.ndarray) -> dict[str, np.ndarray]:
    """Per series, each count of :data:`_COUNTS` (0 for a series without forecast rows)."""
    return {
        "with_gaps": gaps,
        "with_rows_beyond": steps.extra > 0,
        "with_off_grid_rows": steps.off_grid > 0,
        "missing_steps": n_gap_steps,
        "rows_beyond": steps.extra,
        "off_grid_rows": steps.off_grid,
    }


def _totals(series: SeriesIndex, per_series: dict[str, np.ndarray]) -> dict[str, list[int]]:
    """Each count summed per segment code (one ``bincount`` each) and, last, over all."""
    n_codes = len(series.segment_names)
    out = {}
    for name, values in per_series.items():
        by_code = np.bincount(series.segment, weights=values, minlength=n_codes)
        out[name] = [*(int(v) for v in by_code), int(np.sum(values))]
    return out


def _details(part: SegmentPart, code: int, totals: dict[str, list[int]], first: Any,
             horizon: int, frequency: str) -> dict[str, Any]:
    """The counts behind one segment's result (``code``: the segment's code, ``-1`` for
    ``"*"``). The counts are 0 outside the forecast series, so a segment's total over all
    its series is its total over its forecast series."""
    return {
        "first_period": first,
        "horizon": horizon,
        "frequency": frequency,
        "series": part.n,
        **{name: totals[name][code] for name in _COUNTS},
    }


def no_series_message(part: SegmentPart) -> str:
    """A per-series check skipped in ``part``'s segment: the forecast has no series there."""
    return f"The forecast has no series{part.where}"


def horizon_message(part: SegmentPart, details: dict[str, Any], grid: str) -> str:
    """The horizon check's message for one segment ``part``: all series exactly on ``grid``, or
    how many have gaps, rows beyond the horizon and off-grid dates (counts in ``details``)."""
    if not part.n_bad:
        return f"{part.subject('forecast series')} {part.verb('has', 'have')} exactly {grid}"
    kinds = ", ".join(
        f"{details[key]:,} {what}"
        for key, what in (
            ("with_gaps", "with gaps"),
            ("with_rows_beyond", "with rows beyond the horizon"),
            ("with_off_grid_rows", "with off-grid dates"),
        )
        if details[key]
    )
    return (
        f"{part.subject('forecast series')} {part.verb('does', 'do')} not have exactly {grid} "
        f"({kinds}); every series needs one row per period of the horizon"
    )


def horizon_results(series: SeriesIndex, segments: Segments, forecast: pd.DataFrame,
                    keys: list[str], frequency: str, horizon: int, book: Thresholds,
                    max_examples: int) -> list[CheckResult]:
    """``coverage.horizon`` for each reported segment (``"*"`` first)."""
    steps = horizon_steps(series, forecast, frequency, horizon)
    gaps = series.in_forecast & ~steps.present.all(axis=1)
    n_gap_steps = (horizon - steps.present.sum(axis=1)) * series.in_forecast
    incomplete = gaps | (steps.extra > 0) | (steps.off_grid > 0)
    first = example_value(steps.first) if steps.first is not None else None
    grid = f"{plural(horizon, 'period')} from {first} on the {frequency} grid"
    totals = _totals(series, _series_counts(steps, gaps, n_gap_steps))
    codes = {name: i for i, name in enumerate(series.segment_names)}
    parts = list(by_segment(segments, series.in_forecast, incomplete))
    shown = {part.segment: part.shown(max_examples) for part in parts if part.n}
    # every example series' problems at once (one pass over the forecast's rows)
    wanted = np.unique(np.concatenate([np.zeros(0, dtype=np.int64), *shown.values()]))
    problems = dict(zip(wanted.tolist(),
                        horizon_problems(steps, forecast, series, wanted, horizon), strict=True))
    out = []
    for part in parts:
        if part.n == 0:
            out.append(skipped(HORIZON, HORIZON_MEASURE, part.segment, "count",
                               no_series_message(part)))
            continue
        code = -1 if part.where == "" else codes[part.segment]
        details = _details(part, code, totals, first, horizon, frequency)
        examples = series.examples(forecast, series.f_ids, shown[part.segment], keys)
        for example, sid in zip(examples, shown[part.segment].tolist(), strict=True):
            example["problem"] = problems[sid]
        out.append(judged(
            book,
            check=HORIZON,
            measure=HORIZON_MEASURE,
            segment=part.segment,
            value=part.n_bad,
            unit="count",
            n_series=part.n_bad,
            n_obs=details["rows_beyond"] + details["off_grid_rows"],
            message=horizon_message(part, details, grid),
            examples=examples,
            details=details,
        ))
    return out
