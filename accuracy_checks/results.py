"""The one result model that every check produces and every output renders.

A :class:`CheckResult` is one judged figure: a check (``accuracy``, ``coverage.horizon`` …),
optionally a segment (``"*"`` = all series), a lag and a measure, the value, the thresholds it
was judged against, its status and the counts behind it. A :class:`RunReport` is one run: its
results and the verdict, which is the worst status among them.
"""

from __future__ import annotations

import datetime as _dt
import math
from dataclasses import asdict, dataclass, field
from enum import StrEnum
from typing import Any, Literal

__all__ = [
    "ALL_SERIES",
    "BREACHED",
    "DISPLAY_ORDER",
    "FAILING",
    "JUDGED",
    "NEEDS_ATTENTION",
    "OPEN_FINDINGS",
    "WAIVABLE",
    "Bound",
    "CheckResult",
    "Reason",
    "RunReport",
    "Status",
    "StatusName",
    "Verdict",
    "json_value",
    "sort_for_display",
    "worst_status",
]


class Status(StrEnum):
    """The status of one result (docs/results.md, "Statuses and the verdict"), in display order:
    failures first. A member equals its text (``Status.FAIL == "fail"``), so results, JSON and
    the audit store hold plain strings.

    >>> [str(s) for s in Status]
    ['fail', 'error', 'warn', 'waived', 'skipped', 'pass']
    >>> Status("warn").severity, Status.ERROR.severity, Status.WAIVED.severity
    (1, 2, 0)
    """

    FAIL = "fail"
    ERROR = "error"
    WARN = "warn"
    WAIVED = "waived"
    SKIPPED = "skipped"
    PASS = "pass"

    @property
    def severity(self) -> int:
        """Its weight in the verdict: 2 fails the gate (``fail``, and ``error``: a check that
        did not run cannot pass), 1 warns, 0 passes (``pass``, ``skipped``, ``waived``)."""
        return _SEVERITY[self]


_SEVERITY = {Status.FAIL: 2, Status.ERROR: 2, Status.WARN: 1}
_SEVERITY.update({s: 0 for s in Status if s not in _SEVERITY})

#: The status texts (what a :class:`CheckResult` accepts); the type checker's view of
#: :class:`Status` for call sites that pass text.
StatusName = Literal["fail", "error", "warn", "waived", "skipped", "pass"]
#: A run's verdict: ``pass``, ``warn`` or ``fail``.
Verdict = Literal["pass", "warn", "fail"]

#: Order of results in outputs (failures first): status text → rank.
DISPLAY_ORDER: dict[str, int] = {s.value: i for i, s in enumerate(Status)}
#: Statuses of a figure compared with its levels (``waived`` was a breach, then covered).
JUDGED: frozenset[str] = frozenset({Status.PASS, Status.WARN, Status.FAIL, Status.WAIVED})
#: Statuses of a figure beyond a level (``waived`` included: the breach happened).
BREACHED: frozenset[str] = frozenset({Status.WARN, Status.FAIL, Status.WAIVED})
#: Statuses of a breach not (yet) waived: what an active waiver turns into ``waived``.
WAIVABLE: frozenset[str] = frozenset({Status.WARN, Status.FAIL})
#: Statuses that fail the gate.
FAILING: frozenset[str] = frozenset({Status.FAIL, Status.ERROR})
#: Findings nobody has waived: they fail the gate or warn.
OPEN_FINDINGS: frozenset[str] = frozenset({*FAILING, Status.WARN})
#: Statuses an output lists as findings (the rest are counted): open ones and waived ones.
NEEDS_ATTENTION: frozenset[str] = frozenset({*OPEN_FINDINGS, Status.WAIVED})


class Reason(StrEnum):
    """Why a value is undefined or a result skipped (``CheckResult.reason``, docs/results.md).

    >>> Reason.ZERO_ACTUAL == "zero_actual"
    True
    """

    #: an actual is 0 (MAPE divides by each actual)
    ZERO_ACTUAL = "zero_actual"
    #: the sum a ratio divides by is 0 (WAPE, bias %)
    ZERO_DENOMINATOR = "zero_denominator"
    #: fewer rows than the measure or ``min_obs`` needs
    TOO_FEW_ROWS = "too_few_rows"
    #: every series' scale is 0 or unknown (MASE, MSIS)
    ZERO_SCALE = "zero_scale"
    #: no row at all
    NO_DATA = "no_data"
    #: the config does not feed the measure (quantiles, costs, the actuals history)
    NOT_CONFIGURED = "not_configured"
    #: sums beyond the float64 range: judged beyond the worst level set
    OVERFLOW = "overflow"
    #: too few earlier cycles for a drift rule
    TOO_FEW_CYCLES = "too_few_cycles"
    #: the forecast has no quantile columns
    NO_QUANTILES = "no_quantiles"


#: A threshold level: a bound on the value (or on its absolute value for centred measures),
#: or an asymmetric ``[low, high]`` pair.
Bound = float | tuple[float, float]

ALL_SERIES = "*"


def json_value(value: Any, *, infinity: Literal["null", "text"] = "null",
               dates: Literal["day", "iso"] = "day") -> Any:
    """``value`` as a plain JSON value: the one conversion of numpy and pandas scalars.

    numpy scalars → Python ``bool``/``int``/``float``; NaN, ``pd.NA``, ``NaT`` → ``None``;
    ±inf → ``None``, or ``"infinity"``/``"-infinity"`` with ``infinity="text"`` (an offending
    row's value, where the infinity is the point; strict JSON has none); datetimes (a
    ``pd.Timestamp``, ``np.datetime64``) → ISO text, the date alone at midnight unless
    ``dates="iso"``; dates → ISO text; anything else is returned as it is. Needs neither numpy
    nor pandas imported.

    >>> import numpy as np
    >>> json_value(np.int64(3)), json_value(np.float64("nan")), json_value(np.bool_(True))
    (3, None, True)
    >>> json_value(float("-inf")), json_value(float("-inf"), infinity="text")
    (None, '-infinity')
    >>> json_value(np.datetime64("2026-03-02")), json_value(_dt.datetime(2026, 3, 2, 6))
    ('2026-03-02', '2026-03-02T06:00:00')
    >>> json_value(_dt.datetime(2026, 3, 2), dates="iso"), json_value("a")
    ('2026-03-02T00:00:00', 'a')
    """
    if value is None or type(value).__name__ in ("NAType", "NaTType"):
        return None
    if type(value).__module__ == "numpy":
        kind = getattr(getattr(value, "dtype", None), "kind", "")
        if kind in ("m", "M"):
            if value != value:  # NaT
                return None
            # in microseconds, .item() gives a datetime (in nanoseconds, an int)
            value = value.astype("datetime64[us]" if kind == "M" else "timedelta64[us]")
        value = value.item()
    if isinstance(value, float):
        if math.isnan(value):
            return None
        if math.isinf(value):
            return ("infinity" if value > 0 else "-infinity") if infinity == "text" else None
        return value
    if isinstance(value, _dt.datetime):
        if dates == "day" and value.tzinfo is None and value.time() == _dt.time(0):
            return value.date().isoformat()
        return value.isoformat()
    if isinstance(value, _dt.date):
        return value.isoformat()
    return value


@dataclass(frozen=True)
class CheckResult:
    """One judged figure. Field names follow the JSON contract, docs/results.md."""

    check: str
    #: a :class:`Status` or its text; stored as the plain text
    status: Status | StatusName
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

    def __post_init__(self) -> None:
        # one vocabulary: an unknown status is a ValueError here, not a KeyError in an output
        object.__setattr__(self, "status", Status(self.status).value)
        if isinstance(self.reason, Reason):
            object.__setattr__(self, "reason", self.reason.value)

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
    level = max((Status(s).severity for s in set(statuses)), default=0)  # each status once
    return (Status.PASS, Status.WARN, Status.FAIL)[level].value  # type: ignore[return-value]


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
