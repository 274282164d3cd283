"""JUnit XML for CI test reporters (GitLab, Jenkins, GitHub test-report actions).

Layout:

- ``<testsuites name="accuracy-checks">`` with the run totals;
- one ``<testsuite>`` per check family (the part of ``check`` before the first dot, so
  ``accuracy`` is its own family), in order of first appearance in the report;
- one ``<testcase>`` per result, failures first, ``classname="accuracy_checks.<family>"`` and
  ``name`` a readable id unique within the suite (``wape[segment=tools, lag=1]``; a repeated id
  gets `` #2``, `` #3``…).

Statuses: ``fail`` and ``error`` → ``<failure type="fail">`` (``type="error"`` for a check that
could not run) whose text lists the value, thresholds, counts, message, reason and up to
:data:`MAX_EXAMPLES` examples; ``warn`` → a passing case with the warning in
``<system-out>`` (starting ``WARNING:``); ``skipped`` → ``<skipped message=reason>``;
``waived`` → ``<skipped message="waived: …">``. Suite attributes count ``tests``,
``failures`` (fail and error), ``errors`` (always 0: an error is reported as a failure),
``skipped`` (skipped and waived; on ``<testsuite>`` only) and ``time`` (the run's duration on
``<testsuites>``; individual checks are not timed, so cases and suites carry 0).

The document is valid against the JUnit XSD that CI report plugins validate against (the
jenkins-junit schema, ``tests/data/junit-10.xsd``): ``<testsuites>`` carries only ``name``,
``tests``, ``failures``, ``errors`` and ``time``; a ``<testcase>`` holds only ``<failure>``,
``<skipped>`` and ``<system-out>`` (no ``<properties>``); the run's identity (run id, cycle,
attempt, verdict) is in each ``<testsuite>``'s ``<properties>``.

Text is escaped by :mod:`xml.etree.ElementTree`; characters that XML 1.0 cannot carry at all
(control characters) are replaced by U+FFFD so the file always parses.
"""

from __future__ import annotations

import datetime as _dt
import os
import re
import xml.etree.ElementTree as ET

from accuracy_checks.outputs.jsonfile import write_text_atomic
from accuracy_checks.outputs.wording import (
    describe_threshold,
    describe_value,
    family,
    format_example,
    result_label,
)
from accuracy_checks.results import FAILING, CheckResult, RunReport, Status, sort_for_display

__all__ = ["MAX_EXAMPLES", "to_junit_xml", "write_junit"]

#: Examples listed in a failure's text.
MAX_EXAMPLES = 3

_ILLEGAL_XML = re.compile("[\x00-\x08\x0b\x0c\x0e-\x1f\ufffe\uffff\ud800-\udfff]")


def _clean(text: object) -> str:
    """``text`` as a string XML 1.0 can carry (illegal characters → U+FFFD)."""
    return _ILLEGAL_XML.sub("\ufffd", "" if text is None else str(text))


def _duration_seconds(report: RunReport) -> float:
    try:
        start = _dt.datetime.fromisoformat(report.started_at)
        end = _dt.datetime.fromisoformat(report.finished_at)
        return max((end - start).total_seconds(), 0.0)
    except (TypeError, ValueError):  # missing, unparsable, or naive vs aware
        return 0.0


def _detail_text(result: CheckResult) -> str:
    """The text body of a failure or warning: every fact a reader needs to act."""
    lines = [
        f"check: {result.check}",
        f"status: {result.status}",
    ]
    if result.segment is not None:
        lines.append(f"segment: {result.segment}")
    if result.lag is not None:
        lines.append(f"lag: {result.lag}")
    if result.measure is not None:
        lines.append(f"measure: {result.measure}")
    lines.append(f"value: {describe_value(result)}")
    lines.append(f"thresholds: {describe_threshold(result)}")
    if result.n_series is not None:
        lines.append(f"series: {result.n_series}")
    if result.n_obs is not None:
        lines.append(f"rows: {result.n_obs}")
    if result.message:
        lines.append(f"message: {result.message}")
    if result.reason:
        lines.append(f"reason: {result.reason}")
    if result.examples:
        shown = result.examples[:MAX_EXAMPLES]
        lines.append(f"examples ({len(shown)} of {len(result.examples)}):")
        for example in shown:
            pairs = format_example(example)
            lines.append(f"  - {pairs}")
    return "\n".join(lines)


def _summary(result: CheckResult) -> str:
    """A one-line message: value against thresholds, then the result's own message."""
    if result.status == "error":
        return f"check could not run: {result.message}" if result.message else "check could not run"
    text = f"{describe_value(result)} ({describe_threshold(result)})"
    return f"{text}: {result.message}" if result.message else text


def _add_case(suite: ET.Element, result: CheckResult, name: str, fam: str) -> None:
    case = ET.SubElement(
        suite,
        "testcase",
        {"classname": f"accuracy_checks.{_clean(fam)}", "name": _clean(name), "time": "0"},
    )
    status = result.status
    if status in FAILING:
        failure = ET.SubElement(
            case, "failure", {"message": _clean(_summary(result)), "type": status}
        )
        failure.text = _clean(_detail_text(result))
    elif status == "warn":
        out = ET.SubElement(case, "system-out")
        out.text = _clean(f"WARNING: {_summary(result)}\n{_detail_text(result)}")
    elif status == "skipped":
        parts = [p for p in (result.reason, result.message) if p]
        detail = ": ".join(parts) if parts else "skipped"
        ET.SubElement(case, "skipped", {"message": _clean(detail)})
    elif status == "waived":
        ET.SubElement(
            case, "skipped", {"message": _clean(f"waived: {result.message or _summary(result)}")}
        )


def _suite_counts(results: list[CheckResult], *, with_skipped: bool = True) -> dict[str, str]:
    """The count attributes of a ``<testsuite>`` (``with_skipped=False``: of ``<testsuites>``,
    where the schema has no ``skipped``)."""
    failures = sum(r.status in FAILING for r in results)
    skipped = sum(r.status in (Status.SKIPPED, Status.WAIVED) for r in results)
    counts = {"tests": str(len(results)), "failures": str(failures), "errors": "0"}
    if with_skipped:
        counts["skipped"] = str(skipped)
    return counts


def to_junit_xml(report: RunReport) -> str:
    """The JUnit XML document of ``report`` (UTF-8 declaration, 2-space indent, newline-ended)."""
    families: dict[str, list[CheckResult]] = {}
    for result in report.results:
        families.setdefault(family(result.check), [])
    for result in sort_for_display(report.results):
        families[family(result.check)].append(result)

    root = ET.Element(
        "testsuites",
        {
            "name": "accuracy-checks",
            **_suite_counts(report.results, with_skipped=False),
            "time": f"{_duration_seconds(report):.3f}",
        },
    )
    for fam, results in families.items():
        suite = ET.SubElement(
            root,
            "testsuite",
            {
                "name": _clean(fam),
                **_suite_counts(results),
                "time": "0",
                "timestamp": _clean(report.started_at),
            },
        )
        properties = ET.SubElement(suite, "properties")
        for key, value in (
            ("run_id", report.run_id),
            ("cycle", report.cycle),
            ("attempt", report.attempt),
            ("verdict", report.status),
        ):
            if value is not None:
                ET.SubElement(properties, "property", {"name": key, "value": _clean(value)})
        used: set[str] = set()
        for result in results:
            base = result_label(result, within_family=True)
            name, number = base, 1
            while name in used:
                number += 1
                name = f"{base} #{number}"
            used.add(name)
            _add_case(suite, result, name, fam)

    ET.indent(root, space="  ")
    body = ET.tostring(root, encoding="unicode")
    return f'<?xml version="1.0" encoding="UTF-8"?>\n{body}\n'


def write_junit(report: RunReport, path: str | os.PathLike[str]) -> None:
    """Write :func:`to_junit_xml` of ``report`` to ``path`` atomically, UTF-8."""
    write_text_atomic(path, to_junit_xml(report))
