"""The demo's story: the gate run on each cycle of the invented scenario, in order, narrated.

``accuracy-checks demo`` calls :func:`run_demo`: it writes the scenario
(:func:`~accuracy_checks.demo.scenario.generate_scenario`) into a folder, runs
:func:`~accuracy_checks.engine.run_checks` on each weekly cycle with the actuals known on its
issue date, the way a weekly job would, and prints each verdict with its top findings
(:func:`~accuracy_checks.outputs.findings.top_findings`), then the planted problems and what
was written where. Light: it needs neither Prefect nor Great Expectations.
"""

from __future__ import annotations

import datetime as dt
from collections.abc import Callable
from pathlib import Path

from accuracy_checks.demo.scenario import (
    EARLIER_CYCLES,
    Scenario,
    describe_planted,
    generate_scenario,
    prepare_folder,
)
from accuracy_checks.demo.world import HORIZON, N_STORES, SEGMENTS
from accuracy_checks.engine import run_checks
from accuracy_checks.measures.catalogue import load_config
from accuracy_checks.outputs.findings import top_findings
from accuracy_checks.results import RunReport

__all__ = ["run_demo"]


def _count_line(report: RunReport) -> str:
    c = report.counts()
    parts = [f"{c['pass']} passed", f"{c['warn']} warned", f"{c['fail'] + c['error']} failed"]
    if c["skipped"]:
        parts.append(f"{c['skipped']} skipped")
    if c["waived"]:
        parts.append(f"{c['waived']} waived")
    return ", ".join(parts)


def _intro(out_dir: Path, cycles: int) -> str:
    segments = ", ".join(s.name for s in SEGMENTS)
    return (
        "accuracy-checks demo: invented data, no real company, store or person.\n"
        f"It writes a fictional chain of {N_STORES} garden centres to {out_dir}:\n"
        f"weekly unit sales of about 300 products in {len(SEGMENTS)} segments\n"
        f"({segments}),\n"
        f"{EARLIER_CYCLES} earlier forecast cycles and {cycles} new weekly cycles of "
        f"{HORIZON}-week forecasts.\n"
        "Then it runs the gate once per cycle, in issue order, as a weekly job would. Each run\n"
        "checks that cycle's forecast file for missing series and weeks, measures the earlier\n"
        "cycles' forecasts against the actuals known that Monday, and judges the figures\n"
        "against the thresholds in accuracy-checks.yaml. A few problems are planted.\n"
    )


def _outro(scenario: Scenario) -> str:
    out = scenario.out_dir
    last = scenario.forecast_paths[-1].relative_to(out).as_posix()
    return (
        f"What was written to {out}:\n"
        "  data/actuals.csv           weekly units sold, about two years up to the final cycle\n"
        "  data/actuals/              the actuals as known on each cycle's issue date\n"
        "  data/forecasts/            one forecast file per cycle (13 weeks, p10/p90)\n"
        "  data/earlier_forecasts.csv the four cycles before the demo (the history)\n"
        "  data/products.csv          the segment (category) of each product; stores.csv\n"
        "  accuracy-checks.yaml       the config: inputs, horizon, lags, thresholds per segment\n"
        "  .accuracy_checks/archive/  a snapshot of every checked forecast, by cycle; later runs\n"
        "                             measure these against the actuals that arrive\n"
        + (
            "  .accuracy_checks/audit.db  the audit record of every run and result\n"
            if (out / ".accuracy_checks" / "audit.db").exists()
            else ""
        )
        + "Run one check by hand (a re-run is recorded as a new attempt of its cycle):\n"
        f"  cd {out}\n"
        "  accuracy-checks run --config accuracy-checks.yaml\n"
        f"  accuracy-checks run --config accuracy-checks.yaml --forecast {last} \\\n"
        "      --actuals data/actuals.csv --json result.json --markdown result.md\n"
        "The demo itself exits 0: the failing final cycle is part of the show.\n"
    )


def run_demo(
    out_dir: Path,
    *,
    cycles: int = 6,
    seed: int = 7,
    echo: Callable[[str], None] = print,
) -> list[RunReport]:
    """Generate the scenario in ``out_dir``, run the gate on each cycle in order, narrate it.

    Each cycle is checked with its own forecast file and the actuals known on its issue date
    (:attr:`Scenario.cycle_actuals_paths`), so no cycle sees later actuals. Returns the run
    reports in cycle order. An earlier demo's archive and audit store in ``out_dir`` are
    removed first; a non-empty folder that is not an earlier demo is refused
    (:class:`~accuracy_checks.errors.UsageError`).
    """
    out_dir = Path(out_dir).resolve()  # the narration says where, wherever it runs from
    prepare_folder(out_dir, hint="Pass a new or empty folder with --out.")
    echo(_intro(out_dir, cycles))
    scenario = generate_scenario(out_dir, cycles=cycles, seed=seed)
    echo(
        f"Generated {scenario.n_series} series (store × product); cycles issued "
        f"{scenario.cycle_dates[0]} to {scenario.cycle_dates[-1]}.\n"
    )
    config = load_config(scenario.config_path)
    reports: list[RunReport] = []
    for k, (day, forecast, actuals) in enumerate(
        zip(
            scenario.cycle_dates,
            scenario.forecast_paths,
            scenario.cycle_actuals_paths,
            strict=True,
        ),
        start=1,
    ):
        report = run_checks(config, forecast_path=forecast, actuals_path=actuals)
        reports.append(report)
        echo(_cycle_block(k, cycles, day, report))
    planted = "".join(f"  - {line}\n" for line in describe_planted(scenario))
    echo(f"The planted problems were:\n{planted}")
    echo(_outro(scenario))
    return reports


def _cycle_block(k: int, cycles: int, day: dt.date, report: RunReport) -> str:
    verdict = {"pass": "PASS", "warn": "WARN", "fail": "FAIL"}[report.status]
    lines = [
        f"Cycle {k}/{cycles}, issued Monday {day.isoformat()}: {verdict}  ({_count_line(report)})"
    ]
    findings = top_findings(report)
    if findings:
        lines += [f"  - {f}" for f in findings]
    else:
        lines.append("  - no warnings or failures")
    return "\n".join(lines) + "\n"
