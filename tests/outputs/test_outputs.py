"""Tests of the output renderers: wording, console, JSON, JUnit XML and Markdown.

Reports are built by hand; no measure is computed here, so no outside reference is needed.
"""

from __future__ import annotations

import io
import json
import os
import re
import xml.etree.ElementTree as ET
from collections.abc import Callable
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd
import pytest
import xmlschema

from accuracy_checks.cli.main import main
from accuracy_checks.outputs import (
    describe_threshold,
    describe_value,
    headline,
    jsonfile,
    render_console,
    render_markdown,
    to_junit_xml,
    write_json,
    write_junit,
    write_markdown,
)
from accuracy_checks.outputs.markdown import escape_cell
from accuracy_checks.outputs.wording import format_number, result_label
from accuracy_checks.results import CheckResult, RunReport, Status
from tests.support.paths import DATA
from tests.support.project import EARLIER, Project, forecast_frame

NASTY = "x'<script>alert(1)</script>|&\""
CONTRACT_KEYS = {
    "check",
    "segment",
    "lag",
    "measure",
    "value",
    "warn",
    "fail",
    "status",
    "n_series",
    "n_obs",
    "message",
    "examples",
}
EXTRA_KEYS = {"reason", "unit", "details"}
JUNIT_XSD = DATA / "junit-10.xsd"


def _report(results: list[CheckResult], cycle: str | None = "2026-03-02") -> RunReport:
    return RunReport(
        run_id="run-1",
        cycle=cycle,
        attempt=2,
        results=results,
        started_at="2026-03-02T06:00:00+00:00",
        finished_at="2026-03-02T06:00:07.500000+00:00",
    )


def _acc(
    status: Status,
    segment: str,
    measure: str,
    value: float | None,
    *,
    lag: int = 1,
    unit: str | None = None,
    **kw: Any,
) -> CheckResult:
    """An accuracy result; the unit follows the measure unless given."""
    if unit is None:
        unit = "units" if measure in ("me", "mae", "rmse", "sde") else "%"
    return CheckResult(
        "accuracy", status, segment=segment, lag=lag, measure=measure, value=value, unit=unit, **kw
    )


EXAMPLES = [
    {
        "store": np.int64(3),
        "product": "A17",
        "week": pd.Timestamp("2026-03-02"),
        "units": np.float64("nan"),
        "flag": np.bool_(True),
    },
    {"store": 4, "product": "B2", "week": pd.Timestamp("2026-03-02"), "units": 1.5, "flag": False},
    {"store": 5, "product": "C9", "week": pd.Timestamp("2026-03-09"), "units": 2.0, "flag": False},
    {"store": 6, "product": "D4", "week": pd.Timestamp("2026-03-09"), "units": 7.0, "flag": False},
]


def _mixed_report() -> RunReport:
    """Every status once or more, an undefined value, asymmetric bounds, a nasty segment."""
    return _report(
        [
            _acc("pass", "*", "wape", 12.0, warn=25, fail=40, n_series=300, n_obs=1200),
            _acc("warn", "*", "bias_pct", -6.21, warn=5, fail=10, message="bias beyond warn"),
            _acc("fail", "tools", "bias_pct", 17.94, warn=(-5, 10), fail=(-10, 15)),
            _acc("fail", NASTY, "wape", 52.3, warn=25, fail=40, message=f"bad {NASTY}"),
            _acc("skipped", "pet-care", "mape", float("nan"), reason="zero_actual"),
            _acc("pass", "tools", "me", 12.5, warn=20, fail=30),
            _acc("pass", "only-lag-2", "wape", 30.0, lag=2),
            CheckResult(
                "coverage.missing_series",
                "fail",
                segment="*",
                value=4,
                warn=0,
                fail=1,
                unit="count",
                message="4 series have no forecast",
                examples=EXAMPLES,
            ),
            CheckResult(
                "output.negative_values",
                "waived",
                value=2,
                warn=0,
                fail=0,
                unit="count",
                message="returns are expected until 2026-04-01",
            ),
            CheckResult("coverage.horizon", "error", message="could not read the frame"),
        ]
    )


# --------------------------------------------------------------------------- wording


@pytest.mark.parametrize(
    ("measure", "value", "expected"),
    [
        ("bias_pct", 17.9, "under-forecast by 17.9 %"),
        ("bias_pct", 17.94, "under-forecast by 17.9 %"),
        ("bias_pct", -4.2, "over-forecast by 4.2 %"),
        ("bias_pct", 0.0, "no bias"),
        ("bias_pct", -0.0, "no bias"),
        ("me", 12.5, "under-forecast by 12.5 units on average"),
        ("me", -3.0, "over-forecast by 3 units on average"),
        ("tracking_signal", -4.2, "sustained over-forecast (tracking signal -4.2)"),
        ("tracking_signal", 5.0, "sustained under-forecast (tracking signal 5)"),
    ],
)
def test_bias_is_worded_with_the_sign_convention(measure: str, value: float, expected: str) -> None:
    # e = actual − forecast: positive = under-forecast (docs/measures.md).
    unit = {"bias_pct": "%", "me": "units", "tracking_signal": None}[measure]
    result = CheckResult("accuracy", "pass", measure=measure, value=value, unit=unit)
    assert describe_value(result) == expected


def test_plain_values_undefined_values_and_rounding() -> None:
    assert describe_value(_acc("pass", "*", "wape", 23.44)) == "23.4 %"
    assert describe_value(_acc("pass", "*", "mae", 1234.56)) == "1235 units"
    count = CheckResult("coverage.missing_series", "fail", value=3.0, unit="count")
    assert describe_value(count) == "3"
    undefined = _acc("skipped", "*", "mape", None, reason="zero_actual")
    assert describe_value(undefined) == "undefined (zero_actual)"
    assert describe_value(_acc("skipped", "*", "mape", float("nan"))) == "undefined"
    # unit inferred from the measure when a result does not state it
    assert describe_value(CheckResult("accuracy", "pass", measure="wape", value=5)) == "5 %"
    assert format_number(0.012345) == "0.0123"
    assert format_number(-0.0000001) == "0"
    assert format_number(-2.5) == "-2.5"
    assert format_number(99.96) == "100"


def test_threshold_wording() -> None:
    assert describe_threshold(_acc("pass", "*", "wape", 1, warn=25, fail=40)) == (
        "warn > 25 %, fail > 40 %"
    )
    assert describe_threshold(_acc("pass", "*", "bias_pct", 1, warn=5.0)) == "warn beyond ±5 %"
    asymmetric = _acc("pass", "*", "bias_pct", 1, warn=(-5, 10), fail=(-10.0, 20.0))
    assert describe_threshold(asymmetric) == "warn outside [-5, 10] %, fail outside [-10, 20] %"
    assert describe_threshold(_acc("pass", "*", "wape", 1)) == "no threshold"
    higher = CheckResult(
        "accuracy", "pass", measure="skill", value=1, warn=10, details={"direction": "higher"}
    )
    assert describe_threshold(higher) == "warn < 10"
    count = CheckResult("output.duplicate_rows", "pass", unit="count", warn=0, fail=0)
    assert describe_threshold(count) == "warn > 0, fail > 0"


def test_headline() -> None:
    results = (
        [_acc("fail", f"s{i}", "wape", 50.0) for i in range(3)]
        + [_acc("warn", f"s{i}", "wape", 30.0) for i in range(5)]
        + [_acc("pass", f"s{i}", "wape", 10.0) for i in range(120)]
    )
    assert headline(_report(results)) == (
        "FAIL — 3 failed, 5 warnings, 120 passed (cycle 2026-03-02, attempt 2)"
    )
    one_each = [
        _acc("warn", "a", "wape", 30.0),
        CheckResult("coverage.horizon", "error"),
        _acc("skipped", "b", "mape", None, reason="zero_actual"),
    ]
    assert headline(_report(one_each)) == (
        "FAIL — 1 error, 1 warning, 1 skipped (cycle 2026-03-02, attempt 2)"
    )
    passing = RunReport("r", None, None, [_acc("pass", "*", "wape", 1.0)], "t0", "t1")
    assert headline(passing) == "PASS — 1 passed"


def test_result_label() -> None:
    assert result_label(_acc("pass", "tools", "wape", 1.0)) == "wape[segment=tools, lag=1]"
    assert result_label(CheckResult("coverage.horizon", "pass")) == "coverage.horizon"


# --------------------------------------------------------------------------- JSON


def test_json_has_the_contract_keys_and_no_nan(tmp_path: Path) -> None:
    report = _mixed_report()
    path = tmp_path / "out" / "report.json"  # the folder is created
    write_json(report, path)
    text = path.read_text(encoding="utf-8")
    document = json.loads(text)
    assert "NaN" not in text and "Infinity" not in text
    assert document["status"] == "fail"
    assert document["run_id"] == "run-1"
    assert document["cycle"] == "2026-03-02"
    assert len(document["results"]) == len(report.results)
    for row in document["results"]:
        assert set(row) == CONTRACT_KEYS | EXTRA_KEYS
    by_segment = {(r["check"], r["segment"], r["measure"]): r for r in document["results"]}
    assert by_segment[("accuracy", "pet-care", "mape")]["value"] is None  # NaN → null
    assert by_segment[("accuracy", "tools", "bias_pct")]["warn"] == [-5.0, 10.0]
    assert by_segment[("accuracy", NASTY, "wape")]["segment"] == NASTY
    examples = by_segment[("coverage.missing_series", "*", None)]["examples"]
    assert examples[0] == {
        "store": 3,
        "product": "A17",
        "week": "2026-03-02T00:00:00",
        "units": None,
        "flag": True,
    }
    assert [r["status"] for r in document["results"]][:2] == ["fail", "fail"]  # failures first


def test_json_converts_numpy_and_pandas_values_in_details() -> None:
    result = CheckResult(
        "config.thresholds",
        "pass",
        details={
            "n": np.int32(7),
            "share": np.float32(0.5),
            "inf": float("inf"),
            "when": pd.Timestamp("2026-03-02 06:30", tz="UTC"),
            "missing": pd.NaT,
            "arr": np.array([1, 2]),
            np.int64(4): "numpy key",  # type: ignore[dict-item]  # a key that is not a str
        },
    )
    document = json.loads(jsonfile.dumps_report(_report([result])))
    assert document["results"][0]["details"] == {
        "n": 7,
        "share": 0.5,
        "inf": None,
        "when": "2026-03-02T06:30:00+00:00",
        "missing": None,
        "arr": [1, 2],
        "4": "numpy key",
    }


def test_json_write_is_atomic_and_deterministic(
    tmp_path: Path, monkeypatch: pytest.MonkeyPatch
) -> None:
    path = tmp_path / "report.json"
    path.write_text("old", encoding="utf-8")
    write_json(_mixed_report(), path)
    first = path.read_bytes()
    write_json(_mixed_report(), path)
    assert path.read_bytes() == first
    assert os.listdir(tmp_path) == ["report.json"]  # no temporary file left behind

    def broken_replace(src: str, dst: str) -> None:
        raise OSError("disk full")

    monkeypatch.setattr(jsonfile.os, "replace", broken_replace)
    with pytest.raises(OSError, match="disk full"):
        write_json(_report([]), path)
    assert path.read_bytes() == first  # the old file is untouched
    assert os.listdir(tmp_path) == ["report.json"]


# --------------------------------------------------------------------------- JUnit


def test_junit_structure_and_counts() -> None:
    report = _mixed_report()
    root = ET.fromstring(to_junit_xml(report))
    assert root.tag == "testsuites"
    assert root.get("tests") == str(len(report.results))
    assert root.get("failures") == "4"  # 3 fail + 1 error
    assert root.get("skipped") is None  # the JUnit XSD has no `skipped` on <testsuites>
    assert root.get("time") == "7.500"
    suites = {s.get("name"): s for s in root.findall("testsuite")}
    assert list(suites) == ["accuracy", "coverage", "output"]
    for name, suite in suites.items():
        cases = suite.findall("testcase")
        assert suite.get("tests") == str(len(cases))
        assert suite.get("failures") == str(sum(c.find("failure") is not None for c in cases))
        assert suite.get("skipped") == str(sum(c.find("skipped") is not None for c in cases))
        assert {c.get("classname") for c in cases} == {f"accuracy_checks.{name}"}
        names = [c.get("name") for c in cases]
        assert len(set(names)) == len(names)
    accuracy = suites["accuracy"]
    assert accuracy.get("tests") == "7"
    assert accuracy.get("failures") == "2"
    assert accuracy.get("skipped") == "1"


def test_junit_statuses_map_to_elements() -> None:
    root = ET.fromstring(to_junit_xml(_mixed_report()))
    cases = {c.get("name"): c for c in root.iter("testcase")}

    failure = cases["bias_pct[segment=tools, lag=1]"].find("failure")
    assert failure is not None and failure.get("type") == "fail"
    assert "under-forecast by 17.9 %" in (failure.get("message") or "")
    assert "fail outside [-10, 15] %" in (failure.text or "")

    error = cases["horizon"].find("failure")
    assert error is not None and error.get("type") == "error"
    assert "could not read the frame" in (error.get("message") or "")

    warned = cases["bias_pct[segment=*, lag=1]"]
    assert warned.find("failure") is None and warned.find("skipped") is None
    assert "over-forecast by 6.21 %" in (warned.findtext("system-out") or "")
    assert (warned.findtext("system-out") or "").startswith("WARNING: ")
    assert warned.find("properties") is None  # the JUnit XSD has no <properties> in <testcase>
    assert [c.tag for c in warned] == ["system-out"]

    skipped = cases["mape[segment=pet-care, lag=1]"].find("skipped")
    assert skipped is not None and skipped.get("message") == "zero_actual"

    waived = cases["negative_values"].find("skipped")
    assert waived is not None
    assert waived.get("message") == "waived: returns are expected until 2026-04-01"

    passed = cases["wape[segment=*, lag=1]"]
    assert list(passed) == []

    examples = cases["missing_series[segment=*]"].find("failure")
    assert examples is not None
    assert "store=5, product=C9" in (examples.text or "")
    assert "D4" not in (examples.text or "")  # only the first 3 examples


def test_junit_nasty_names_round_trip(tmp_path: Path) -> None:
    control = "bad\x01name"
    report = _report(
        [
            _acc("fail", NASTY, "wape", 52.3, message=NASTY),
            _acc("fail", NASTY, "wape", 53.0),  # same id twice: made unique
            _acc("pass", control, "wape", 1.0),
        ]
    )
    path = tmp_path / "junit.xml"
    write_junit(report, path)
    assert path.read_text(encoding="utf-8") == to_junit_xml(report)
    root = ET.parse(path).getroot()
    names = [c.get("name") for c in root.iter("testcase")]
    assert names == [
        f"wape[segment={NASTY}, lag=1]",
        f"wape[segment={NASTY}, lag=1] #2",
        "wape[segment=bad\ufffdname, lag=1]",
    ]
    failure = root.find("testsuite/testcase/failure")
    assert failure is not None
    assert f"segment: {NASTY}" in (failure.text or "")
    assert (failure.get("message") or "").endswith(NASTY)
    assert "<script>" not in path.read_text(encoding="utf-8")  # escaped in the raw file


def _junit_schema() -> xmlschema.XMLSchema:
    """The jenkins-junit XSD that pytest checks its own JUnit output against (vendored)."""
    return xmlschema.XMLSchema(JUNIT_XSD)


def _schema_errors(text: str) -> list[str]:
    return [f"{e.path}: {e.reason}" for e in _junit_schema().iter_errors(text)]


@pytest.mark.parametrize(
    "results",
    [
        pytest.param([], id="empty"),
        pytest.param([_acc("pass", "*", "wape", 12.0, warn=25, fail=40)], id="pass"),
        pytest.param([_acc("warn", "*", "bias_pct", -6.2, warn=5, fail=10, message="w")],
                     id="warn"),
        pytest.param([_acc("fail", "tools", "wape", 52.3, warn=25, fail=40)], id="fail"),
        pytest.param([_acc("skipped", "*", "mape", None, reason="zero_actual")], id="skipped"),
        pytest.param([CheckResult("output.negative_values", "waived", value=2, fail=0,
                                  message="returns until April")], id="waived"),
        pytest.param([CheckResult("coverage.horizon", "error", message="no frame")], id="error"),
        pytest.param(
            [
                _acc("fail", "bad\x01\x1b[31m\x7f", "wape", 52.3, message="ctl \x00\x08\x0c"),
                _acc("warn", "Gärten — 園芸 🌱", "bias_pct", 6.0, message="ümlaut ñ € 🌱"),
                _acc("fail", NASTY, "wape", 53.0, examples=[{"k": "a\x02b", "ü": "é"}]),
                CheckResult("output.invalid\x03", "skipped", reason="r\x04", message="m\ud800"),
            ],
            id="control-and-non-ascii",
        ),
        pytest.param(_mixed_report().results, id="mixed"),
    ],
)
def test_junit_is_valid_against_the_junit_xsd(results: list[CheckResult]) -> None:
    text = to_junit_xml(_report(results))
    assert _schema_errors(text) == []
    ET.fromstring(text)  # and well-formed for a plain parser


def test_junit_without_run_times_is_valid() -> None:
    report = RunReport("r", None, None, [_acc("pass", "*", "wape", 1.0)], "", "not a time")
    assert _schema_errors(to_junit_xml(report)) == []


@pytest.mark.parametrize(
    ("bias", "expected_code", "expected_tag"),
    [(0.97, 0, None), (0.93, 0, "system-out"), (0.7, 1, "failure")],
    ids=["pass", "warn", "fail"],
)
def test_cli_junit_is_valid_against_the_junit_xsd(
    make_project: Callable[..., Project], bias: float, expected_code: int,
    expected_tag: str | None,
) -> None:
    # bias 0.93: bias_pct 7 % is beyond warn 5 but not fail 10; 0.7 is beyond fail (conftest)
    earlier = pd.concat([forecast_frame(d, bias=bias) for d in EARLIER], ignore_index=True)
    project = make_project(earlier=earlier)
    path = project.root / "out" / "r.xml"
    code = main(["run", "--config", str(project.config), "-q", "--no-color", "--no-snapshot",
                 "--junit", str(path)])
    assert code == expected_code
    text = path.read_text(encoding="utf-8")
    assert _schema_errors(text) == []
    tags = {child.tag for case in ET.fromstring(text).iter("testcase") for child in case}
    assert "properties" not in tags
    if expected_tag is not None:
        assert expected_tag in tags


# --------------------------------------------------------------------------- Markdown


def _section(markdown: str, title: str) -> list[str]:
    lines = markdown.splitlines()
    start = lines.index(title)
    table: list[str] = []
    for line in lines[start + 2 :]:
        if not line.startswith("|"):
            break
        table.append(line)
    return table


def _unescaped_pipes(line: str) -> int:
    return len(re.findall(r"(?<!\\)\|", line))


def test_markdown_escapes_and_table_shapes(tmp_path: Path) -> None:
    report = _mixed_report()
    markdown = render_markdown(report)
    assert "<script>" not in markdown
    assert "&lt;script&gt;alert(1)&lt;/script&gt;\\|&amp;" in markdown
    assert markdown.splitlines()[2] == f"**{escape_cell(headline(report))}**"

    attention = _section(markdown, "### Failures and warnings")
    # header + separator + fail, fail, fail, error, warn, waived
    assert len(attention) == 2 + 6
    assert all(_unescaped_pipes(line) == 9 for line in attention)  # 8 columns everywhere
    statuses = [line.split(" | ")[0].strip("| *") for line in attention[2:]]
    assert statuses == ["FAIL", "FAIL", "FAIL", "ERROR", "WARN", "WAIVED"]
    assert "under-forecast by 17.9 %" in attention[2]

    by_segment = _section(markdown, "### Accuracy by segment (lag 1)")
    assert by_segment[0] == "| segment | me | bias_pct | mape | wape |"
    segments = [line.split(" | ")[0].removeprefix("| ") for line in by_segment[2:]]
    assert segments == ["\\*", "pet-care", "tools", escape_cell(NASTY)]  # lag 2 left out
    assert all(_unescaped_pipes(line) == 6 for line in by_segment)
    assert "| \\* | – | -6.21 % WARN | – | 12 % |" in by_segment
    assert "undefined (zero\\_actual)" not in markdown  # underscores are left readable
    assert "undefined (zero_actual)" in markdown

    assert "2 passed, 1 skipped (zero_actual: 1)." not in markdown
    assert "3 passed, 1 skipped (zero_actual: 1)." in markdown
    details = markdown[markdown.index("<details>") : markdown.index("</details>")]
    assert "| store | product | week | units | flag |" in details
    assert "| 5 | C9 | 2026-03-09 | 2 | false |" in details
    assert "D4" not in details  # first 3 examples only

    path = tmp_path / "summary.md"
    write_markdown(report, path)
    assert path.read_text(encoding="utf-8") == markdown == render_markdown(_mixed_report())


def test_markdown_cannot_be_broken_by_backticks_links_or_newlines() -> None:
    evil = "a`b` [link](http://example.invalid)\nnext | cell"
    markdown = render_markdown(_report([_acc("fail", evil, "wape", 50.0, message=evil)]))
    assert "`" not in markdown
    assert "[link]" not in markdown
    assert "\\[link\\](http://example.invalid)<br>next \\| cell" in markdown
    table = _section(markdown, "### Failures and warnings")
    assert len(table) == 3
    assert _unescaped_pipes(table[2]) == 9


def test_markdown_passing_report_has_no_attention_table() -> None:
    markdown = render_markdown(_report([_acc("pass", "*", "wape", 10.0)]))
    assert "### Failures and warnings" not in markdown
    assert "<details>" not in markdown
    assert "1 passed." in markdown
    assert markdown.startswith("## accuracy-checks: PASS\n")


# --------------------------------------------------------------------------- console


def _console_text(report: RunReport, *, verbose: bool = False) -> str:
    buffer = io.StringIO()
    render_console(report, file=buffer, color=False, verbose=verbose)
    return buffer.getvalue()


def test_console_lists_failures_before_warnings_and_ends_with_the_headline() -> None:
    report = _mixed_report()
    text = _console_text(report)
    lines = text.splitlines()
    assert lines[-1] == headline(report)
    first_fail = next(i for i, line in enumerate(lines) if line.startswith("FAIL "))
    first_error = next(i for i, line in enumerate(lines) if line.startswith("ERROR "))
    first_warn = next(i for i, line in enumerate(lines) if line.startswith("WARN "))
    waived = next(i for i, line in enumerate(lines) if line.startswith("WAIVED "))
    assert first_fail < first_error < first_warn < waived
    assert "PASS " not in text and "SKIPPED " not in text  # passes and skips are counted only
    assert "Not shown: 3 passed, 1 skipped (zero_actual: 1)." in lines
    assert "\x1b[" not in text  # no colour codes
    assert not re.search("[\u2500-\u257f]", text)  # no box-drawing characters in a log
    assert "x'<script>alert(1)</" in text  # data is printed as it is, not as markup
    assert "store=5, product=C9" in text and "D4" not in text  # first 3 examples
    assert text == _console_text(_mixed_report())  # deterministic


def test_console_verbose_lists_passes_and_color_adds_codes() -> None:
    report = _mixed_report()
    verbose = _console_text(report, verbose=True)
    assert any(line.startswith("PASS ") for line in verbose.splitlines())
    assert any(line.startswith("SKIPPED ") for line in verbose.splitlines())
    assert "Not shown" not in verbose
    buffer = io.StringIO()
    render_console(report, file=buffer, color=True)
    assert "\x1b[" in buffer.getvalue()


def test_console_does_not_read_data_as_markup() -> None:
    report = _report([_acc("fail", "[bold]tools[/bold]", "wape", 50.0, warn=25, fail=40)])
    text = _console_text(report)
    assert "[bold]tools[/bold]" in text
    assert "FAIL — 1 failed (cycle 2026-03-02, attempt 2)" in text


def test_console_passing_report_is_one_count_line_and_the_headline() -> None:
    report = _report([_acc("pass", "*", "wape", 10.0), _acc("pass", "a", "wape", 10.0)])
    assert _console_text(report).splitlines() == [
        "2 passed.",
        "",
        "PASS — 2 passed (cycle 2026-03-02, attempt 2)",
    ]


def test_examples_that_are_not_mappings_are_shown_as_text() -> None:
    result = CheckResult("output.issue_dates", "fail", value=1, fail=0, examples=["row 7"])
    report = _report([result])
    assert "    - row 7" in _console_text(report).splitlines()
    assert "| value |" in render_markdown(report)
    failure = ET.fromstring(to_junit_xml(report)).find("testsuite/testcase/failure")
    assert failure is not None and "  - row 7" in (failure.text or "")


def test_unit_and_direction_come_from_the_measure_registry() -> None:
    # mae is registered in data units, me as centred (accuracy_checks/measures/registry.py)
    mae = CheckResult("accuracy", "pass", measure="mae", value=4.0, warn=5.0)
    assert describe_value(mae) == "4 units"
    assert describe_threshold(mae) == "warn > 5 units"
    me = CheckResult("accuracy", "pass", measure="me", value=-4.0, warn=5.0)
    assert describe_value(me) == "over-forecast by 4 units on average"
    assert describe_threshold(me) == "warn beyond ±5 units"
