"""Human wording of results, shared by every output (console, JUnit, Markdown).

Contract:

- Numbers and a measure's value read as :mod:`accuracy_checks.measures.wording` words them
  (3 significant digits, never ``-0``, ``nan`` or ``inf``; bias-type measures with the sign
  convention ``e = actual − forecast``: positive = **under-forecast**, as the measure's
  registry entry says). Percentages are always in percent (``23.4 %``).
- An undefined value (``None``, NaN, inf) reads ``undefined (<reason>)``; a figure whose sums
  exceeded the float64 range (reason ``overflow``) reads ``beyond the floating-point range``.

The direction of a measure (which way is better) decides how a single-number threshold is
worded: centred measures (ideal 0) are bounded on ``|value|`` ("beyond ±5 %"), all others are
lower-is-better ("> 25 %"), and higher-is-better measures read "< 10". The direction comes
from ``details["direction"]`` when a result states it, else from the measure registry.
"""

from __future__ import annotations

import datetime as _dt
import math
from collections.abc import Iterable, Mapping, Sequence
from dataclasses import dataclass
from typing import Any

from accuracy_checks.measures.registry import MEASURES
from accuracy_checks.measures.wording import (
    format_level,
    format_number,
    measure_unit,
    unit_suffix,
    value_words,
)
from accuracy_checks.results import (
    DISPLAY_ORDER,
    NEEDS_ATTENTION,
    CheckResult,
    RunReport,
    Status,
    sort_for_display,
)

__all__ = [
    "Listing",
    "count_summary",
    "describe_threshold",
    "describe_value",
    "family",
    "format_example",
    "format_example_value",
    "format_number",
    "headline",
    "listing",
    "result_label",
    "status_word",
    "threshold_parts",
    "unit_of",
    "unit_suffix",
]

# (status, word when the count is 1, word otherwise), in headline order.
_COUNT_WORDS: tuple[tuple[str, str, str], ...] = (
    ("fail", "failed", "failed"),
    ("error", "error", "errors"),
    ("warn", "warning", "warnings"),
    ("pass", "passed", "passed"),
    ("skipped", "skipped", "skipped"),
    ("waived", "waived", "waived"),
)


def unit_of(result: CheckResult) -> str | None:
    """The unit of a result: its own ``unit``, else the registered or usual unit of its measure.

    >>> unit_of(CheckResult(check="accuracy", status="pass", measure="wape"))
    '%'
    >>> unit_of(CheckResult(check="accuracy", status="pass", measure="mase")) is None
    True
    """
    return measure_unit(result.measure, result.unit)


def _direction(result: CheckResult) -> str:
    """``centred``, ``higher`` or ``lower`` (which way the measure is better).

    From ``details["direction"]`` when a result states it, else the measure registry, else
    lower-is-better (errors and counts).
    """
    stated = result.details.get("direction") if isinstance(result.details, dict) else None
    if stated is None and result.measure in MEASURES:
        stated = MEASURES[result.measure].direction
    if stated in ("centred", "centered"):
        return "centred"
    if stated in ("higher", "lower"):
        return str(stated)
    return "lower"


def describe_value(result: CheckResult) -> str:
    """The value of a result in words.

    Bias-type measures follow ``e = actual − forecast`` (positive = under-forecast):

    >>> describe_value(CheckResult("accuracy", "fail", measure="bias_pct", value=17.94, unit="%"))
    'under-forecast by 17.9 %'
    >>> describe_value(CheckResult("accuracy", "pass", measure="bias_pct", value=-4.2, unit="%"))
    'over-forecast by 4.2 %'
    >>> describe_value(CheckResult("accuracy", "pass", measure="bias_pct", value=0.0, unit="%"))
    'no bias'
    >>> describe_value(CheckResult("accuracy", "warn", measure="me", value=12.5, unit="units"))
    'under-forecast by 12.5 units on average'
    >>> describe_value(CheckResult("accuracy", "pass", measure="wape", value=23.44, unit="%"))
    '23.4 %'
    >>> describe_value(CheckResult("coverage.missing_series", "fail", value=3.0, unit="count"))
    '3'
    >>> describe_value(
    ...     CheckResult("accuracy", "skipped", measure="mape", value=None, reason="zero_actual")
    ... )
    'undefined (zero_actual)'
    >>> describe_value(CheckResult("accuracy", "fail", measure="rmse", reason="overflow"))
    'beyond the floating-point range'
    """
    return value_words(result.value, measure=result.measure, unit=result.unit,
                       reason=result.reason)


def _describe_bound(bound: Any, direction: str, suffix: str) -> str:
    if isinstance(bound, Sequence) and not isinstance(bound, str) and len(bound) == 2:
        low, high = (format_level(b) for b in bound)
        return f"outside [{low}, {high}]{suffix}"
    number = float(bound)
    if direction == "centred":
        return f"beyond ±{format_level(abs(number))}{suffix}"
    sign = "<" if direction == "higher" else ">"
    return f"{sign} {format_level(number)}{suffix}"


def describe_threshold(result: CheckResult) -> str:
    """The thresholds a result was judged against, in words.

    A threshold is exceeded when the value is strictly beyond it (docs/checks.md).

    >>> describe_threshold(CheckResult("accuracy", "pass", measure="wape", warn=25, fail=40))
    'warn > 25 %, fail > 40 %'
    >>> describe_threshold(CheckResult("accuracy", "pass", measure="bias_pct", warn=5.0))
    'warn beyond ±5 %'
    >>> describe_threshold(CheckResult("accuracy", "pass", measure="me", fail=(-10.0, 20.0)))
    'fail outside [-10, 20] units'
    >>> describe_threshold(CheckResult("coverage.missing_series", "pass", unit="count", warn=0))
    'warn > 0'
    >>> describe_threshold(CheckResult("accuracy", "pass", measure="wape"))
    'no threshold'
    """
    parts = threshold_parts(result)
    return ", ".join(parts) if parts else "no threshold"


def threshold_parts(result: CheckResult) -> list[str]:
    """Each threshold level of ``result`` in words (``[]`` when it has none).

    >>> threshold_parts(CheckResult("accuracy", "pass", measure="bias_pct", fail=(-10, 20)))
    ['fail outside [-10, 20] %']
    """
    suffix = unit_suffix(unit_of(result))
    direction = _direction(result)
    return [
        f"{level} {_describe_bound(bound, direction, suffix)}"
        for level, bound in (("warn", result.warn), ("fail", result.fail))
        if bound is not None
    ]


def status_word(status: str) -> str:
    """The status as an upper-case word (outputs never rely on colour alone).

    >>> status_word("warn")
    'WARN'
    """
    return status.upper()


def family(check: str) -> str:
    """The check family: the part of ``check`` before the first dot.

    >>> family("coverage.horizon")
    'coverage'
    >>> family("accuracy")
    'accuracy'
    """
    return check.split(".", 1)[0]


def result_label(result: CheckResult, *, within_family: bool = False) -> str:
    """A readable identifier of a result, e.g. ``wape[segment=tools, lag=1]``.

    Accuracy results are named by their measure; other checks by their check name (without
    the family when ``within_family``), with the measure, segment and lag in brackets.

    >>> result_label(CheckResult("accuracy", "pass", segment="tools", lag=1, measure="wape"))
    'wape[segment=tools, lag=1]'
    >>> result_label(CheckResult("coverage.horizon", "fail", segment="*"))
    'coverage.horizon[segment=*]'
    >>> result_label(CheckResult("coverage.horizon", "fail"), within_family=True)
    'horizon'
    """
    qualifiers: list[str] = []
    if result.check == "accuracy" and result.measure:
        base = result.measure
    else:
        base = result.check
        if within_family and "." in base:
            base = base.split(".", 1)[1]
        if result.measure:
            qualifiers.append(f"measure={result.measure}")
    if result.segment is not None:
        qualifiers.append(f"segment={result.segment}")
    if result.lag is not None:
        qualifiers.append(f"lag={result.lag}")
    return f"{base}[{', '.join(qualifiers)}]" if qualifiers else base


def _count_phrase(count: int, singular: str, plural: str) -> str:
    return f"{count} {singular if count == 1 else plural}"


def headline(report: RunReport) -> str:
    """One line verdict with the counts behind it and the cycle.

    >>> r = RunReport("r1", "2026-03-02", 2, [CheckResult("accuracy", "fail")], "t0", "t1")
    >>> headline(r)
    'FAIL — 1 failed (cycle 2026-03-02, attempt 2)'
    """
    counts = report.counts()
    parts = [
        _count_phrase(counts[status], singular, plural)
        for status, singular, plural in _COUNT_WORDS
        if counts.get(status, 0)
    ]
    text = f"{status_word(report.status)} — {', '.join(parts) if parts else 'no results'}"
    where: list[str] = []
    if report.cycle is not None:
        where.append(f"cycle {report.cycle}")
    if report.attempt is not None:
        where.append(f"attempt {report.attempt}")
    if where:
        text += f" ({', '.join(where)})"
    return text


def count_summary(results: Iterable[CheckResult], statuses: Sequence[str]) -> str:
    """Counts of the given statuses, with the reasons of skipped results.

    >>> rs = [CheckResult("accuracy", "pass"), CheckResult("accuracy", "skipped",
    ...       reason="zero_actual"), CheckResult("accuracy", "skipped", reason="zero_actual")]
    >>> count_summary(rs, ("pass", "skipped"))
    '1 passed, 2 skipped (zero_actual: 2)'
    >>> count_summary([], ("pass",))
    ''
    """
    by_status: dict[str, list[CheckResult]] = {s: [] for s in statuses}
    for result in results:
        if result.status in by_status:
            by_status[result.status].append(result)
    words = {status: (singular, plural) for status, singular, plural in _COUNT_WORDS}
    parts: list[str] = []
    for status in statuses:
        group = by_status[status]
        if not group:
            continue
        singular, plural = words.get(status, (status, status))
        phrase = _count_phrase(len(group), singular, plural)
        if status == "skipped":
            reasons: dict[str, int] = {}
            for result in group:
                key = result.reason or "no reason given"
                reasons[key] = reasons.get(key, 0) + 1
            listed = ", ".join(f"{k}: {v}" for k, v in sorted(reasons.items()))
            phrase += f" ({listed})"
        parts.append(phrase)
    return ", ".join(parts)


def format_example_value(value: Any) -> str:
    """An example cell (a value from an offending row) as text for people.

    Offending values are shown, in words when they are not finite numbers (``missing`` for
    NaN, ``infinity``/``-infinity``): they are often the point. Timestamps at midnight without
    a time zone read as a date.

    >>> import pandas as pd
    >>> format_example_value(pd.Timestamp("2026-03-02"))
    '2026-03-02'
    >>> format_example_value(float("nan")), format_example_value(float("inf"))
    ('missing', 'infinity')
    >>> format_example_value(None)
    'null'
    >>> format_example_value(2.5)
    '2.5'
    """
    if value is None:
        return "null"
    if isinstance(value, bool):
        return str(value).lower()
    if isinstance(value, _dt.datetime):
        if value.tzinfo is None and value.time() == _dt.time(0):
            return value.date().isoformat()
        return value.isoformat()
    if isinstance(value, _dt.date):
        return value.isoformat()
    if isinstance(value, float):
        if math.isnan(value):
            return "missing"
        return format_number(value, sig=6)
    item = getattr(value, "item", None)  # numpy scalars
    if callable(item) and type(value).__module__ == "numpy":
        try:
            return format_example_value(item())
        except (TypeError, ValueError):
            return str(value)
    return str(value)


def format_example(example: Any) -> str:
    """One example (an offending row, normally a mapping) as ``key=value, …`` text.

    >>> format_example({"store": 3, "week": "2026-03-02"})
    'store=3, week=2026-03-02'
    >>> format_example("row 7")
    'row 7'
    """
    if isinstance(example, Mapping):
        return ", ".join(f"{k}={format_example_value(v)}" for k, v in example.items())
    return format_example_value(example)


@dataclass(frozen=True)
class Listing:
    """What a renderer lists of a run, and the line that counts the rest (:func:`listing`)."""

    #: every result, failures first (:func:`~accuracy_checks.results.sort_for_display`)
    ordered: list[CheckResult]
    #: the results listed one by one: those that need attention (every result if verbose)
    listed: list[CheckResult]
    #: the passes and skips not listed, in words (:func:`count_summary`); ``""`` for none
    rest: str


def listing(report: RunReport, *, verbose: bool = False) -> Listing:
    """Split ``report`` as the console and the Markdown summary show it: the results that
    need attention (fail, error, warn, waived) are listed, the passes and skips are counted.

    >>> report = RunReport("r", None, None, [CheckResult("accuracy", "pass"),
    ...                    CheckResult("output.rows", "fail")], "t0", "t1")
    >>> shown = listing(report)
    >>> [r.check for r in shown.listed], shown.rest
    (['output.rows'], '1 passed')
    """
    ordered = sort_for_display(report.results)
    shown = frozenset(DISPLAY_ORDER) if verbose else NEEDS_ATTENTION
    listed = [r for r in ordered if r.status in shown]
    unlisted = [r for r in ordered if r.status not in shown]
    return Listing(ordered, listed, count_summary(unlisted, (Status.PASS, Status.SKIPPED)))
