"""The nightly forecast job as a Prefect flow, gated by accuracy-checks.

Steps (tasks), in one flow run:

1. ``make-forecast``: read the actuals and the earlier cycles named by the config, forecast
   every active series for the next cycle (seasonal naive, :mod:`flows.forecasting`) and
   return it as a DataFrame with the config's column names (nothing is written);
2. ``accuracy-gate``: :data:`accuracy_checks.prefect.check_forecast` on that frame, in memory
   (``forecast=``, validated like a file): the output, coverage and accuracy checks, the
   snapshot in the archive and the audit record (on every verdict), the artifacts;
3. ``publish-forecast``: write the frame into the publish folder, atomically; it waits for
   the gate and never runs when the gate failed (the stopped forecast stays in the archive's
   snapshot of its cycle).

The flow returns the failed task's state when a step failed (a flow that returns ``None``
would end ``Completed`` even then), so a failed gate fails the flow run, and calling the flow
raises ``GateFailed`` (or ``UsageError`` for an unusable config or input).

Run it::

    python flows/nightly_forecast.py --config accuracy-checks.yaml --publish-dir published/
    python flows/nightly_forecast.py --demo demo-run      # the invented garden-centre demo
    python flows/nightly_forecast.py --config … --publish-dir … --serve "30 2 * * *"

Exit codes as the CLI's: 0 published (pass or warnings), 1 the gate failed (nothing
published), 2 unusable config or input (nothing published), 3 anything else.
"""

from __future__ import annotations

import argparse
import os
import sys
from collections.abc import Callable, Sequence
from pathlib import Path
from typing import Any, Literal

if __package__ in (None, ""):  # run as a script: make the repository's packages importable
    sys.path.insert(0, str(Path(__file__).resolve().parent.parent))
# Prefect's temporary server would otherwise send usage analytics (and its heartbeat can log
# "database is locked" on SQLite); an explicit setting of the user's wins.
os.environ.setdefault("PREFECT_SERVER_ANALYTICS_ENABLED", "false")

import pandas as pd
from prefect import flow, get_run_logger, task
from prefect.cache_policies import NO_CACHE
from prefect.futures import wait
from prefect.states import State

from accuracy_checks.errors import GateFailed, UsageError
from accuracy_checks.measures.catalogue import load_config
from accuracy_checks.outputs.wording import headline
from accuracy_checks.prefect import check_forecast, cli_message, first_failure, usage_failure
from accuracy_checks.prefect.gate import findings
from flows.demo_nightly import run_flow_demo
from flows.forecasting import forecast_next_cycle, write_frame

__all__ = ["main", "make_forecast", "nightly_forecast", "publish_forecast", "run_nightly"]

EXIT_PUBLISHED, EXIT_GATE_FAILED, EXIT_USAGE, EXIT_OTHER = 0, 1, 2, 3
#: what the first run of a flow without a configured Prefect server looks like
SERVER_NOTE = (
    "Prefect: no server configured (PREFECT_API_URL), so Prefect starts a temporary local "
    "server for this run. The first start takes a while (about 20 s); it stops when the "
    "script ends."
)


@task(name="make-forecast", cache_policy=NO_CACHE, persist_result=False)
def make_forecast(config: str) -> pd.DataFrame | State:
    """Forecast the next cycle from the config's actuals and earlier cycles and return it as
    a frame (the config's column names). An unusable config or input fails the task with
    the CLI's message (no traceback)."""
    logger = get_run_logger()
    try:
        cfg = load_config(config)
        cycle = forecast_next_cycle(cfg)
    except UsageError as exc:
        logger.error(cli_message(exc))
        return usage_failure(exc)
    naive = cycle.n_series - cycle.n_seasonal
    logger.info(
        f"forecast the cycle of {cycle.issued:%Y-%m-%d} ({cfg.horizon} periods of "
        f"{cfg.frequency}) for {cycle.n_series:,} active series from the actuals up to "
        f"{cycle.last_actual:%Y-%m-%d}: seasonal naive (m = {cycle.season}) for "
        f"{cycle.n_seasonal:,}, naive for {naive:,} with less history; "
        f"{len(cycle.frame):,} rows handed to the gate in memory")
    return cycle.frame


@task(name="publish-forecast", cache_policy=NO_CACHE, persist_result=False)
def publish_forecast(forecast: pd.DataFrame, config: str, publish_dir: str) -> str:
    """Write the gated forecast into the publish folder (atomically: a reader never sees half
    a file) and return its path."""
    dest = write_frame(forecast, load_config(config), Path(publish_dir))
    get_run_logger().info(f"published {dest}")
    return str(dest)


@flow(name="nightly-forecast", log_prints=False)
def nightly_forecast(config: str, publish_dir: str, *, fail_on: Literal["warn", "fail"] = "fail",
                     label: str | None = None) -> dict[str, Any] | State:
    """Forecast, gate, publish (module docstring). Returns a summary on pass or warn: the
    verdict, its headline, cycle, attempt, run id, the findings and the published path."""
    made = make_forecast.submit(config)
    # a future as an argument: Prefect passes its result (the frame, in memory), or never
    # runs the task if it failed
    check = check_forecast.submit(config, forecast=made,  # type: ignore[call-overload]
                                  fail_on=fail_on, label=label)
    published = publish_forecast.submit(made, config, publish_dir,  # type: ignore[call-overload]
                                        wait_for=[check])
    wait([made, check, published])
    failed = first_failure(made, check, published)
    if failed is not None:
        return failed  # fails the flow run: never return None after a failed step
    report = check.result()
    return {
        "status": report.status,
        "headline": headline(report),
        "cycle": report.cycle,
        "attempt": report.attempt,
        "run_id": report.run_id,
        "counts": report.counts(),
        "findings": findings(report),
        "published": published.result(),
    }


def needs_temporary_server() -> bool:
    """Whether a flow run in this process would start Prefect's temporary server."""
    from prefect.settings import get_current_settings

    return not get_current_settings().api.url


def run_nightly(config: str | Path, publish_dir: str | Path, *, fail_on: str = "fail",
                label: str | None = None) -> tuple[int, State]:
    """Run the flow once; return its exit code (0 published, 1 gate failed, 2 unusable
    input, 3 other) and its final state."""
    state = nightly_forecast(str(config), str(publish_dir), fail_on=fail_on,  # type: ignore[arg-type]
                             label=label, return_state=True)
    return exit_code(state), state


def exit_code(state: State) -> int:
    """The CLI's exit code for a final flow state."""
    if state.is_completed():
        return EXIT_PUBLISHED
    error = state.result(raise_on_failure=False)
    if isinstance(error, GateFailed):
        return EXIT_GATE_FAILED
    if isinstance(error, UsageError):
        return EXIT_USAGE
    return EXIT_OTHER


def _parser() -> argparse.ArgumentParser:
    p = argparse.ArgumentParser(
        prog="nightly_forecast.py",
        description="Forecast the next cycle, gate it with accuracy-checks, publish it only "
        "when the gate did not fail (a Prefect flow).")
    p.add_argument("--config", type=Path, help="the accuracy-checks YAML config")
    p.add_argument("--publish-dir", type=Path, help="where a gated forecast is published")
    p.add_argument("--fail-on", choices=("warn", "fail"), default="fail",
                   help="lowest verdict that stops publishing (default: fail)")
    p.add_argument("--label", help="label kept with the audit record (default: the flow run)")
    p.add_argument("--serve", metavar="CRON",
                   help='serve the flow as a deployment on this cron schedule, e.g. "30 2 * * *" '
                   "(needs a running Prefect server: PREFECT_API_URL)")
    p.add_argument("--timezone", default="UTC", help="time zone of --serve's schedule")
    p.add_argument("--demo", type=Path, metavar="DIR",
                   help="write the invented garden-centre scenario to DIR and run the flow on "
                   "two of its cycles (one publishes, one is stopped by the gate)")
    return p


def main(argv: Sequence[str] | None = None, *, echo: Callable[[str], None] = print) -> int:
    args = _parser().parse_args(argv)
    if args.demo is not None:
        try:
            run_flow_demo(args.demo, run_nightly,
                          server_note=SERVER_NOTE if needs_temporary_server() else None,
                          echo=echo)
        except UsageError as exc:
            print(cli_message(exc), file=sys.stderr)
            return EXIT_USAGE
        return EXIT_PUBLISHED
    if args.config is None or args.publish_dir is None:
        _parser().error("--config and --publish-dir are required (or --demo DIR)")
    if args.serve:
        from prefect.schedules import Cron

        nightly_forecast.serve(
            name="nightly-forecast",
            schedules=[Cron(args.serve, timezone=args.timezone)],
            parameters={"config": str(args.config.resolve()),
                        "publish_dir": str(args.publish_dir.resolve()),
                        "fail_on": args.fail_on},
        )
        return EXIT_PUBLISHED
    if needs_temporary_server():
        echo(SERVER_NOTE)
    code, state = run_nightly(args.config, args.publish_dir, fail_on=args.fail_on,
                              label=args.label)
    if code == EXIT_PUBLISHED:
        echo(outcome_line(state))
    else:
        print(outcome_line(state), file=sys.stderr)
    return code


def outcome_line(state: State) -> str:
    """One line saying what the flow run did."""
    if state.is_completed():
        summary = state.result()
        return (f"nightly-forecast: {str(summary['status']).upper()} for cycle "
                f"{summary['cycle']} (attempt {summary['attempt']}); published "
                f"{summary['published']}")
    error = state.result(raise_on_failure=False)
    if isinstance(error, UsageError):
        return f"nightly-forecast: nothing published. {cli_message(error)}"
    if isinstance(error, GateFailed):
        return f"nightly-forecast: nothing published. {error}"
    return f"nightly-forecast: nothing published; the flow run ended {state.name}: {state.message}"


if __name__ == "__main__":
    sys.exit(main())
