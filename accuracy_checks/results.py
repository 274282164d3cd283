"""The one result model that every check produces and every output renders.

A :class:`CheckResult` is one judged figure: a check (``accuracy``, ``coverage.horizon`` …),
optionally a segment (``"*"`` = all series), a lag and a measure, the value, the thresholds it
was judged against, its status and the counts behind it. A :class:`RunReport` is one run: its
results and the verdict, which is the worst status among them.
"""

from __future__ import annotations

import math
from dataclasses import asdict, dataclass, field
from typing import Any, Literal

Status = Literal["pass", "warn", "fail", "skipped", "waived", "error"]
Verdict = Literal["pass", "warn", "fail"]
#: A threshold level: a bound on the value (or on its absolute value for centred measures),
#: or an asymmetric ``[low, high]`` pair.
Bound = float | tuple[float, float]

ALL_SERIES = "*"

# How much each status weighs in the verdict. skipped and waived do not move the verdict;
# an error (a check that could not run) fails the gate: a check that did not run cannot pass.
_SEVERITY: dict[str, int] = {
    "pass": 0,
    "skipped": 0,
    "waived": 0,
    "warn": 1,
    "fail": 2,
    "error": 2,
}
# Order of results in outputs: failures first.
DISPLAY_ORDER: dict[str, int] = {
    "fail": 0,
    "error": 1,
    "warn": 2,
    "waived": 3,
    "skipped": 4,
    "pass": 5,
}


@dataclass(frozen=True)
class CheckResult:
    """One judged figure. Field names follow the JSON contract, docs/results.md."""

    check: str
    status: Status
    segment: str | None = None
    lag: int | None = None
    measure: str | None = None
    value: float | None = None
    warn: Bound | None = None
    fail: Bound | None = None
    n_series: int | None = None
    n_obs: int | None = None
    message: str = ""
    examples: list[dict[str, Any]] = field(default_factory=list)
    #: why a value is undefined or a check skipped (``zero_actual``, ``too_few_rows`` …)
    reason: str | None = None
    #: ``%`` for percentages (always in percent), ``units`` for data units, ``count``…
    unit: str | None = None
    #: small extra facts (cycles and attempts used, counts of dropped rows …)
    details: dict[str, Any] = field(default_factory=dict)

    def to_dict(self) -> dict[str, Any]:
        """JSON-ready dict; NaN/inf never leak (they become ``None``)."""
        out = asdict(self)
        out["value"] = _finite_or_none(self.value)
        for key in ("warn", "fail"):
            bound = out[key]
            if isinstance(bound, tuple):
                out[key] = [float(bound[0]), float(bound[1])]
            elif bound is not None:
                out[key] = float(bound)
        return out


def _finite_or_none(value: float | None) -> float | None:
    if value is None:
        return None
    value = float(value)
    return value if math.isfinite(value) else None


def worst_status(statuses: list[str] | tuple[str, ...]) -> Verdict:
    """The verdict of a set of statuses: ``fail`` beats ``warn`` beats ``pass``.

    ``skipped`` and ``waived`` count as ``pass``; ``error`` counts as ``fail``.

    >>> worst_status(["pass", "warn", "skipped"])
    'warn'
    >>> worst_status([])
    'pass'
    """
    level = max((_SEVERITY[s] for s in statuses), default=0)
    return ("pass", "warn", "fail")[level]  # type: ignore[return-value]


def sort_for_display(results: list[CheckResult]) -> list[CheckResult]:
    """Failures first, then errors, warnings, waived, skipped, passes; stable otherwise."""
    return sorted(results, key=lambda r: DISPLAY_ORDER[r.status])


@dataclass
class RunReport:
    """One run of the gate."""

    run_id: str
    cycle: str | None
    attempt: int | None
    results: list[CheckResult]
    started_at: str
    finished_at: str
    config_path: str | None = None
    #: what was read: paths, row and series counts per input
    inputs: dict[str, Any] = field(default_factory=dict)
    #: the earlier cycles accuracy was measured on: [{"cycle", "attempt", "source"}]
    evaluated_cycles: list[dict[str, Any]] = field(default_factory=list)
    #: where the checked forecast was snapshotted
    snapshot: str | None = None
    #: an optional label of the pipeline run (a scheduler's run id, a CI build number)
    label: str | None = None

    @property
    def status(self) -> Verdict:
        return worst_status([r.status for r in self.results])

    def counts(self) -> dict[str, int]:
        out = {s: 0 for s in DISPLAY_ORDER}
        for r in self.results:
            out[r.status] += 1
        return out

    def to_dict(self) -> dict[str, Any]:
        """The ``--json`` document (docs/results.md, plus run metadata keys)."""
        return {
            "status": self.status,
            "run_id": self.run_id,
            "cycle": self.cycle,
            "attempt": self.attempt,
            "started_at": self.started_at,
            "finished_at": self.finished_at,
            "config": self.config_path,
            "counts": self.counts(),
            "inputs": self.inputs,
            "evaluated_cycles": self.evaluated_cycles,
            "snapshot": self.snapshot,
            "label": self.label,
            "results": [r.to_dict() for r in sort_for_display(self.results)],
        }
