"""The most important findings of a run, in plain words.

The demo's narration (:mod:`accuracy_checks.demo.narrator`) prints them under each cycle's
verdict; the Prefect gate (:mod:`accuracy_checks.prefect.gate`) puts them in a failed state's
message, its :class:`~accuracy_checks.errors.GateFailed` and the warned state's message. Both
pick the same ones with :func:`top_findings`.
"""

from __future__ import annotations

from accuracy_checks.results import ALL_SERIES, OPEN_FINDINGS, CheckResult, RunReport, Status

__all__ = ["finding_text", "top_findings"]


def finding_text(result: CheckResult) -> str:
    """The result's message, led by its segment when the message does not name it.

    A result without a message is worded from its status, check, lag and measure; the
    all-series segment ``"*"`` is "all series".

    >>> finding_text(CheckResult("accuracy", "warn", segment="tools", lag=1, measure="wape",
    ...                          value=41.234))
    'tools: warn: accuracy, lag 1, wape = 41.2'
    >>> finding_text(CheckResult("coverage.missing_series", "fail", segment="*",
    ...                          message="2 series missing"))
    'all series: 2 series missing'
    """
    text = result.message
    if not text:
        parts = [result.check]
        if result.lag is not None:
            parts.append(f"lag {result.lag}")
        if result.measure:
            value = "undefined" if result.value is None else f"{result.value:.3g}"
            parts.append(f"{result.measure} = {value}")
        text = f"{result.status}: {', '.join(parts)}"
    segment = result.segment
    if segment and segment not in text:
        text = f"{'all series' if segment == ALL_SERIES else segment}: {text}"
    return text


def _rank(result: CheckResult) -> int:
    """0 for failures and errors (they fail the gate), 1 for warnings."""
    return 2 - Status(result.status).severity


def top_findings(report: RunReport, n: int = 3) -> list[str]:
    """The ``n`` most important findings of a run (its open findings: ``fail``, ``error``,
    ``warn``), each in plain words (:func:`finding_text`).

    Failures and errors come before warnings. Within a status, different kinds of finding
    (check and measure) come before a second finding of the same kind, the all-series segment
    ``"*"`` before single segments, and lower lags first: so a store missing from every
    segment shows once, next to a biased segment, rather than six times. Waived, skipped and
    passing results are never findings here.
    """
    bad = [r for r in report.results if r.status in OPEN_FINDINGS]
    bad.sort(key=lambda r: (_rank(r), 0 if r.segment == ALL_SERIES else 1,
                            r.lag if r.lag is not None else 0))
    seen: set[tuple[str, str | None]] = set()
    first: list[CheckResult] = []
    repeats: list[CheckResult] = []
    for r in bad:
        kind = (r.check, r.measure)
        (repeats if kind in seen else first).append(r)
        seen.add(kind)
    ordered = sorted(first, key=_rank) + repeats
    return [finding_text(r) for r in ordered[:n]]
