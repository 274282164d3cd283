"""Coverage checks: does the forecast cover the right series, each over the whole horizon?

Every check is reported for segment ``"*"`` (all series) and for each distinct segment (the
segment of a series is its forecast's ``segment``; for a series found only in the actuals, the
actuals' ``segment``, ``"unassigned"`` when unknown). When every series is in segment ``"*"``
(no segments configured) only ``"*"`` is reported.

``coverage.missing_series`` (measure ``missing_series_pct``, unit ``%``)
    *Active* series have at least one non-null actual in the window of the last
    ``active_periods`` distinct periods that hold a non-null actual. value =
    100 · (active series without a forecast row) / (active series). No active series:
    ``skipped`` (``no_data``). Examples: the missing series, largest recent volume (sum of
    actuals in the window) first.
``coverage.unexpected_series`` (measure ``unexpected_series``, unit ``count``)
    Forecast series found neither in the actuals (any period, any value) nor in
    ``known_series`` (a table of some or all key columns: a series is known when its values
    in the table's key columns match a row of the table). value = their number.
``coverage.horizon`` (measure ``incomplete_series``, unit ``count``)
    Every series has one row per period of the horizon; value = number of incomplete series
    (:mod:`.horizon`).
``coverage.series_count`` (measure ``series_count_change_pct``, unit ``%``; only when the
previous cycle's forecast is given)
    value = 100 · (n_now − n_previous) / n_previous distinct series, segment ``"*"``.

Each value is judged by the :class:`~accuracy_checks.checks.judge.Thresholds` (a level is
broken when the value is strictly beyond it). A segment without any forecast series gets
``skipped`` (``no_data``) for the checks about forecast series.

Cost: series are identified once (:mod:`.series_index`: the key columns of forecast and
actuals factorised jointly into one dense series id per row); every count is a
``np.bincount`` over those ids; the grid is computed once (:mod:`.horizon`). Only the ≤
``max_examples`` example series per result are turned into Python objects.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass
from typing import Any

import numpy as np
import pandas as pd

from accuracy_checks.checks.examples import example_value, pct_text, plural, require_columns
from accuracy_checks.checks.horizon import HORIZON, horizon_results, no_series_message
from accuracy_checks.checks.judge import Thresholds
from accuracy_checks.checks.series_index import (
    SegmentPart,
    Segments,
    SeriesIndex,
    by_segment,
    identify_series,
    judged,
    skipped,
)
from accuracy_checks.errors import InputError
from accuracy_checks.results import ALL_SERIES, CheckResult, Reason
from accuracy_checks.sources.codes import combine_codes, combined_codes
from accuracy_checks.sources.frames import ACTUAL, PERIOD

__all__ = [
    "COVERAGE_CHECKS",
    "HORIZON",
    "MISSING_SERIES",
    "SERIES_COUNT",
    "UNEXPECTED_SERIES",
    "coverage_checks",
]

MISSING_SERIES = "coverage.missing_series"
UNEXPECTED_SERIES = "coverage.unexpected_series"
SERIES_COUNT = "coverage.series_count"
#: The coverage checks, in the order :func:`coverage_checks` returns them.
COVERAGE_CHECKS: tuple[str, ...] = (MISSING_SERIES, UNEXPECTED_SERIES, HORIZON, SERIES_COUNT)

M_MISSING = "missing_series_pct"
M_UNEXPECTED = "unexpected_series"
M_COUNT = "series_count_change_pct"


# --------------------------------------------------------------------------- missing series


@dataclass(frozen=True)
class _Activity:
    """Which series are active: a non-null actual in the recent window."""

    active: np.ndarray  # per series
    volume: np.ndarray  # per series: sum of actuals in the window
    window_start: np.datetime64 | None


def _activity(series: SeriesIndex, actuals: pd.DataFrame, active_periods: int) -> _Activity:
    values = actuals[ACTUAL].to_numpy(dtype=np.float64, na_value=np.nan)
    periods = actuals[PERIOD].to_numpy(dtype="datetime64[ns]")
    has_value = ~np.isnan(values) & ~np.isnat(periods)
    recent = np.sort(pd.unique(periods[has_value]))[-active_periods:]
    if len(recent) == 0:
        return _Activity(np.zeros(series.n, dtype=bool), np.zeros(series.n), None)
    in_window = has_value & (periods >= recent[0])
    ids = series.a_ids[in_window]
    return _Activity(
        np.bincount(ids, minlength=series.n) > 0,
        np.bincount(ids, weights=values[in_window], minlength=series.n),
        recent[0],
    )


def _missing_series(series: SeriesIndex, activity: _Activity, segments: Segments,
                    actuals: pd.DataFrame, keys: list[str], active_periods: int,
                    book: Thresholds, max_examples: int) -> list[CheckResult]:
    volume = activity.volume
    missing = activity.active & ~series.in_forecast
    window = {"active_periods": active_periods,
              "window_start": example_value(activity.window_start)}
    out = []
    for part in by_segment(segments, activity.active, missing):
        if part.n == 0:
            out.append(skipped(MISSING_SERIES, M_MISSING, part.segment, "%",
                               no_active_series_message(part, active_periods)))
            continue
        value = 100.0 * part.n_bad / part.n
        ids = np.flatnonzero(part.offending)
        shown = ids[np.argsort(-volume[ids], kind="stable")[:max_examples]]
        examples = series.examples(actuals, series.a_ids, shown, keys)
        for example, vol in zip(examples, volume[shown], strict=True):
            example["recent_actuals"] = example_value(vol)
        out.append(judged(
            book, check=MISSING_SERIES, measure=M_MISSING, segment=part.segment, value=value,
            unit="%", n_series=part.n_bad, message=missing_series_message(part, value),
            examples=examples,
            details={"active": part.n, "missing": part.n_bad, **window},
        ))
    return out


def no_active_series_message(part: SegmentPart, active_periods: int) -> str:
    """``coverage.missing_series`` skipped in ``part``'s segment: no series has an actual in
    the last ``active_periods`` periods."""
    return (f"No series{part.where} has an actual in the last {active_periods} periods, "
            "so no series is expected in the forecast")


def missing_series_message(part: SegmentPart, value: float) -> str:
    """``coverage.missing_series`` in ``part``'s segment: ``part.n_bad`` of the active series
    (``value`` % of them) have no forecast, or all have one."""
    subject = part.subject("active series")
    return (
        f"{subject} ({pct_text(value)} %) {part.verb('has', 'have')} no forecast; add "
        "them to the forecast job or end them in the actuals"
        if part.n_bad else f"{subject} {part.verb('has', 'have')} a forecast"
    )


def unexpected_series_message(part: SegmentPart, source: str) -> str:
    """``coverage.unexpected_series`` in ``part``'s segment: ``part.n_bad`` forecast series
    are unknown to ``source`` ("the actuals", and the table of known series if given), or
    all are known."""
    head = f"{part.subject('forecast series')} {part.verb('is', 'are')}"
    return (
        f"{head} unknown to {source}; check their keys for typos or add them to the "
        "mapping of series" if part.n_bad else f"{head} known to {source}"
    )


# --------------------------------------------------------------------------- unexpected series


def known_by_table(series: SeriesIndex, forecast: pd.DataFrame, keys: list[str],
                   known_series: pd.DataFrame) -> np.ndarray:
    """Per series: whether its values in the table's key columns match a row of the table."""
    columns = [k for k in keys if k in known_series.columns]
    if not columns:
        raise InputError(
            f"The table of known series has none of the key columns {keys} (it has "
            f"{list(known_series.columns)}), so forecast series cannot be matched to it.",
            columns=list(known_series.columns),
        )
    ids = np.flatnonzero(series.in_forecast)
    positions = series.first_rows_in(series.f_ids, ids)
    matched = _matched_by_codes(forecast, positions, known_series, columns)
    if matched is None:
        rows = forecast.iloc[positions]
        arrays = []
        for c in columns:
            table = known_series[c]
            if pd.api.types.is_string_dtype(rows[c].dtype) and not pd.api.types.is_string_dtype(
                table.dtype
            ):
                table = table.astype("str")
            arrays.append(pd.concat([rows[c], table], ignore_index=True).array)
        codes = combine_codes(arrays, len(rows) + len(known_series))
        matched = np.isin(codes[: len(rows)], codes[len(rows) :])
    known = np.zeros(series.n, dtype=bool)
    known[ids[matched]] = True
    return known


def _matched_by_codes(forecast: pd.DataFrame, positions: np.ndarray, table: pd.DataFrame,
                      columns: list[str]) -> np.ndarray | None:
    """Whether the forecast rows at ``positions`` match a row of ``table`` in ``columns``,
    from the categorical codes when both frames share each column's categories and the code
    space is small (a lookup table, no hashing); ``None`` otherwise."""
    space = 1
    for c in columns:
        f, t = forecast[c].dtype, table[c].dtype
        if not (isinstance(f, pd.CategoricalDtype) and isinstance(t, pd.CategoricalDtype)
                and f.categories.equals(t.categories)):
            return None
        space *= len(f.categories) + 1
        if space > max(len(positions) + len(table), 1 << 20):
            return None
    listed = np.zeros(space, dtype=bool)
    listed[combine_codes([table[c].array for c in columns], len(table))] = True
    return listed[combine_codes([forecast[c].array.take(positions) for c in columns],
                                len(positions))]


def _unexpected_series(series: SeriesIndex, segments: Segments, forecast: pd.DataFrame,
                       keys: list[str],
                       known_series: pd.DataFrame | Sequence[pd.DataFrame] | None,
                       book: Thresholds, max_examples: int) -> list[CheckResult]:
    known = series.in_actuals.copy()
    tables = ([] if known_series is None else [known_series]
              if isinstance(known_series, pd.DataFrame) else list(known_series))
    for table in tables:
        known |= known_by_table(series, forecast, keys, table)
    rows = np.zeros(0, dtype=np.int64)  # rows per series, for the examples (counted if needed)
    source = "the actuals" + (" and the table of known series" if tables else "")
    out = []
    for part in by_segment(segments, series.in_forecast, series.in_forecast & ~known):
        if part.n == 0:
            out.append(skipped(UNEXPECTED_SERIES, M_UNEXPECTED, part.segment, "count",
                               no_series_message(part)))
            continue
        shown = part.shown(max_examples)
        examples = series.examples(forecast, series.f_ids, shown, keys)
        if len(shown) and len(rows) == 0:
            rows = np.bincount(series.f_ids, minlength=series.n)
        for example, n in zip(examples, rows[shown] if len(shown) else [], strict=True):
            example["rows"] = int(n)
        out.append(judged(
            book, check=UNEXPECTED_SERIES, measure=M_UNEXPECTED, segment=part.segment,
            value=part.n_bad, unit="count", n_series=part.n_bad,
            message=unexpected_series_message(part, source),
            examples=examples, details={"forecast_series": part.n},
        ))
    return out


# --------------------------------------------------------------------------- series count


def _series_count(series: SeriesIndex, previous: pd.DataFrame, keys: list[str],
                  previous_label: str | None, book: Thresholds) -> CheckResult:
    missing = [k for k in keys if k not in previous.columns]
    if missing:
        raise InputError(
            f"The previous cycle's forecast lacks the key column(s) {missing}.", missing=missing
        )
    n_now = int(series.in_forecast.sum())
    n_prev = int(np.unique(combined_codes(previous, keys)).size) if len(previous) else 0
    return series_count_result(n_now, n_prev, previous_label, book)


def series_count_result(n_now: int, n_prev: int, previous_label: str | None,
                        book: Thresholds) -> CheckResult:
    """``coverage.series_count`` from the series counts of this forecast (``n_now``) and of
    the previous cycle's (``n_prev``, named ``previous_label``): the change in percent of
    ``n_prev``, judged against ``book``; no data when ``n_prev`` is 0. Shared by both
    engines."""
    label = previous_label or "the previous cycle"
    common: dict[str, Any] = {
        "check": SERIES_COUNT, "measure": M_COUNT, "segment": ALL_SERIES, "unit": "%",
        "n_series": n_now,
        "details": {"previous_cycle": previous_label, "now": n_now, "previous": n_prev},
    }
    if n_prev == 0:
        return judged(book, value=None, reason=Reason.NO_DATA,
                      message=f"The forecast of {label} has no series, so the change in the "
                      "number of series is undefined", **common)
    value = 100.0 * (n_now - n_prev) / n_prev
    if n_now == n_prev:
        message = f"The forecast has {plural(n_now, 'series', 'series')}, as many as {label}"
    else:
        way = "more" if n_now > n_prev else "fewer"
        message = (
            f"The forecast has {plural(n_now, 'series', 'series')}, {pct_text(abs(value))} % "
            f"{way} than the {n_prev:,} of {label}; if the change is not planned, look for "
            f"{'new' if way == 'more' else 'dropped'} series"
        )
    return judged(book, value=value, message=message, **common)


# --------------------------------------------------------------------------- entry point


def coverage_checks(
    forecast: pd.DataFrame,
    actuals: pd.DataFrame,
    *,
    keys: list[str],
    frequency: str,
    horizon: int,
    active_periods: int,
    book: Thresholds,
    known_series: pd.DataFrame | Sequence[pd.DataFrame] | None = None,
    previous: pd.DataFrame | None = None,
    previous_label: str | None = None,
    max_examples: int = 10,
) -> list[CheckResult]:
    """Run the coverage checks of the forecast being published against the actuals.

    Parameters
    ----------
    forecast, actuals
        Canonical frames (:mod:`accuracy_checks.sources.frames`); both carry the key columns
        ``keys``, ``period`` and ``segment``; the actuals also ``actual``.
    frequency
        The pandas offset alias of the period grid (``W-MON``, ``MS``).
    horizon
        Periods every series must have, from the cycle's first period.
    active_periods
        A series with a non-null actual in the last ``active_periods`` periods (those holding
        a non-null actual) is active and must be forecast.
    book
        Thresholds; judges ``missing_series_pct`` (%), ``unexpected_series``,
        ``incomplete_series`` (counts) and ``series_count_change_pct`` (%).
    known_series
        Optional table (or tables) of key columns (some or all of ``keys``) listing series
        that are expected without actuals in ``actuals`` (a product mapping, say, or the
        series of older actuals the run did not load).
    previous, previous_label
        The previous cycle's forecast and its label: adds ``coverage.series_count``.
    max_examples
        At most this many example series per result.

    Returns
    -------
    list of CheckResult
        Grouped by check (missing, unexpected, horizon, series count), each with segment
        ``"*"`` first and then the segments in name order.
    """
    keys = list(keys)
    max_examples = max(int(max_examples), 0)
    require_columns(forecast, [*keys, PERIOD], role="forecast", checks="coverage")
    require_columns(actuals, [*keys, PERIOD, ACTUAL], role="actuals", checks="coverage")
    series = identify_series(forecast, actuals, keys)
    activity = _activity(series, actuals, active_periods)
    segments = series.segments_to_report(series.in_forecast | activity.active)
    results = _missing_series(
        series, activity, segments, actuals, keys, active_periods, book, max_examples
    )
    results += _unexpected_series(
        series, segments, forecast, keys, known_series, book, max_examples
    )
    results += horizon_results(
        series, segments, forecast, keys, frequency, horizon, book, max_examples
    )
    if previous is not None:
        results.append(_series_count(series, previous, keys, previous_label, book))
    return results
