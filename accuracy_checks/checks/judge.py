"""Thresholds: resolve the levels that apply to a (measure, segment) and judge a value.

Resolution: ``thresholds.segments.<segment>.<measure>`` if present, else
``thresholds.default.<measure>``, else :data:`BUILTIN_DEFAULTS`, else the measure is reported
without judgement (``pass``).
Segment ``"*"`` (all series) is judged by the defaults unless ``thresholds.segments."*"``
overrides them.

Judgement (a level is broken when the value is *strictly* beyond it):

- ``lower`` is better: ``value > level``;
- ``higher`` is better: ``value < level``;
- ``centered`` (closer to 0 is better): a number ``t`` bounds ``|value| > t``; a pair
  ``[low, high]`` is broken when ``value < low`` or ``value > high``.

``fail`` is checked before ``warn``. An undefined value (``None``/NaN) under a threshold gets
the configured ``undefined_status``; without a threshold it is ``skipped``. ``±inf`` (a sum
beyond the float64 range) is not undefined: it is judged like any number, so it breaks every
level on its side.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

from accuracy_checks.config import Bound, Config, Direction, Level
from accuracy_checks.measures.catalogue import measure_directions
from accuracy_checks.results import StatusName

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
    """
    if isinstance(bound, tuple):
        return value < bound[0] or value > bound[1]
    if direction == "centered":
        return abs(value) > bound
    if direction == "higher":
        return value < bound
    return value > bound


class ThresholdBook:
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

    def judge(self, measure: str, segment: str, value: float | None) -> Judgement:
        level = self.level(measure, segment)
        warn = level.warn if level else None
        fail = level.fail if level else None
        if value is None or math.isnan(value):
            return Judgement(self._undefined if level else "skipped", warn, fail)
        direction = self.direction(measure)
        if fail is not None and breaks(value, fail, direction):
            status: StatusName = "fail"
        elif warn is not None and breaks(value, warn, direction):
            status = "warn"
        else:
            status = "pass"
        return Judgement(status, warn, fail)

    def judge_overflow(self, measure: str, segment: str) -> Judgement:
        """A figure beyond the float64 range (reason ``overflow``): beyond any level, so the
        worst level set breaks (``fail``, else ``warn``); ``skipped`` without a level."""
        level = self.level(measure, segment)
        warn = level.warn if level else None
        fail = level.fail if level else None
        status: StatusName = "fail" if fail is not None else "warn" if warn is not None \
            else "skipped"
        return Judgement(status, warn, fail)

    def segment_names(self) -> list[str]:
        return list(self._segments)
