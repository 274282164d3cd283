"""Accuracy results: every measure, per lag, per segment and for all series (segment ``"*"``).

For each configured lag, every requested measure is computed per segment and for all series
together (``"*"``) from the evaluation rows of its window (:mod:`accuracy_checks.evaluation.join`),
through the one registry (:mod:`accuracy_checks.measures.registry`), then judged against the
thresholds (:func:`~accuracy_checks.checks.judge.judge_figure`). Core measures are pooled
from grouped sufficient statistics; the other families reduce the rows per group or per
series within a group (:class:`~accuracy_checks.measures.data.MeasureData`, prepared once for
all measures by :class:`~accuracy_checks.checks.accuracy_groups.EvaluationGroups`), all
vectorised.

Rules:

- a (lag, segment) with no usable row is ``skipped`` (``no_data``); with fewer than
  ``min_obs`` rows that have both a forecast and an actual it is ``skipped``
  (``too_few_rows``); a measure the config cannot feed (no quantiles, no costs, no actuals
  history) is ``skipped`` (``not_configured``);
- a measure may turn the configured levels into the bounds that judge one value (the
  tracking signal's √n-scaled limit, coverage's distance from the nominal level) and veto a
  breach that chance explains (coverage's binomial test);
- every breached (warn/fail) result lists its worst offenders as ``examples``: the series
  contributing most to the segment's absolute error, or to its bias for bias-type measures
  (:mod:`accuracy_checks.checks.offenders`);
- a plugin measure that raises gives its results the status ``error`` with the plugin's
  message; everything else still runs;
- a figure whose sums exceed the float64 range (an error or actual of absurd size, e.g. an
  earlier forecast of 1e308) has no value and the reason ``overflow``: it is judged beyond
  the worst level set (``fail`` when a fail level is set, else ``warn``; ``skipped`` without
  any level), never reported as missing data. Detected per group on the reduced statistics
  (:func:`~accuracy_checks.measures.stats.overflowed`: figures built on the point errors), or
  when a measure's value or detail is ±inf. Inputs that are themselves infinite never get
  here: the evaluation frame reads them as missing.
"""

from __future__ import annotations

import math
from collections.abc import Mapping, Sequence
from typing import Any

import numpy as np
import pandas as pd

from accuracy_checks.checks.accuracy_groups import EvaluationGroups
from accuracy_checks.checks.judge import ACCURACY, Figure, Thresholds, judge_figure, span_words
from accuracy_checks.checks.offenders import worst_offenders
from accuracy_checks.config import Config
from accuracy_checks.evaluation.baselines import (
    ActualsIndex,
)
from accuracy_checks.evaluation.join import evaluation_frame
from accuracy_checks.measures.data import (
    MeasureData,
    MeasureSettings,
)
from accuracy_checks.measures.plugins import rejected_plugins
from accuracy_checks.measures.registry import Measure, get_measure
from accuracy_checks.measures.selection import measure_settings, measures_to_report, unmet_needs
from accuracy_checks.measures.stats import overflowed
from accuracy_checks.measures.wording import format_number
from accuracy_checks.results import (
    ALL_SERIES,
    BREACHED,
    CheckResult,
    Reason,
    Status,
    json_value,
)
from accuracy_checks.sources import frames as F

CHECK = ACCURACY

#: columns of a measure's frame that are not details
NOT_DETAILS = frozenset({"value", "reason", "group", "variant", "n_obs", "unit"})


def accuracy_results(frame: pd.DataFrame, *, keys: list[str], book: Thresholds,
                     measures: Sequence[str], lags: Sequence[int], min_obs: int,
                     window: Sequence[pd.Timestamp],
                     settings: MeasureSettings | None = None,
                     history: ActualsIndex | None = None,
                     tracking: Sequence[pd.Timestamp] | None = None,
                     frequency: str | None = None,
                     offenders: int = 10) -> list[CheckResult]:
    """Judge every measure for every (lag, segment) of the evaluation frame.

    ``frame`` is :func:`~accuracy_checks.evaluation.join.evaluation_frame`'s frame (rows without
    the ``__in_window``/``__in_tracking`` flags count in both windows); ``history`` the
    actuals index it was joined with (needed by MASE, MSIS and FVA), ``frequency`` the period
    grid (needed with ``history``), ``tracking`` the tracking window's periods, ``offenders``
    the number of worst-offender series listed for each breached result.
    """
    settings = settings or MeasureSettings()
    span = span_words(window)
    defs = [get_measure(m) for m in measures]
    if len(frame) == 0:
        reason = (
            "no actuals yet" if not window
            else f"no earlier forecast targets the window {span}"
        )
        return [no_data_result(ALL_SERIES, lag, m.id, book, reason) for lag in lags for m in defs]
    job = EvaluationGroups(frame, keys, settings, history, frequency)
    # sums beyond the float64 range are found on the results and judged (judged_results), so numpy's
    # overflow warnings would only repeat it
    with np.errstate(over="ignore", invalid="ignore"):
        out = _measure_all(job, defs, window=window, tracking=tracking, book=book,
                           min_obs=min_obs, offenders=offenders, keys=keys)
    # every segment seen gets a result at every lag, even where that lag has no rows
    segments = job.segment_names + ([ALL_SERIES] if "all" in job.groupings else [])
    have = {(int(lag), str(seg)) for grouping in job.groupings for lag, seg in
            job.groups_of(grouping)[[F.LAG, F.SEGMENT]].itertuples(index=False)}
    for lag in lags:
        for segment in segments:
            if (lag, segment) not in have:
                out += [no_data_result(segment, lag, m.id, book,
                                       f"no earlier forecast at lag {lag} targets {span}")
                        for m in defs]
    return out


def _measure_all(job: EvaluationGroups, defs: list[Measure], *, window: Sequence[pd.Timestamp],
                 tracking: Sequence[pd.Timestamp] | None, book: Thresholds, min_obs: int,
                 offenders: int, keys: list[str]) -> list[CheckResult]:
    """Every measure of ``defs`` on every grouping of ``job``, judged."""
    out: list[CheckResult] = []
    for measure in defs:
        missing = unmet_needs(measure, job.settings, job.history)
        windows = {"evaluation": window, "tracking": tracking if tracking else window}
        measure_span = span_words(windows[measure.window])
        for grouping in job.groupings:
            data = job.data(measure.window, grouping)
            if missing:
                out += not_configured_results(measure, data, missing, book)
                continue
            try:
                values = _checked(measure, measure.evaluate(data), data)
            except Exception as exc:
                if measure.origin == "built-in":
                    raise
                out += _plugin_error(measure, data, exc)
                continue
            out += judged_results(measure, values, data, job, book, min_obs, measure_span,
                                  offenders, keys)
    return out


def _checked(measure: Measure, values: Any, data: MeasureData) -> pd.DataFrame:
    """The measure's frame with ``group`` and ``variant`` columns, or a ValueError saying
    what is wrong with it."""
    if not isinstance(values, pd.DataFrame):
        raise ValueError(f"it returned a {type(values).__name__}, not a DataFrame")
    if "value" not in values.columns:
        raise ValueError(f"its frame has no 'value' column (columns: {list(values.columns)})")
    if "group" not in values.columns:
        if len(values) != data.n_groups:
            raise ValueError(f"its frame has {len(values)} rows for {data.n_groups} groups")
    else:
        group = pd.to_numeric(values["group"], errors="coerce").to_numpy()
        if not np.all((group >= 0) & (group < data.n_groups)):
            raise ValueError(f"its 'group' column holds codes outside 0 … {data.n_groups - 1}")
    return values


# --------------------------------------------------------------------------- judging


def judged_results(measure: Measure, values: pd.DataFrame, data: MeasureData, job: EvaluationGroups,
                   book: Thresholds, min_obs: int, span: str, limit: int,
                   keys: list[str]) -> list[CheckResult]:
    """One judged result per (lag, segment) group of ``measure``: its ``values`` against
    ``book``'s levels (skipped below ``min_obs`` observations), with up to ``limit`` offenders
    named by ``keys``; ``span`` words the evaluation window. Used by both engines."""
    base_n, dropped, negative, series, lags, segments = job.facts(data)
    extras = [c for c in values.columns if c not in NOT_DETAILS]
    columns = {c: values[c].to_numpy() for c in values.columns}
    if "group" not in columns:  # one row per group, in group order
        columns["group"] = np.arange(len(values))
    records = [{c: a[i] for c, a in columns.items()} for i in range(len(values))]
    # the point errors' sums overflowed: every figure built on them is out of range too
    # (a quotient by an overflowed sum can even come out finite: x / inf = 0)
    point_errors = not measure.needs & {"quantiles", "intervals"}
    overflow = overflowed(data.stats) if point_errors else np.zeros(data.n_groups, dtype=bool)
    out: list[CheckResult] = []
    breached: dict[int, bool] = {}
    pending: list[tuple[int, CheckResult]] = []
    for rec in records:
        g = int(rec["group"])
        variant = rec.get("variant")
        variant = str(variant) if isinstance(variant, str) and variant else None
        value = _float(rec["value"])
        n_obs = int(rec["n_obs"]) if "n_obs" in rec and _float(rec["n_obs"]) is not None \
            else int(base_n[g])
        details: dict[str, Any] = {"window": span, "n_dropped": int(dropped[g]),
                                   "n_negative_actuals": int(negative[g])}
        if variant is not None:
            details["variant"] = variant
        details.update({c: json_value(rec[c]) for c in extras})
        reason = rec.get("reason")
        reason = reason if isinstance(reason, str) else None
        if reason is None and n_obs > 0 and (
                overflow[g] or _infinite(rec["value"])
                or any(_infinite(rec[c]) for c in extras)):
            value, reason = None, Reason.OVERFLOW
        figure = Figure(int(lags[g]), str(segments[g]), value, reason, n_obs, int(series[g]),
                        _unit(rec.get("unit"), measure), variant, details)
        result = judge_figure(measure, figure, book, min_obs=min_obs, span=span,
                              settings=data.settings)
        if result.status in BREACHED:
            breached[g] = measure.bias_type
            pending.append((g, result))
        else:
            out.append(result)
    if pending:
        found = worst_offenders(data, keys, breached, limit)
        for g, result in pending:
            examples = found.get(g, [])
            out.append(with_offenders(result, examples, measure.bias_type))
    return out


def with_offenders(result: CheckResult, examples: list[dict[str, Any]],
                   bias: bool) -> CheckResult:
    """``result`` with its top offenders (``examples``, largest first) in details and message;
    ``bias`` words them as over/under-forecasts. ``result`` itself when there are none."""
    if not examples:
        return result
    top = examples[0]
    share = top.get("share_of_bias_pct" if bias else "share_of_abs_error_pct")
    what = "bias" if bias else "absolute error"
    who = _who(top)
    if share is not None:
        text = f"{result.message} Worst series: {who} ({format_number(share)} % of the {what})."
    elif top.get("abs_error") is None:
        text = (f"{result.message} Worst series: {who} (its errors exceed the floating-point "
                "range).")
    else:
        text = f"{result.message} Worst series: {who}."
    return CheckResult(**{**result.__dict__, "examples": examples, "message": text})


def _who(example: Mapping[str, Any]) -> str:
    skip = {"lag", "segment", "n_obs", "error", "abs_error", "share_of_abs_error_pct",
            "share_of_bias_pct"}
    return ", ".join(f"{k}={v}" for k, v in example.items() if k not in skip)


def not_configured_results(measure: Measure, data: MeasureData, missing: list[str],
                           book: Thresholds) -> list[CheckResult]:
    """One skipped result (reason not configured) per group of ``data``: ``measure`` needs the
    inputs ``missing``; levels from ``book``."""
    need = measure.needs_words(missing)
    out = []
    for g in range(data.n_groups):
        lag, segment = int(data.groups[F.LAG].iat[g]), str(data.groups[F.SEGMENT].iat[g])
        level = book.level(measure.id, segment)
        out.append(CheckResult(
            CHECK, "skipped", segment=segment, lag=lag, measure=measure.id,
            unit=measure.unit or None, reason=Reason.NOT_CONFIGURED, n_obs=0, n_series=0,
            warn=level.warn if level else None, fail=level.fail if level else None,
            message=f"{measure.label} not measured: it needs {need}."))
    return out


def _plugin_error(measure: Measure, data: MeasureData, exc: Exception) -> list[CheckResult]:
    text = (f"{measure.label} could not be computed: the {measure.origin} raised "
            f"{type(exc).__name__}: {exc}")
    return [CheckResult(CHECK, "error", segment=str(data.groups[F.SEGMENT].iat[g]),
                        lag=int(data.groups[F.LAG].iat[g]), measure=measure.id,
                        unit=measure.unit or None, message=text,
                        details={"origin": measure.origin, "error": type(exc).__name__})
            for g in range(data.n_groups)]


def no_data_result(segment: str, lag: int, measure: str, book: Thresholds,
                   reason: str) -> CheckResult:
    """A skipped result (reason no data) for ``measure`` at ``segment``/``lag``, ``reason``
    ending its message; levels and unit from ``book``."""
    level = book.level(measure, segment)
    return CheckResult(CHECK, "skipped", segment=segment, lag=lag, measure=measure,
                       unit=book.unit(measure) or None, reason=Reason.NO_DATA, n_obs=0, n_series=0,
                       warn=level.warn if level else None, fail=level.fail if level else None,
                       message=f"{get_measure(measure).label} not measured: {reason}.")


def _unit(given: object, measure: Measure) -> str | None:
    """The result's unit: the measure frame's own (a currency), else the measure's; ``""`` (a
    unitless ratio) is reported as no unit."""
    text = given if isinstance(given, str) and given else measure.unit
    return text or None


def _infinite(value: object) -> bool:
    """Whether ``value`` is a float ±inf (a number beyond the float64 range)."""
    return isinstance(value, float | np.floating) and bool(np.isinf(value))


def _float(value: object) -> float | None:
    if value is None:
        return None
    try:
        number = float(value)  # type: ignore[arg-type]
    except (TypeError, ValueError):
        return None
    return number if math.isfinite(number) else None


# --------------------------------------------------------------------------- a run


def run_accuracy(config: Config, earlier: pd.DataFrame, actuals: pd.DataFrame, *,
                 book: Thresholds, history: ActualsIndex | None = None) -> list[CheckResult]:
    """The accuracy results of a run: evaluation frame → measures → judged results, plus a
    warning for each rejected measure plugin. ``history``: every actual by (series, period)
    when ``actuals`` holds only the recent periods (``Inputs.history``)."""
    keys = list(config.forecast.keys)
    measures = measures_to_report(config)
    tracking = any(get_measure(m).window == "tracking" for m in measures)
    ev = evaluation_frame(earlier, actuals, keys=keys, frequency=config.frequency,
                          lags=config.evaluation.lags, window=config.evaluation.window,
                          tracking_window=config.evaluation.tracking_window if tracking else 0,
                          history=history)
    out = accuracy_results(ev.frame, keys=keys, book=book, measures=measures,
                           lags=config.evaluation.lags, min_obs=config.evaluation.min_obs,
                           window=ev.window, settings=measure_settings(config),
                           history=ev.history, tracking=ev.tracking,
                           frequency=config.frequency, offenders=config.evaluation.offenders)
    if ev.cycles:
        out = [CheckResult(**{**r.__dict__, "details": {**r.details, "cycles": ev.cycles}})
               if r.segment == ALL_SERIES else r for r in out]
    out += [CheckResult(f"{CHECK}.plugins", Status.WARN, message=p.message, details=p.details)
            for p in rejected_plugins()]
    return out
