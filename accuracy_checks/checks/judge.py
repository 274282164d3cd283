"""Thresholds: resolve the levels that apply to a (measure, segment) and judge a value.

Resolution: ``thresholds.segments.<segment>.<measure>`` if present, else
``thresholds.default.<measure>``, else :data:`BUILTIN_DEFAULTS`, else the measure is reported
without judgement (``pass``).
Segment ``"*"`` (all series) is judged by the defaults unless ``thresholds.segments."*"``
overrides them.

Judgement (a level is broken when the value is *strictly* beyond it, the value taken to 12
significant digits so that the last-bit error of a floating-point sum never breaks a level the
exact value only meets):

- ``lower`` is better: ``value > level``;
- ``higher`` is better: ``value < level``;
- ``centered`` (closer to 0 is better): a number ``t`` bounds ``|value| > t``; a pair
  ``[low, high]`` is broken when ``value < low`` or ``value > high``.

``fail`` is checked before ``warn``. An undefined value (``None``/NaN) under a threshold gets
the configured ``undefined_status``; without a threshold it is ``skipped``. ``±inf`` (a sum
beyond the float64 range) is not undefined: it is judged like any number, so it breaks every
level on its side. A figure whose sums left the float64 range (reason ``overflow``) is beyond
any level: the worst level set breaks (``fail``, else ``warn``; ``skipped`` without a level).

:func:`judge` is that rule, the one every engine and check calls (the coverage checks through
:meth:`Thresholds.judge`, the accuracy check and the fan-out path through
:func:`judge_figure`, which also words the result's message: docs/checks.md).
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass, field
from datetime import date
from typing import Any

from accuracy_checks.config import Bound, Config, Direction, Level
from accuracy_checks.measures.catalogue import measure_directions
from accuracy_checks.measures.data import MeasureSettings
from accuracy_checks.measures.registry import Measure
from accuracy_checks.measures.wording import format_bound, format_number, value_words
from accuracy_checks.results import BREACHED, CheckResult, Reason, Status, StatusName

__all__ = [
    "BUILTIN_DEFAULTS",
    "Figure",
    "Judgement",
    "Thresholds",
    "breaks",
    "judge",
    "judge_figure",
    "span_words",
]

#: the check name of accuracy results
ACCURACY = "accuracy"
_FLOAT_MAX = "1.8e308"

#: Levels that apply when the config sets none for the measure (a config's
#: ``thresholds.default`` replaces them measure by measure). Count checks: ``0`` means any.
BUILTIN_DEFAULTS: dict[str, Level] = {
    "missing_series_pct": Level(warn=0, fail=1),
    "incomplete_series": Level(fail=0),
    "unexpected_series": Level(warn=0),
    "series_count_change_pct": Level(warn=10),
}


@dataclass(frozen=True)
class Judgement:
    status: StatusName
    warn: Bound | None
    fail: Bound | None


def breaks(value: float, bound: Bound, direction: Direction) -> bool:
    """Whether ``value`` is strictly beyond ``bound``.

    >>> breaks(25.0, 25.0, "lower"), breaks(25.1, 25.0, "lower")
    (False, True)
    >>> breaks(-6.0, 5.0, "centered"), breaks(-6.0, (-10.0, 15.0), "centered")
    (True, False)

    The value is compared at 12 significant digits: a figure that is exactly at its level
    but carries the last-bit error of a floating-point sum (``100 * (0.1 + 0.2) / 3`` is
    ``10.000000000000002``; another order of summing, as the dask engine's, gives another
    last bit) is at the level, not beyond it.

    >>> x = 100 * (0.1 + 0.2) / 3
    >>> x, breaks(x, 10.0, "lower"), breaks(10.0001, 10.0, "lower")
    (10.000000000000002, False, True)
    """
    if math.isfinite(value):
        value = float(f"{value:.12g}")
    if isinstance(bound, tuple):
        return value < bound[0] or value > bound[1]
    if direction == "centered":
        return abs(value) > bound
    if direction == "higher":
        return value < bound
    return value > bound


def judge(value: float | None, warn: Bound | None, fail: Bound | None, direction: Direction,
          *, reason: str | None = None, undefined: StatusName = "skipped") -> StatusName:
    """The status of ``value`` against its levels: the one rule of the module doc.

    ``undefined`` is the status of an undefined value (``None``/NaN) when a level is set
    (the config's ``evaluation.undefined_status``); ``reason="overflow"`` marks a figure
    beyond the float64 range.

    >>> judge(30.0, 25.0, 40.0, "lower"), judge(-6.0, 5.0, None, "centered")
    ('warn', 'warn')
    >>> judge(None, 25.0, 40.0, "lower", undefined="warn"), judge(None, None, None, "lower")
    ('warn', 'skipped')
    >>> judge(None, 25.0, None, "lower", reason="overflow")
    'warn'
    """
    if reason == Reason.OVERFLOW:
        return "fail" if fail is not None else "warn" if warn is not None else "skipped"
    if value is None or math.isnan(value):
        return undefined if warn is not None or fail is not None else "skipped"
    if fail is not None and breaks(value, fail, direction):
        return "fail"
    if warn is not None and breaks(value, warn, direction):
        return "warn"
    return "pass"


class Thresholds:
    """The thresholds of one config, ready to judge values."""

    def __init__(self, config: Config) -> None:
        self._default = {**BUILTIN_DEFAULTS, **config.thresholds.default}
        self._segments = config.thresholds.segments
        self._directions = measure_directions()
        self._undefined: StatusName = config.evaluation.undefined_status

    def direction(self, measure: str) -> Direction:
        return self._directions[measure][0]

    def unit(self, measure: str) -> str:
        return self._directions[measure][1]

    def level(self, measure: str, segment: str) -> Level | None:
        override = self._segments.get(segment, {}).get(measure)
        return override if override is not None else self._default.get(measure)

    def has_threshold(self, measure: str) -> bool:
        return measure in self._default or any(measure in s for s in self._segments.values())

    @property
    def undefined_status(self) -> StatusName:
        """The status of an undefined value under a level (``evaluation.undefined_status``)."""
        return self._undefined

    def judge(self, measure: str, segment: str, value: float | None) -> Judgement:
        """``value`` of ``measure`` in ``segment`` judged by :func:`judge`."""
        level = self.level(measure, segment)
        warn = level.warn if level else None
        fail = level.fail if level else None
        undefined = self._undefined if level else "skipped"
        return Judgement(judge(value, warn, fail, self.direction(measure), undefined=undefined),
                         warn, fail)

    def judge_overflow(self, measure: str, segment: str) -> Judgement:
        """A figure beyond the float64 range (reason ``overflow``): beyond any level, so the
        worst level set breaks (``fail``, else ``warn``); ``skipped`` without a level."""
        level = self.level(measure, segment)
        warn = level.warn if level else None
        fail = level.fail if level else None
        status = judge(None, warn, fail, self.direction(measure), reason=Reason.OVERFLOW)
        return Judgement(status, warn, fail)

    def segment_names(self) -> list[str]:
        return list(self._segments)


# --------------------------------------------------------------------------- accuracy figures


@dataclass
class Figure:
    """One figure of a measure for one (lag, segment[, variant]) before judging."""

    lag: int
    segment: str
    value: float | None
    reason: str | None
    n_obs: int
    n_series: int
    unit: str | None
    variant: str | None = None
    details: dict[str, Any] = field(default_factory=dict)


def span_words(window: Sequence[date]) -> str:
    """The periods of a window in words (every accuracy message names them).

    >>> from datetime import date
    >>> span_words([date(2026, 1, 5), date(2026, 3, 30)]), span_words([date(2026, 1, 5)])
    ('periods 2026-01-05 to 2026-03-30', 'period 2026-01-05')
    >>> span_words([])
    'no periods'
    """
    if not window:
        return "no periods"
    first, last = window[0], window[-1]
    if first == last:
        return f"period {first:%Y-%m-%d}"
    return f"periods {first:%Y-%m-%d} to {last:%Y-%m-%d}"


def judge_figure(measure: Measure, figure: Figure, book: Thresholds, *, min_obs: int,
                 span: str, settings: MeasureSettings | None = None) -> CheckResult:
    """The accuracy result of one figure: its status (:func:`judge` against the levels of
    ``book``, turned into the bounds of this figure by ``measure.levels``; ``no_data`` or
    ``too_few_rows`` below ``min_obs``; a breach that ``measure.breach_counts`` puts down to
    chance passes) and its message. ``span`` is the window in words (:func:`span_words`).
    The single-process check and the fan-out path both call it, so their results read the
    same."""
    settings = settings or MeasureSettings()
    level = book.level(measure.id, figure.segment)
    configured = (level.warn, level.fail) if level is not None else None
    bounds = (measure.levels(configured, figure.details, settings)
              if measure.levels is not None else configured)
    warn, fail = bounds if bounds is not None else (None, None)
    label = measure.label + (f" ({figure.variant})" if figure.variant else "")
    common: dict[str, Any] = dict(segment=figure.segment, lag=figure.lag, measure=measure.id,
                                  unit=figure.unit, n_obs=figure.n_obs,
                                  n_series=figure.n_series, warn=warn, fail=fail,
                                  details=figure.details)
    if figure.n_obs == 0:
        return CheckResult(ACCURACY, Status.SKIPPED, reason=Reason.NO_DATA,
                           message=f"{label} not measured: no forecast with an actual at lag "
                                   f"{figure.lag} in {span}.", **common)
    if figure.n_obs < min_obs:
        return CheckResult(ACCURACY, Status.SKIPPED, reason=Reason.TOO_FEW_ROWS,
                           message=(f"{label} not judged: only {figure.n_obs} forecast(s) with "
                                    f"an actual at lag {figure.lag} in {span} (min_obs is "
                                    f"{min_obs})."), **common)
    # an undefined value is held against a configured level only (not against bounds a
    # measure makes up without one)
    undefined = book.undefined_status if configured is not None else "skipped"
    status = judge(figure.value, warn, fail, book.direction(measure.id), reason=figure.reason,
                   undefined=undefined)
    note = ""
    if (figure.value is not None and status != Status.PASS
            and measure.breach_counts is not None
            and not measure.breach_counts(figure.details, settings)):
        status = "pass"
        note = " The gap may be chance (binomial test), so it is not held against it."
    reason = None if figure.value is not None else (figure.reason or Reason.NO_DATA)
    result = CheckResult(ACCURACY, status, value=figure.value, reason=reason, **common)
    return CheckResult(**{**result.__dict__,
                          "message": _message(result, label, span, measure) + note})


def _message(result: CheckResult, label: str, span: str, measure: Measure) -> str:
    what = value_words(result.value, measure=result.measure, unit=result.unit,
                       reason=result.reason)
    named = label.replace(" %", "") if result.value is not None else label  # "WAPE 23.4 %"
    lead = f"{named} {what}" if not what.startswith(("under", "over", "no bias", "sustained")) \
        else f"{named}: {what}"
    basis = (f"over {result.n_obs:,} forecasts of {result.n_series:,} series at lag "
             f"{result.lag} ({span})")
    if result.value is None:
        if result.reason == Reason.OVERFLOW:
            level = result.fail if result.status == Status.FAIL else result.warn
            judged = (f", so it is judged beyond the {result.status} level {format_bound(level)}"
                      if result.status in BREACHED else ", so it cannot be computed")
            text = (f"{label} {basis} is beyond the floating-point range: the errors are too "
                    f"large to sum (beyond ±{_FLOAT_MAX}){judged}. Look for a forecast or an "
                    "actual of absurd size.")
        elif result.reason == Reason.ZERO_ACTUAL and result.details.get("mape_nonzero") is not None:
            nz = result.details["mape_nonzero"]
            text = (f"{label} is undefined: {result.details.get('n_zero_actual')} actual(s) are 0 "
                    f"{basis}; over the non-zero actuals it is {format_number(nz)} %.")
        else:
            text = f"{label} is undefined ({result.reason}) {basis}."
    elif result.status in BREACHED:
        level = result.fail if result.status == Status.FAIL else result.warn
        text = f"{lead} {basis}, beyond the {result.status} level {format_bound(level)}."
    else:
        text = f"{lead} {basis}."
    facts = measure.facts_words(result.details, result.unit)
    return f"{text} {facts}" if facts else text


#: The former name of :class:`Thresholds`, kept for one release for check plugins that
#: annotate with it (a deprecation warning follows once the package itself no longer uses it).
