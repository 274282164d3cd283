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
    The cycle's first period is the earliest forecast period (of any series). Every series
    must have one row at each grid step 0 … horizon−1 from it. A series is incomplete when a
    step has no row (gap), a row lies beyond the last step (extra), or a period is off the
    grid (or missing). value = number of incomplete series.
``coverage.series_count`` (measure ``series_count_change_pct``, unit ``%``; only when the
previous cycle's forecast is given)
    value = 100 · (n_now − n_previous) / n_previous distinct series, segment ``"*"``.

Each value is judged by the :class:`~accuracy_checks.checks.judge.ThresholdBook` (a level is
broken when the value is strictly beyond it). A segment without any forecast series gets
``skipped`` (``no_data``) for the checks about forecast series.

Cost: series are identified once (the key columns of forecast and actuals factorised jointly
into one dense series id per row); every count is a ``np.bincount`` over those ids; the grid
is computed once (:func:`~accuracy_checks.evaluation.grid.grid_positions`). Only the ≤
``max_examples`` example series per result are turned into Python objects.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass
from typing import Any

import numpy as np
import pandas as pd

from accuracy_checks.checks.judge import ThresholdBook
from accuracy_checks.checks.output import (
    all_of,
    json_value,
    plural,
    row_examples,
    verb,
)
from accuracy_checks.errors import InputError
from accuracy_checks.evaluation.grid import grid_dates, grid_positions
from accuracy_checks.results import ALL_SERIES, CheckResult
from accuracy_checks.sources.codes import combine_codes, combined_codes
from accuracy_checks.sources.frames import ACTUAL, PERIOD, SEGMENT, UNASSIGNED

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
HORIZON = "coverage.horizon"
SERIES_COUNT = "coverage.series_count"
#: The coverage checks, in the order :func:`coverage_checks` returns them.
COVERAGE_CHECKS: tuple[str, ...] = (MISSING_SERIES, UNEXPECTED_SERIES, HORIZON, SERIES_COUNT)

_M_MISSING = "missing_series_pct"
_M_UNEXPECTED = "unexpected_series"
_M_INCOMPLETE = "incomplete_series"
_M_COUNT = "series_count_change_pct"
# dates listed per problem in a horizon example before "(+n more)"
_DATES_SHOWN = 4


def pct_text(value: float) -> str:
    """A percentage for a sentence: 3 significant digits, no exponent, no ``-0``.

    >>> pct_text(0.5), pct_text(33.3333), pct_text(100.0), pct_text(0.0004167), pct_text(0.0)
    ('0.5', '33.3', '100', '0.000417', '0')
    """
    if value == 0 or not np.isfinite(value):
        return "0" if value == 0 else str(value)
    digits = max(0, 2 - int(np.floor(np.log10(abs(value)))))
    text = f"{round(value, digits):.{digits}f}"
    text = text.rstrip("0").rstrip(".") if "." in text else text
    return "0" if text in ("-0", "") else text


@dataclass(frozen=True)
class _Series:
    """Series of forecast ∪ actuals: one dense id per row of each frame."""

    n: int
    f_ids: np.ndarray
    a_ids: np.ndarray
    in_forecast: np.ndarray
    in_actuals: np.ndarray
    #: segment code of each series, into ``segment_names``
    segment: np.ndarray
    segment_names: list[str]

    def segments_to_report(self, relevant: np.ndarray) -> list[tuple[str, np.ndarray | None]]:
        """``("*", None)`` then (name, series mask) for each segment other than ``"*"`` that
        holds a ``relevant`` series (forecast or active)."""
        out: list[tuple[str, np.ndarray | None]] = [(ALL_SERIES, None)]
        used = np.unique(self.segment[relevant])
        names = sorted(
            (self.segment_names[c], int(c)) for c in used if self.segment_names[c] != ALL_SERIES
        )
        out += [(name, self.segment == code) for name, code in names]
        return out


def _identify(forecast: pd.DataFrame, actuals: pd.DataFrame, keys: list[str]) -> _Series:
    n_f, n_a = len(forecast), len(actuals)
    arrays = [pd.concat([forecast[k], actuals[k]], ignore_index=True).array for k in keys]
    ids, uniques = pd.factorize(combine_codes(arrays, n_f + n_a))
    n = len(uniques)
    f_ids, a_ids = ids[:n_f], ids[n_f:]
    in_forecast = np.bincount(f_ids, minlength=n) > 0
    in_actuals = np.bincount(a_ids, minlength=n) > 0
    f_seg, f_names = _segment_codes(forecast)
    a_seg, a_names = _segment_codes(actuals)
    names = list(dict.fromkeys([*f_names, *a_names]))
    position = {name: i for i, name in enumerate(names)}
    segment = np.zeros(n, dtype=np.int64)
    segment[a_ids] = np.array([position[x] for x in a_names], dtype=np.int64)[a_seg]
    # the forecast's segment wins
    segment[f_ids] = np.array([position[x] for x in f_names], dtype=np.int64)[f_seg]
    return _Series(
        n=n,
        f_ids=f_ids,
        a_ids=a_ids,
        in_forecast=in_forecast,
        in_actuals=in_actuals,
        segment=segment,
        segment_names=names,
    )


def _segment_codes(frame: pd.DataFrame) -> tuple[np.ndarray, list[str]]:
    """Segment code per row and the segment names (missing → ``"unassigned"``)."""
    if SEGMENT not in frame.columns:
        return np.zeros(len(frame), dtype=np.int64), [ALL_SERIES]
    codes, uniques = pd.factorize(frame[SEGMENT].array)  # missing → -1
    names = [str(u) for u in uniques]
    if (codes < 0).any():
        codes = np.where(codes < 0, len(names), codes)
        names.append(UNASSIGNED)
    return codes, names


def _first_rows(ids: np.ndarray, wanted: np.ndarray) -> np.ndarray:
    """Position of the first row of each series in ``wanted`` (``ids`` = series id per row;
    every wanted series has a row). Vectorised: a gather and a ``minimum.at`` over rows.

    >>> _first_rows(np.array([2, 0, 2, 1, 0]), np.array([0, 2]))
    array([1, 0])
    """
    if len(wanted) == 0:
        return np.zeros(0, dtype=np.int64)
    n = max(int(ids.max(initial=-1)), int(wanted.max())) + 1
    selected = np.zeros(n, dtype=bool)
    selected[wanted] = True
    positions = np.flatnonzero(selected[ids])
    first = np.full(n, np.iinfo(np.int64).max, dtype=np.int64)
    np.minimum.at(first, ids[positions], positions)
    return first[wanted]


def _series_examples(
    frame: pd.DataFrame,
    ids: np.ndarray,
    wanted: np.ndarray,
    keys: list[str],
    series: _Series,
) -> list[dict[str, Any]]:
    """Key values of the series ``wanted`` (one dict each), with their segment."""
    examples = row_examples(frame, _first_rows(ids, wanted), keys)
    names = np.asarray(series.segment_names, dtype=object)[series.segment[wanted]]
    for example, seg in zip(examples, names, strict=True):
        example[SEGMENT] = str(seg)
    return examples


def _in_segment(seg_mask: np.ndarray | None, segment: str) -> str:
    return "" if seg_mask is None else f" in segment {segment}"


def _judged(
    book: ThresholdBook,
    *,
    check: str,
    measure: str,
    segment: str,
    value: float | None,
    unit: str,
    **fields: Any,
) -> CheckResult:
    judgement = book.judge(measure, segment, value)
    return CheckResult(
        check=check,
        status=judgement.status,
        segment=segment,
        measure=measure,
        value=value,
        warn=judgement.warn,
        fail=judgement.fail,
        unit=unit,
        **fields,
    )


def _skipped(check: str, measure: str, segment: str, unit: str, message: str) -> CheckResult:
    return CheckResult(
        check=check,
        status="skipped",
        segment=segment,
        measure=measure,
        unit=unit,
        reason="no_data",
        message=message,
    )


# --------------------------------------------------------------------------- missing series


@dataclass(frozen=True)
class _Activity:
    """Which series are active: a non-null actual in the recent window."""

    active: np.ndarray  # per series
    volume: np.ndarray  # per series: sum of actuals in the window
    window_start: np.datetime64 | None


def _activity(series: _Series, actuals: pd.DataFrame, active_periods: int) -> _Activity:
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


def _missing_series(
    series: _Series,
    activity: _Activity,
    segments: list[tuple[str, np.ndarray | None]],
    actuals: pd.DataFrame,
    keys: list[str],
    active_periods: int,
    book: ThresholdBook,
    max_examples: int,
) -> list[CheckResult]:
    active, volume = activity.active, activity.volume
    missing = active & ~series.in_forecast
    details_base: dict[str, Any] = {
        "active_periods": active_periods,
        "window_start": json_value(activity.window_start),
    }
    out = []
    for segment, seg_mask in segments:
        act = active if seg_mask is None else active & seg_mask
        miss = missing if seg_mask is None else missing & seg_mask
        n_active, n_missing = int(act.sum()), int(miss.sum())
        where = _in_segment(seg_mask, segment)
        if n_active == 0:
            out.append(
                _skipped(
                    MISSING_SERIES,
                    _M_MISSING,
                    segment,
                    "%",
                    f"No series{where} has an actual in the last {active_periods} periods, so "
                    "no series is expected in the forecast",
                )
            )
            continue
        value = 100.0 * n_missing / n_active
        examples: list[dict[str, Any]] = []
        if n_missing:
            ids = np.flatnonzero(miss)
            order = np.argsort(-volume[ids], kind="stable")[:max_examples]
            shown = ids[order]
            examples = _series_examples(
                actuals,
                series.a_ids,
                shown,
                keys,
                series,
            )
            for example, vol in zip(examples, volume[shown], strict=True):
                example["recent_actuals"] = json_value(vol)
            message = (
                f"{n_missing:,} of {plural(n_active, 'active series', 'active series')}{where} "
                f"({pct_text(value)} %) {verb(n_missing, 'has', 'have')} no forecast; add "
                "them to the forecast job or end them in the actuals"
            )
        else:
            message = (
                f"{all_of(n_active, 'active series')}{where} {verb(n_active, 'has', 'have')} a "
                "forecast"
            )
        out.append(
            _judged(
                book,
                check=MISSING_SERIES,
                measure=_M_MISSING,
                segment=segment,
                value=value,
                unit="%",
                n_series=n_missing,
                message=message,
                examples=examples,
                details={"active": n_active, "missing": n_missing, **details_base},
            )
        )
    return out


# --------------------------------------------------------------------------- unexpected series


def _known_by_table(
    series: _Series,
    forecast: pd.DataFrame,
    keys: list[str],
    known_series: pd.DataFrame,
) -> np.ndarray:
    """Per series: whether its values in the table's key columns match a row of the table."""
    columns = [k for k in keys if k in known_series.columns]
    if not columns:
        raise InputError(
            f"The table of known series has none of the key columns {keys} (it has "
            f"{list(known_series.columns)}), so forecast series cannot be matched to it.",
            columns=list(known_series.columns),
        )
    ids = np.flatnonzero(series.in_forecast)
    rows = forecast.iloc[_first_rows(series.f_ids, ids)]
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


def _unexpected_series(
    series: _Series,
    segments: list[tuple[str, np.ndarray | None]],
    forecast: pd.DataFrame,
    keys: list[str],
    known_series: pd.DataFrame | Sequence[pd.DataFrame] | None,
    book: ThresholdBook,
    max_examples: int,
) -> list[CheckResult]:
    known = series.in_actuals.copy()
    tables = ([] if known_series is None else [known_series]
              if isinstance(known_series, pd.DataFrame) else list(known_series))
    for table in tables:
        known |= _known_by_table(series, forecast, keys, table)
    known_series = tables[0] if tables else None
    unexpected = series.in_forecast & ~known
    rows = np.bincount(series.f_ids, minlength=series.n)
    source = "the actuals" + (" and the table of known series" if known_series is not None else "")
    out = []
    for segment, seg_mask in segments:
        fc = series.in_forecast if seg_mask is None else series.in_forecast & seg_mask
        bad = unexpected if seg_mask is None else unexpected & seg_mask
        n_fc, n_bad = int(fc.sum()), int(bad.sum())
        where = _in_segment(seg_mask, segment)
        if n_fc == 0:
            out.append(
                _skipped(
                    UNEXPECTED_SERIES,
                    _M_UNEXPECTED,
                    segment,
                    "count",
                    f"The forecast has no series{where}",
                )
            )
            continue
        examples: list[dict[str, Any]] = []
        if n_bad:
            shown = np.flatnonzero(bad)[:max_examples]
            examples = _series_examples(
                forecast,
                series.f_ids,
                shown,
                keys,
                series,
            )
            for example, n in zip(examples, rows[shown], strict=True):
                example["rows"] = int(n)
            message = (
                f"{n_bad:,} of {plural(n_fc, 'forecast series', 'forecast series')}{where} "
                f"{verb(n_bad, 'is', 'are')} unknown to {source}; check their keys for "
                "typos or add them to the mapping of series"
            )
        else:
            message = (
                f"{all_of(n_fc, 'forecast series')}{where} {verb(n_fc, 'is', 'are')} known "
                f"to {source}"
            )
        out.append(
            _judged(
                book,
                check=UNEXPECTED_SERIES,
                measure=_M_UNEXPECTED,
                segment=segment,
                value=n_bad,
                unit="count",
                n_series=n_bad,
                message=message,
                examples=examples,
                details={"forecast_series": n_fc},
            )
        )
    return out


# --------------------------------------------------------------------------- horizon


@dataclass(frozen=True)
class _Steps:
    """Per series counts of the horizon check."""

    first: pd.Timestamp | None
    step_dates: pd.DatetimeIndex
    present: np.ndarray  # (n_series, horizon) bool: a row on the grid at that step
    extra: np.ndarray  # rows beyond the horizon
    off_grid: np.ndarray  # rows off the grid or without a period
    row_pos: np.ndarray  # grid position of each forecast row (undated rows: -1)
    row_on: np.ndarray
    row_dated: np.ndarray
    base: int


def _steps(series: _Series, forecast: pd.DataFrame, frequency: str, horizon: int) -> _Steps:
    periods = pd.DatetimeIndex(forecast[PERIOD])
    dated = ~np.asarray(periods.isna())
    pos = np.full(len(forecast), -1, dtype=np.int64)
    on = np.zeros(len(forecast), dtype=bool)
    present = np.zeros((series.n, horizon), dtype=bool)
    if not dated.any():
        return _Steps(
            None,
            pd.DatetimeIndex([]),
            present,
            np.zeros(series.n, dtype=np.int64),
            np.bincount(series.f_ids, minlength=series.n),
            pos,
            on,
            dated,
            0,
        )
    pos[dated], on[dated] = grid_positions(periods[dated], frequency)
    first_row = int(np.flatnonzero(dated)[np.argmin(periods[dated].asi8)])
    first = periods[first_row]
    base = int(pos[first_row])
    step = pos - base
    inside = on & dated & (step < horizon)
    flat = present.reshape(-1)
    flat[series.f_ids[inside] * horizon + step[inside]] = True
    extra = np.bincount(series.f_ids[on & dated & (step >= horizon)], minlength=series.n)
    off_grid = np.bincount(series.f_ids[~(on & dated)], minlength=series.n)
    return _Steps(
        first,
        grid_dates(first, horizon, frequency),
        present,
        extra,
        off_grid,
        pos,
        on,
        dated,
        base,
    )


def _dates_text(label: str, dates: Sequence[Any]) -> str:
    shown = ", ".join(
        str(json_value(d)) if d is not None else "no date" for d in dates[:_DATES_SHOWN]
    )
    more = f" (+{len(dates) - _DATES_SHOWN} more)" if len(dates) > _DATES_SHOWN else ""
    return f"{label} {shown}{more}"


def _horizon_details(
    steps: _Steps, forecast: pd.DataFrame, series: _Series, ids: np.ndarray, horizon: int
) -> list[str]:
    """What is wrong with each series in ``ids`` (a handful), with exact dates."""
    if len(ids) == 0:
        return []
    rows = np.flatnonzero(np.isin(series.f_ids, ids))
    periods = pd.DatetimeIndex(forecast[PERIOD])[rows]
    undated = np.asarray(periods.isna())
    row_ids = series.f_ids[rows]
    step = steps.row_pos[rows] - steps.base
    beyond = steps.row_on[rows] & steps.row_dated[rows] & (step >= horizon)
    off = ~(steps.row_on[rows] & steps.row_dated[rows])
    texts = []
    for sid in ids.tolist():
        parts = []
        gaps = np.flatnonzero(~steps.present[sid])
        if len(gaps):
            parts.append(_dates_text("missing", list(steps.step_dates[gaps])))
        mine = row_ids == sid
        if (beyond & mine).any():
            parts.append(_dates_text("beyond the horizon", sorted(set(periods[beyond & mine]))))
        if (off & mine).any():
            listed: list[Any] = sorted(set(periods[off & mine & ~undated]))
            if (undated & mine).any():
                listed.append(None)
            parts.append(_dates_text("off-grid", listed))
        texts.append("; ".join(parts))
    return texts


def _horizon(
    series: _Series,
    segments: list[tuple[str, np.ndarray | None]],
    forecast: pd.DataFrame,
    keys: list[str],
    frequency: str,
    horizon: int,
    book: ThresholdBook,
    max_examples: int,
) -> list[CheckResult]:
    steps = _steps(series, forecast, frequency, horizon)
    gaps = series.in_forecast & ~steps.present.all(axis=1)
    n_gap_steps = (horizon - steps.present.sum(axis=1)) * series.in_forecast
    incomplete = gaps | (steps.extra > 0) | (steps.off_grid > 0)
    first = json_value(steps.first) if steps.first is not None else None
    grid = f"{plural(horizon, 'period')} from {first} on the {frequency} grid"
    out = []
    for segment, seg_mask in segments:
        fc = series.in_forecast if seg_mask is None else series.in_forecast & seg_mask
        bad = incomplete if seg_mask is None else incomplete & seg_mask
        n_fc, n_bad = int(fc.sum()), int(bad.sum())
        where = _in_segment(seg_mask, segment)
        if n_fc == 0:
            out.append(
                _skipped(
                    HORIZON, _M_INCOMPLETE, segment, "count", f"The forecast has no series{where}"
                )
            )
            continue
        in_seg = fc
        n_gaps = int((gaps & in_seg).sum())
        n_extra = int(((steps.extra > 0) & in_seg).sum())
        n_off = int(((steps.off_grid > 0) & in_seg).sum())
        rows_beyond = int(steps.extra[in_seg].sum())
        off_grid_rows = int(steps.off_grid[in_seg].sum())
        details: dict[str, Any] = {
            "first_period": first,
            "horizon": horizon,
            "frequency": frequency,
            "series": n_fc,
            "with_gaps": n_gaps,
            "with_rows_beyond": n_extra,
            "with_off_grid_rows": n_off,
            "missing_steps": int(n_gap_steps[in_seg].sum()),
            "rows_beyond": rows_beyond,
            "off_grid_rows": off_grid_rows,
        }
        examples: list[dict[str, Any]] = []
        if n_bad:
            shown = np.flatnonzero(bad)[:max_examples]
            examples = _series_examples(
                forecast,
                series.f_ids,
                shown,
                keys,
                series,
            )
            texts = _horizon_details(steps, forecast, series, shown, horizon)
            for example, text in zip(examples, texts, strict=True):
                example["problem"] = text
            kinds = ", ".join(
                f"{n:,} {what}"
                for n, what in (
                    (n_gaps, "with gaps"),
                    (n_extra, "with rows beyond the horizon"),
                    (n_off, "with off-grid dates"),
                )
                if n
            )
            message = (
                f"{n_bad:,} of {plural(n_fc, 'forecast series', 'forecast series')}{where} "
                f"{verb(n_bad, 'does', 'do')} not have exactly {grid} ({kinds}); every "
                "series needs one row per period of the horizon"
            )
        else:
            message = (
                f"{all_of(n_fc, 'forecast series')}{where} {verb(n_fc, 'has', 'have')} "
                f"exactly {grid}"
            )
        out.append(
            _judged(
                book,
                check=HORIZON,
                measure=_M_INCOMPLETE,
                segment=segment,
                value=n_bad,
                unit="count",
                n_series=n_bad,
                n_obs=rows_beyond + off_grid_rows,
                message=message,
                examples=examples,
                details=details,
            )
        )
    return out


# --------------------------------------------------------------------------- series count


def _series_count(
    series: _Series,
    previous: pd.DataFrame,
    keys: list[str],
    previous_label: str | None,
    book: ThresholdBook,
) -> CheckResult:
    missing = [k for k in keys if k not in previous.columns]
    if missing:
        raise InputError(
            f"The previous cycle's forecast lacks the key column(s) {missing}.", missing=missing
        )
    n_now = int(series.in_forecast.sum())
    n_prev = int(np.unique(combined_codes(previous, keys)).size) if len(previous) else 0
    label = previous_label or "the previous cycle"
    details = {"previous_cycle": previous_label, "now": n_now, "previous": n_prev}
    if n_prev == 0:
        result = _judged(
            book,
            check=SERIES_COUNT,
            measure=_M_COUNT,
            segment=ALL_SERIES,
            value=None,
            unit="%",
            n_series=n_now,
            reason="no_data",
            details=details,
            message=f"The forecast of {label} has no series, so the change in the number of "
            "series is undefined",
        )
        return result
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
    return _judged(
        book,
        check=SERIES_COUNT,
        measure=_M_COUNT,
        segment=ALL_SERIES,
        value=value,
        unit="%",
        n_series=n_now,
        message=message,
        details=details,
    )


# --------------------------------------------------------------------------- entry point


def coverage_checks(
    forecast: pd.DataFrame,
    actuals: pd.DataFrame,
    *,
    keys: list[str],
    frequency: str,
    horizon: int,
    active_periods: int,
    book: ThresholdBook,
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
    for role, frame, needed in (
        ("forecast", forecast, [*keys, PERIOD]),
        ("actuals", actuals, [*keys, PERIOD, ACTUAL]),
    ):
        missing = [c for c in needed if c not in frame.columns]
        if missing:
            raise InputError(
                f"The {role} frame lacks the column(s) {missing} that the coverage checks "
                f"need (it has {list(frame.columns)}).",
                missing=missing,
            )
    series = _identify(forecast, actuals, keys)
    activity = _activity(series, actuals, active_periods)
    segments = series.segments_to_report(series.in_forecast | activity.active)
    results = _missing_series(
        series, activity, segments, actuals, keys, active_periods, book, max_examples
    )
    results += _unexpected_series(
        series, segments, forecast, keys, known_series, book, max_examples
    )
    results += _horizon(series, segments, forecast, keys, frequency, horizon, book, max_examples)
    if previous is not None:
        results.append(_series_count(series, previous, keys, previous_label, book))
    return results
