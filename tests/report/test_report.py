"""The HTML report: content of a multi-cycle store, text alternatives, escaping and the
Content-Security-Policy, waivers and drift limits, --since, size at 100 segments × 52 cycles,
and the CLI (`report`, `run --report`)."""

from __future__ import annotations

import base64
import hashlib
import re
import uuid
from collections.abc import Callable
from datetime import UTC, date, datetime
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd
import pytest

from accuracy_checks import load_config
from accuracy_checks.cli.main import main
from accuracy_checks.report import (
    ReportData,
    build_report,
    load_report_data,
    render_report,
    write_report,
)
from accuracy_checks.report.data import FIGURE_COLUMNS
from accuracy_checks.results import CheckResult, RunReport
from accuracy_checks.store import open_store
from tests.support.project import Project
from tests.support.report import XSS, BuiltStore, build_store, cycle_label, segment_names

NOW = datetime(2026, 3, 2, 12, tzinfo=UTC)


@pytest.fixture(scope="module")
def built(tmp_path_factory: pytest.TempPathFactory) -> BuiltStore:
    """5 segments (the last named like a script) × 12 weekly cycles; seg-001 steps up from
    cycle 8; seg-001's bias is waived from cycle 9 on."""
    return build_store(tmp_path_factory.mktemp("report"), n_segments=5, n_cycles=12, xss=True,
                       step_from=8, waive=("seg-001", "bias_pct", 9))


@pytest.fixture(scope="module")
def page(built: BuiltStore) -> tuple[str, int]:
    with open_store(built.url) as store:
        rendered = build_report(store, now=NOW)
    return rendered.html, rendered.charts


def section(html: str, name: str) -> str:
    found = re.search(rf'<section id="{name}".*?</section>', html, re.S)
    assert found, name
    return found.group(0)


def test_the_latest_verdict_and_every_section(built: BuiltStore, page: tuple[str, int]) -> None:
    html, _ = page
    latest = built.reports[-1]
    verdict = section(html, "verdict")
    assert f'<div class="word">{latest.status.upper()}</div>' in verdict
    assert f"{built.cycles[-1]} (attempt 1)" in verdict and latest.run_id in verdict
    assert "nightly-11" in verdict
    for name in ("measures", "bias", "trends", "coverage", "drift", "timeline", "waivers",
                 "worst"):
        assert f'<section id="{name}"' in html
    assert f"12 cycle(s) from {built.cycles[0]} to {built.cycles[-1]}" in html
    # bias direction is worded, never a bare sign
    bias = section(html, "bias")
    assert "under-forecast by" in bias and "over-forecast by" in bias


def test_every_chart_has_a_title_a_description_and_a_data_table(page: tuple[str, int]) -> None:
    html, charts = page
    svgs = re.findall(r'<svg class="chart".*?</svg>', html, re.S)
    # measures: (wape, bias %) × lags 1, 4; bias: 2 lags; trends: 6 segments × 2; timeline: 1
    assert len(svgs) == charts == 4 + 2 + 12 + 1
    for svg in svgs:
        uid = re.search(r'aria-labelledby="(c\d+)-t c\d+-d"', svg)
        assert uid and 'role="img"' in svg
        assert re.search(rf'<title id="{uid.group(1)}-t">[^<]+</title>', svg)
        assert re.search(rf'<desc id="{uid.group(1)}-d">[^<]+</desc>', svg)
    figures = re.findall(r"<figure.*?</figure>", html, re.S)
    assert len(figures) == charts
    assert all("Data table (text version of the chart)</summary><table>" in f for f in figures)


def test_data_is_escaped_and_the_page_runs_no_script(page: tuple[str, int]) -> None:
    html, _ = page
    assert XSS not in html
    assert "&lt;script&gt;alert(1)&lt;/script&gt;" in html
    assert re.search(r"<script", html, re.I) is None
    assert re.search(r"\son[a-z]+\s*=", html) is None  # no event handler attribute
    csp = re.search(r'<meta http-equiv="Content-Security-Policy" content="([^"]+)">', html)
    assert csp is not None
    policy = csp.group(1).replace("&#x27;", "'")
    assert "default-src 'none'" in policy and "script-src 'none'" in policy
    # the only style allowed is the page's own, by its SHA-256
    style = re.search(r"<style>(.*?)</style>", html, re.S)
    assert style is not None
    digest = base64.b64encode(hashlib.sha256(style.group(1).encode()).digest()).decode()
    assert f"style-src 'sha256-{digest}'" in policy
    assert ' style="' not in html  # inline style attributes would be blocked
    # self-contained: nothing is fetched
    assert re.search(r'(src|href)="(?!#)', html) is None and "@import" not in html


def test_trends_show_threshold_zones_drift_limits_and_signals(page: tuple[str, int]) -> None:
    html, _ = page
    trends = section(html, "trends")
    stepped = re.search(r"<h3>seg-001</h3>.*?(?=<h3>)", trends, re.S)
    assert stepped is not None
    charts = re.findall(r'<svg class="chart".*?</svg>', stepped.group(0), re.S)
    wape = next(c for c in charts if "WAPE" in c)
    assert 'fill="url(#ac-warn-zone)"' in wape and 'fill="url(#ac-fail-zone)"' in wape
    assert 'class="limit"' in wape and 'class="ring"' in wape  # drift limits and a signal
    assert 'class="lag0"' in wape and 'class="lag1"' in wape  # one line per lag
    table = re.search(r"WAPE % of seg-001.*?</table>", stepped.group(0), re.S)
    assert table is not None and "BEYOND" in table.group(0)
    # a steady segment has limits but no ring
    steady = re.search(r"<h3>seg-003</h3>.*?</div>", trends, re.S)
    assert steady is not None and 'class="limit"' in steady.group(0)


def test_waivers_are_listed_and_drawn_on_the_timeline(built: BuiltStore,
                                                      page: tuple[str, int]) -> None:
    html, _ = page
    waivers = section(html, "waivers")
    assert "#1" in waivers and "known change in seg-001" in waivers and ">ana<" in waivers
    timeline = section(html, "timeline")
    bars = re.findall(r'class="waiver-bar"><title>([^<]+)</title>', timeline)
    assert bars and all(b.startswith("waiver #1 by ana until 2099-12-31") for b in bars)
    waived = [r for r in built.reports[-1].results if r.status == "waived"]
    assert waived and all(r.segment == "seg-001" and r.measure == "bias_pct" for r in waived)
    assert "verdict of the run (last attempt)" in timeline


def test_drift_results_and_worst_series(built: BuiltStore, page: tuple[str, int]) -> None:
    html, _ = page
    drift = section(html, "drift")
    flagged = [r for r in built.reports[-1].results
               if r.check.startswith("drift.") and r.status in ("warn", "fail", "waived")]
    assert flagged
    for r in flagged:
        assert r.message.split(":")[0].replace("<", "&lt;").replace(">", "&gt;") in drift
    worst = section(html, "worst")
    assert "P0007" in worst and "share_of_bias_pct" in worst and "under-forecast" in worst


def test_since_keeps_the_cycles_issued_from_that_date(built: BuiltStore) -> None:
    with open_store(built.url) as store:
        rendered = build_report(store, since=date.fromisoformat(built.cycles[8]), now=NOW)
        nothing = build_report(store, since=date(2030, 1, 1), now=NOW)
    assert rendered.cycles == 4
    assert f"4 cycle(s) from {built.cycles[8]} to {built.cycles[-1]}" in rendered.html
    assert nothing.charts == 0 and "No run is recorded in this store for cycles issued on or " \
        "after 2030-01-01" in nothing.html


def test_report_of_an_empty_store_says_so(tmp_path: Path) -> None:
    url = f"sqlite:///{tmp_path / 'audit.db'}"
    with open_store(url) as store:
        rendered = build_report(store, now=NOW)
    assert rendered.charts == 0 and "No run is recorded in this store" in rendered.html


def _record(store: Any, cycle: str, wape: float, started: str, label: str) -> RunReport:
    """One run of ``cycle`` with one WAPE figure (warn 30, fail 45): 10 passes, 99 fails."""
    status = "fail" if wape > 45 else "pass"
    result = CheckResult("accuracy", status, segment="*", lag=1, measure="wape", value=wape,
                         warn=30.0, fail=45.0, unit="%", n_series=4, n_obs=16,
                         message=f"WAPE {wape:g} % of all series at lag 1")
    report = RunReport(run_id=uuid.uuid4().hex, cycle=cycle, attempt=None, results=[result],
                       started_at=started, finished_at=started, label=label)
    store.record_run(report)
    return report


def test_the_headline_is_the_latest_cycles_last_attempt_not_a_later_rerun(
        tmp_path: Path) -> None:
    # cycle A passes, then the latest cycle B passes, then A is re-run and fails: the
    # headline stays B's verdict, and A's re-run is listed under it
    url = f"sqlite:///{tmp_path / 'audit.db'}"
    a, b = "2026-02-23", "2026-03-02"
    with open_store(url) as store:
        _record(store, a, 10.0, "2026-02-23T06:00:00+00:00", "nightly A")
        latest = _record(store, b, 12.0, "2026-03-02T06:00:00+00:00", "nightly B")
        rerun = _record(store, a, 99.0, "2026-03-02T09:30:00+00:00", "re-run of A")
        data = load_report_data(store, now=NOW)
    assert rerun.attempt == 2 and rerun.status == "fail"
    assert data.latest is not None and data.latest["run_id"] == latest.run_id
    assert [r.value for r in data.latest_results] == [12.0]
    assert [r["run_id"] for r in data.later_runs] == [rerun.run_id]
    assert data.cycle_runs[a]["run_id"] == rerun.run_id  # A's trend point is its last attempt

    out = tmp_path / "report.html"  # through the CLI
    assert main(["report", "--store", url, "--out", str(out)]) == 0
    html = out.read_text(encoding="utf-8")
    verdict = section(html, "verdict")
    assert '<div class="word">PASS</div>' in verdict and "FAIL</div>" not in verdict
    assert f"{b} (attempt 1)" in verdict and latest.run_id in verdict
    assert "<title>Forecast accuracy report: PASS — cycle 2026-03-02</title>" in html
    listed = re.search(r"Recorded after this run.*?</table>", verdict, re.S)
    assert listed is not None
    assert (f"<td>{a}</td><td>2</td><td>FAIL</td>" in listed.group(0)
            and rerun.run_id in listed.group(0) and "re-run of A" in listed.group(0))
    measures = section(html, "measures")
    assert "12 %" in measures and "99" not in measures  # the figures are B's


def synthetic(n_segments: int, n_cycles: int) -> ReportData:
    """ReportData as the store would give it for WAPE and bias % at lags 1 and 4 with drift
    limits, built with numpy (the store round trip is tested above)."""
    rng = np.random.default_rng(5)
    segments = ["*", *segment_names(n_segments, xss=True)]
    cycles = [cycle_label(k) for k in range(n_cycles)]
    rows = []
    for measure, warn, fail, base in (("wape", 30.0, 45.0, 22.0), ("bias_pct", 5.0, 10.0, 0.0)):
        for lag in (1, 4):
            shape = (len(segments), n_cycles)
            value = base + rng.normal(0, 2.0, size=shape)
            status = np.where(np.abs(value) > fail, "fail",
                              np.where(np.abs(value) > warn, "warn", "pass"))
            for i, seg in enumerate(segments):
                for k, cyc in enumerate(cycles):
                    rows.append((cyc, "accuracy", seg, measure, lag, "", status[i, k],
                                 value[i, k], "%", warn, fail, None, {}))
                    if k >= 8:
                        m = value[i, k - 8:k].mean()
                        s = value[i, k - 8:k].std(ddof=1)
                        rows.append((cyc, "drift.control_limit", seg, measure, lag, "", "pass",
                                     value[i, k], "%", m + 3 * s, None, None,
                                     {"lower": m - 3 * s, "upper": m + 3 * s,
                                      "signal": False}))
    figures = pd.DataFrame(rows, columns=list(FIGURE_COLUMNS))
    figures["lag"] = figures["lag"].astype("Int64")
    figures["waiver_id"] = figures["waiver_id"].astype("Int64")
    last = figures.loc[figures["cycle"] == cycles[-1]]
    latest = [CheckResult(r.check, r.status, segment=r.segment, lag=int(r.lag),
                          measure=r.measure, value=float(r.value), warn=r.warn, fail=r.fail,
                          unit="%", details=r.details) for r in last.itertuples()]
    runs = [{"run_id": f"r{k}", "cycle": c, "attempt": 1, "status": "pass",
             "started_at": f"{c}T06:00:00+00:00", "recorded_at": f"{c}T06:01:00+00:00"}
            for k, c in enumerate(cycles)]
    return ReportData(store_url="sqlite:///synthetic.db", generated_at=NOW, since=None,
                      runs=runs, cycles=cycles, cycle_runs={r["cycle"]: r for r in runs},
                      latest=runs[-1], latest_results=latest, figures=figures)


def test_100_segments_by_52_cycles_stays_a_few_megabytes() -> None:
    # The render time is measured in the report's figures (see README), not asserted here.
    rendered = render_report(synthetic(100, 52))
    assert rendered.cycles == 52 and rendered.segments == 101
    assert rendered.charts == 4 + 2 + 101 * 2 + 1
    assert rendered.bytes < 5_000_000


# ----------------------------------------------------------------------------------- CLI


def test_cli_report_writes_the_file_and_refuses_a_missing_store(
        built: BuiltStore, tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    out = tmp_path / "r" / "report.html"
    assert main(["report", "--store", built.url, "--out", str(out),
                 "--since", built.cycles[6]]) == 0
    said = capsys.readouterr().out
    assert f"Wrote {out}: 6 cycle(s), 6 segment(s) charted" in said
    assert out.read_text(encoding="utf-8").startswith("<!DOCTYPE html>")
    missing = f"sqlite:///{tmp_path / 'none' / 'audit.db'}"
    assert main(["report", "--store", missing, "--out", str(tmp_path / "x.html")]) == 2
    err = capsys.readouterr().err
    assert "No run recorded yet" in err and not (tmp_path / "x.html").exists()
    with pytest.raises(SystemExit) as bad:
        main(["report", "--store", built.url, "--out", str(out), "--since", "2025-13-01"])
    assert bad.value.code == 2


def test_run_writes_the_report_with_this_run_in_it(make_project: Callable[..., Project],
                                                  tmp_path: Path) -> None:
    project = make_project()
    out = tmp_path / "gate.html"
    code = main(["run", "--config", str(project.config), "--report", str(out), "-q",
                 "--json", str(tmp_path / "r.json")])
    assert code in (0, 1)
    html = out.read_text(encoding="utf-8")
    import json

    run_id = json.loads((tmp_path / "r.json").read_text())["run_id"]
    assert run_id in section(html, "verdict")
    written = write_report(load_config(project.config), tmp_path / "again.html", now=NOW)
    assert written.cycles == 1 and written.charts >= 4
