"""The nightly flow on the invented garden-centre demo (``nightly_forecast.py --demo DIR``).

Two nights of the job, each one flow run (forecast → gate → publish):

1. the Monday of the first demo cycle: actuals up to the week before, the four earlier cycles
   of the history file measured against them. The gate warns (small segments' lag-4 bias)
   and the forecast is published;
2. the Monday of the final demo cycle: all actuals, and the job's earlier cycles (the history
   file and the demo's weekly forecasts, where pet-care runs 18 % low from the third cycle
   on). The gate fails on the pet-care bias and nothing is published.

Nothing here is real: no company, store or person (see :mod:`accuracy_checks.demo.scenario`).
"""

from __future__ import annotations

import shutil
from collections.abc import Callable
from dataclasses import dataclass
from pathlib import Path

from prefect.states import State

from accuracy_checks.demo.scenario import CONFIG_MARKER, Scenario, generate_scenario
from accuracy_checks.errors import GateFailed, UsageError

__all__ = ["LATEST_CONFIG", "DemoNight", "latest_config_text", "run_flow_demo"]

#: the second night's config, written next to the generated one
LATEST_CONFIG = "nightly-latest.yaml"
PUBLISHED = "published"


@dataclass(frozen=True)
class DemoNight:
    """One demo night: its config, exit code and final flow state."""

    title: str
    config: Path
    code: int
    state: State


def latest_config_text(scenario: Scenario) -> str:
    """The generated config, pointed at the final demo cycle: its forecast file (which the
    flow replaces with its own), every actual, and the earlier cycles (the history file and
    every demo forecast before the final one)."""
    out = scenario.out_dir

    def rel(path: Path) -> str:
        return path.relative_to(out).as_posix()

    text = scenario.config_path.read_text(encoding="utf-8")
    history = [scenario.history_path, *scenario.forecast_paths[:-1]]
    listed = ", ".join(rel(p) for p in history)
    text = text.replace(f"path: {rel(scenario.forecast_paths[0])}",
                        f"path: {rel(scenario.forecast_paths[-1])}")
    text = text.replace(f"path: {rel(scenario.cycle_actuals_paths[0])}",
                        f"path: {rel(scenario.actuals_path)}")
    text = text.replace(f"history: {rel(scenario.history_path)}", f"history: [{listed}]")
    return text


def _prepare(out_dir: Path) -> None:
    if out_dir.exists() and not out_dir.is_dir():
        raise UsageError(f"Demo output {out_dir} exists and is not a folder; pass a folder path.")
    if out_dir.is_dir() and any(out_dir.iterdir()):
        config = out_dir / "accuracy-checks.yaml"
        try:
            ours = config.read_text(encoding="utf-8").startswith(CONFIG_MARKER)
        except OSError:
            ours = False
        if not ours:
            raise UsageError(
                f"Demo output folder {out_dir} is not empty and does not hold an earlier demo "
                "(no accuracy-checks.yaml written by the demo). Pass a new or empty folder."
            )
        for name in (".accuracy_checks", PUBLISHED):  # an earlier demo's run state
            if (out_dir / name).is_dir():
                shutil.rmtree(out_dir / name)


def _verdict_lines(night: DemoNight, out_dir: Path) -> list[str]:
    state = night.state
    if state.is_completed():
        summary = state.result()
        lines = [f"  Gate: {summary['headline']}"]
        lines += [f"    - {f}" for f in summary["findings"]]
        published = Path(summary["published"])
        where = published.relative_to(out_dir) if published.is_relative_to(out_dir) \
            else published
        lines.append(f"  Published: {where}")
        return lines
    error = state.result(raise_on_failure=False)
    if isinstance(error, GateFailed):
        lines = [f"  Gate: {error.summary.get('headline', 'FAIL')}"]
        lines += [f"    - {f}" for f in error.summary.get("findings", [])]
        lines.append("  Published: nothing. The flow run failed, so the forecast stays in the "
                     "staging folder.")
        return lines
    return [f"  The flow run ended {state.name}: {state.message}"]


def run_flow_demo(out_dir: Path, *, echo: Callable[[str], None] = print) -> list[DemoNight]:
    """Generate the scenario in ``out_dir`` and run the nightly flow on two nights (module
    docstring), narrating each; returns both nights. A non-empty folder that is not an
    earlier demo is refused (``UsageError``)."""
    from flows.nightly_forecast import SERVER_NOTE, needs_temporary_server, run_nightly

    out_dir = Path(out_dir)
    _prepare(out_dir)
    echo("accuracy-checks: the nightly forecast flow (Prefect) on invented data: a fictional "
         f"chain of garden centres, written to {out_dir}.\n"
         "Each night the flow forecasts every active store × product for the next 13 weeks "
         "(seasonal naive),\ngates the forecast (coverage, output checks, accuracy of the "
         "earlier cycles against the actuals)\nand publishes it only when the gate did not "
         "fail. Every run is recorded in the audit store.")
    if needs_temporary_server():
        echo(SERVER_NOTE)
    echo("")
    scenario = generate_scenario(out_dir)
    latest = out_dir / LATEST_CONFIG
    latest.write_text(latest_config_text(scenario), encoding="utf-8")
    publish = out_dir / PUBLISHED
    first, final = scenario.cycle_dates[0], scenario.cycle_dates[-1]
    plan = [
        (f"Night 1: the cycle of Monday {first} (the four earlier cycles measured against the "
         "actuals so far)", scenario.config_path),
        (f"Night 2: the cycle of Monday {final} (the job's recent cycles measured against the "
         "actuals so far)", latest),
    ]
    nights: list[DemoNight] = []
    for title, config in plan:
        echo(title)
        code, state = run_nightly(config, publish)
        night = DemoNight(title, config, code, state)
        nights.append(night)
        echo("\n".join(_verdict_lines(night, out_dir)) + "\n")
    echo(
        f"What was written to {out_dir}:\n"
        f"  accuracy-checks.yaml, {LATEST_CONFIG}  the configs of night 1 and night 2\n"
        "  data/                          invented actuals, earlier cycles, products, stores\n"
        f"  {PUBLISHED}/                     forecasts that passed the gate (night 1 only)\n"
        "  .accuracy_checks/staging/      every forecast the flow made, published or not\n"
        "  .accuracy_checks/archive/      snapshots of every gated forecast, by cycle\n"
        "  .accuracy_checks/audit.db      the audit record of both runs\n"
        "Each gate run also left two Prefect artifacts (accuracy-gate-findings, a table, and "
        "accuracy-gate-summary, Markdown);\nthe temporary server is gone now: start "
        "`prefect server start` and set PREFECT_API_URL to keep them and browse them.\n"
        f"Audit trail: accuracy-checks history --config {out_dir / LATEST_CONFIG}\n"
        "The demo itself exits 0: the stopped night is part of the show."
    )
    return nights
