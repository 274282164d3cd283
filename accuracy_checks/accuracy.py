"""Accuracy results: every measure, per lag, per segment and for all series (segment ``"*"``).

Measures are pooled over a segment's rows (METRICS.md) from grouped sufficient statistics; the
``"*"`` figures merge the segments' statistics. A (lag, segment) with fewer than ``min_obs``
rows that have both a forecast and an actual is ``skipped`` with the reason.
"""

from __future__ import annotations

from collections.abc import Sequence

import numpy as np
import pandas as pd

from accuracy_checks import frames as F
from accuracy_checks.measures import error_stats, get_measure, total_stats
from accuracy_checks.outputs.wording import describe_value
from accuracy_checks.results import ALL_SERIES, CheckResult
from accuracy_checks.thresholds import ThresholdBook

CHECK = "accuracy"


def accuracy_results(frame: pd.DataFrame, *, keys: list[str], book: ThresholdBook,
                     measures: Sequence[str], lags: Sequence[int], min_obs: int,
                     window: Sequence[pd.Timestamp]) -> list[CheckResult]:
    """Judge every measure for every (lag, segment) of the evaluation frame."""
    span = _span(window)
    if len(frame) == 0:
        reason = (
            "no actuals yet" if not window
            else f"no earlier forecast targets the window {span}"
        )
        return [_no_data(ALL_SERIES, lag, m, book, reason) for lag in lags for m in measures]
    stats = _stats_with_all(frame, keys)
    values = {m: get_measure(m).from_stats(stats) for m in measures}
    out: list[CheckResult] = []
    for i, (lag, segment) in enumerate(stats.index):
        n = int(stats["n"].iat[i])
        n_series = int(stats["n_series"].iat[i])
        base_details = {
            "window": span,
            "n_dropped": int(stats["n_dropped"].iat[i]),
            "n_negative_actuals": int(stats["n_negative_y"].iat[i]),
        }
        for m in measures:
            measure = get_measure(m)
            row = values[m].iloc[i]
            extra = {k: _plain(v) for k, v in row.items() if k not in ("value", "reason")}
            details = {**base_details, **extra}
            common = dict(segment=str(segment), lag=int(lag), measure=m, unit=measure.unit,
                          n_obs=n, n_series=n_series, details=details)
            if n < min_obs:
                level = book.level(m, str(segment))
                out.append(CheckResult(
                    CHECK, "skipped", reason="too_few_rows",
                    warn=level.warn if level else None, fail=level.fail if level else None,
                    message=(f"{measure.label} not judged: only {n} forecast(s) with an actual "
                             f"at lag {lag} in {span} (min_obs is {min_obs})."),
                    **common))  # type: ignore[arg-type]
                continue
            value = float(row["value"])
            defined = np.isfinite(value)
            judged = book.judge(m, str(segment), value if defined else None)
            result = CheckResult(
                CHECK, judged.status, value=value if defined else None,
                warn=judged.warn, fail=judged.fail,
                reason=None if defined else (row["reason"] or "no_data"),
                **common)  # type: ignore[arg-type]
            out.append(_with_message(result, measure.label, span))
    # every segment seen gets a result at every lag, even where that lag has no rows
    segments = sorted(set(stats.index.get_level_values(F.SEGMENT)), key=str)
    have = set(stats.index)
    for lag in lags:
        for segment in segments:
            if (lag, segment) not in have:
                out += [_no_data(str(segment), lag, m, book,
                                 f"no earlier forecast at lag {lag} targets {span}")
                        for m in measures]
    return out


def _no_data(segment: str, lag: int, measure: str, book: ThresholdBook,
             reason: str) -> CheckResult:
    level = book.level(measure, segment)
    return CheckResult(CHECK, "skipped", segment=segment, lag=lag, measure=measure,
                       unit=book.unit(measure), reason="no_data", n_obs=0, n_series=0,
                       warn=level.warn if level else None, fail=level.fail if level else None,
                       message=f"{get_measure(measure).label} not measured: {reason}.")


def _stats_with_all(frame: pd.DataFrame, keys: list[str]) -> pd.DataFrame:
    """Statistics per (lag, segment), plus (lag, "*") when there is more than one segment."""
    by = [F.LAG, F.SEGMENT]
    stats = error_stats(frame, by)
    series = _series_counts(frame, keys, by)
    stats = stats.set_index(by) if not isinstance(stats.index, pd.MultiIndex) else stats
    stats["n_series"] = series.reindex(stats.index, fill_value=0)
    if set(frame[F.SEGMENT].unique()) != {ALL_SERIES}:
        total = total_stats(stats.reset_index(), [F.LAG])
        total = total.set_index(F.LAG) if F.LAG in total.columns else total
        all_series = _series_counts(frame, keys, [F.LAG])
        total["n_series"] = all_series.reindex(total.index, fill_value=0)
        total.index = pd.MultiIndex.from_arrays(
            [total.index, np.full(len(total), ALL_SERIES, dtype=object)], names=by
        )
        stats = pd.concat([stats, total[stats.columns]])
    return stats.sort_index()


def _series_counts(frame: pd.DataFrame, keys: list[str], by: list[str]) -> pd.Series:
    """Distinct series with at least one usable (forecast and actual present) row per group."""
    usable = frame.loc[frame[F.ACTUAL].notna() & frame[F.FORECAST].notna(), [*by, *keys]]
    return usable.drop_duplicates().groupby(by, observed=True, sort=True).size()


def _with_message(result: CheckResult, label: str, span: str) -> CheckResult:
    what = describe_value(result)
    lead = f"{label} {what}" if not what.startswith(("under", "over", "no bias")) else (
        f"{label}: {what}")
    basis = (f"over {result.n_obs:,} forecasts of {result.n_series:,} series at lag "
             f"{result.lag} ({span})")
    if result.value is None:
        if result.reason == "zero_actual" and result.details.get("mape_nonzero") is not None:
            nz = result.details["mape_nonzero"]
            text = (f"{label} is undefined: {result.details.get('n_zero_actual')} actual(s) are 0 "
                    f"{basis}; over the non-zero actuals it is {nz:.3g} %.")
        else:
            text = f"{label} is undefined ({result.reason}) {basis}."
    elif result.status in ("warn", "fail"):
        level = result.fail if result.status == "fail" else result.warn
        text = f"{lead} {basis}, beyond the {result.status} level {_bound(level)}."
    else:
        text = f"{lead} {basis}."
    return CheckResult(**{**result.__dict__, "message": text})


def _bound(bound: object) -> str:
    if isinstance(bound, tuple):
        return f"[{bound[0]:g}, {bound[1]:g}]"
    return f"{bound:g}" if isinstance(bound, float | int) else str(bound)


def _span(window: Sequence[pd.Timestamp]) -> str:
    if not window:
        return "no periods"
    first, last = window[0], window[-1]
    if first == last:
        return f"period {first:%Y-%m-%d}"
    return f"periods {first:%Y-%m-%d} to {last:%Y-%m-%d}"


def _plain(value: object) -> object:
    if isinstance(value, np.generic):
        value = value.item()
    if isinstance(value, float) and not np.isfinite(value):
        return None
    return value
