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

from collections.abc import Callable
from dataclasses import dataclass
from pathlib import Path

from prefect.states import State

from accuracy_checks.demo.scenario import Scenario, generate_scenario, prepare_folder
from accuracy_checks.errors import GateFailed

__all__ = ["LATEST_CONFIG", "DemoNight", "RunNight", "latest_config_text", "run_flow_demo"]

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
        lines.append("  Published: nothing. The flow run failed; the forecast is kept in the "
                     "archive's snapshot of its cycle.")
        return lines
    return [f"  The flow run ended {state.name}: {state.message}"]


#: runs the nightly flow once on a config, publishing into a folder: (exit code, final state)
RunNight = Callable[[Path, Path], tuple[int, State]]


def run_flow_demo(out_dir: Path, run_night: RunNight, *, server_note: str | None = None,
                  echo: Callable[[str], None] = print) -> list[DemoNight]:
    """Generate the scenario in ``out_dir`` and run the nightly flow on two nights (module
    docstring) with ``run_night`` (``nightly_forecast.run_nightly``), narrating each; returns
    both nights. ``server_note`` is said first (Prefect's temporary server). A non-empty
    folder that is not an earlier demo is refused (``UsageError``)."""
    out_dir = Path(out_dir)
    prepare_folder(out_dir, run_state=(".accuracy_checks", PUBLISHED))
    echo("accuracy-checks: the nightly forecast flow (Prefect) on invented data: a fictional "
         f"chain of garden centres, written to {out_dir}.\n"
         "Each night the flow forecasts every active store × product for the next 13 weeks "
         "(seasonal naive),\ngates the forecast (coverage, output checks, accuracy of the "
         "earlier cycles against the actuals)\nand publishes it only when the gate did not "
         "fail. Every run is recorded in the audit store.")
    if server_note:
        echo(server_note)
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
        code, state = run_night(config, publish)
        night = DemoNight(title, config, code, state)
        nights.append(night)
        echo("\n".join(_verdict_lines(night, out_dir)) + "\n")
    echo(
        f"What was written to {out_dir}:\n"
        f"  accuracy-checks.yaml, {LATEST_CONFIG}  the configs of night 1 and night 2\n"
        "  data/                          invented actuals, earlier cycles, products, stores\n"
        f"  {PUBLISHED}/                     forecasts that passed the gate (night 1 only)\n"
        "  .accuracy_checks/archive/      snapshots of every gated forecast, by cycle "
        "(published or not)\n"
        "  .accuracy_checks/audit.db      the audit record of both runs\n"
        "Each gate run also left two Prefect artifacts (accuracy-gate-findings, a table, and "
        "accuracy-gate-summary, Markdown);\nthe temporary server is gone now: start "
        "`prefect server start` and set PREFECT_API_URL to keep them and browse them.\n"
        f"Audit trail: accuracy-checks history --config {out_dir / LATEST_CONFIG}\n"
        "The demo itself exits 0: the stopped night is part of the show."
    )
    return nights
