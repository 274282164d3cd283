"""The top findings of a run in plain words (``accuracy_checks/outputs/findings.py``), as the
demo narrates them and the Prefect gate puts them in its messages.

Reports are built by hand; no measure is computed here, so no outside reference is needed.
"""

from __future__ import annotations

from accuracy_checks.outputs.findings import finding_text, top_findings
from accuracy_checks.results import CheckResult, RunReport


def result(status: str, check: str, segment: str, measure: str | None, msg: str = "",
           lag: int | None = None, value: float | None = None) -> CheckResult:
    return CheckResult(check, status, segment=segment, lag=lag,  # type: ignore[arg-type]
                       measure=measure, value=value, message=msg)


def report_of(*results: CheckResult) -> RunReport:
    return RunReport(run_id="x", cycle="2025-05-12", attempt=1, started_at="", finished_at="",
                     results=list(results))


def test_top_findings_put_failures_and_distinct_kinds_first() -> None:
    report = report_of(
        result("pass", "accuracy", "*", "wape", "fine", lag=1),
        result("warn", "coverage.series_count", "*", "series_count_change_pct", "fewer"),
        result("fail", "coverage.missing_series", "tools", "missing_series_pct", "12 % gone"),
        result("fail", "coverage.missing_series", "*", "missing_series_pct", "store gone"),
        result("fail", "accuracy", "pet-care", "bias_pct", "under-forecast by 13 %", lag=1),
    )
    assert top_findings(report) == [
        "all series: store gone",  # all series before a single segment
        "pet-care: under-forecast by 13 %",  # a second kind of failure before a repeat
        "all series: fewer",  # then warnings, before repeats of a failure already shown
    ]
    assert top_findings(report, n=5)[3:] == ["tools: 12 % gone"]


def test_errors_rank_with_failures_and_lower_lags_come_first() -> None:
    report = report_of(
        result("warn", "accuracy", "tools", "wape", "wape high", lag=1),
        result("fail", "accuracy", "tools", "mape", "mape at lag 4", lag=4),
        result("error", "accuracy", "tools", "plugin_measure", "plugin raised", lag=1),
        result("fail", "accuracy", "tools", "mape", "mape at lag 1", lag=1),
    )
    assert top_findings(report, n=4) == [
        "tools: plugin raised", "tools: mape at lag 1", "tools: wape high", "tools: mape at lag 4"]


def test_waived_skipped_and_passing_results_are_not_findings() -> None:
    report = report_of(
        result("waived", "accuracy", "tools", "wape", "Waived (fail without it)", lag=1),
        result("skipped", "accuracy", "tools", "mase", "too few rows", lag=1),
        result("pass", "accuracy", "*", "wape", "fine", lag=1),
    )
    assert top_findings(report) == []


def test_a_result_without_a_message_is_worded_from_its_figures() -> None:
    assert finding_text(result("warn", "accuracy", "tools", "wape", lag=4, value=41.234)) == (
        "tools: warn: accuracy, lag 4, wape = 41.2")
    assert finding_text(result("fail", "accuracy", "*", "mape", lag=1)) == (
        "all series: fail: accuracy, lag 1, mape = undefined")
    # a message naming its segment is not led by it again
    assert finding_text(result("fail", "coverage.missing_series", "tools", None,
                               "tools misses 3 series")) == "tools misses 3 series"
