"""The same gate as a plain CI step: no orchestrator, just exit codes and report files.

The steps of ``nightly_forecast.py`` without Prefect: forecast the next cycle (or take the
forecast your job wrote, ``--forecast``), gate it with the same checks and audit store,
write the JSON, JUnit XML and Markdown reports for the CI page, and copy the forecast into
the publish folder only when the gate did not fail::

    python flows/ci_gate.py --config accuracy-checks.yaml --publish-dir published \\
        --reports gate-reports [--forecast out/forecast.csv] [--fail-on warn]

Exit codes are the CLI's: 0 published (pass or warnings), 1 the gate failed (nothing
published), 2 unusable config or input (nothing published, nothing recorded). The audit
record's label is the CI run (``GITHUB_RUN_ID``, ``CI_PIPELINE_ID`` or ``BUILD_NUMBER``)
unless ``--label`` is given. In GitHub Actions::

    - run: python flows/ci_gate.py --config accuracy-checks.yaml --publish-dir published
           --reports gate-reports
    - uses: actions/upload-artifact@v4
      if: always()
      with: {name: accuracy-gate, path: gate-reports}
"""

from __future__ import annotations

import argparse
import os
import sys
from collections.abc import Sequence
from pathlib import Path

if __package__ in (None, ""):  # run as a script: make the repository's packages importable
    sys.path.insert(0, str(Path(__file__).resolve().parent.parent))

from accuracy_checks.engine import run_checks
from accuracy_checks.errors import UsageError
from accuracy_checks.measures.catalogue import load_config
from accuracy_checks.outputs import (
    headline,
    render_console,
    write_json,
    write_junit,
    write_markdown,
)
from flows.forecasting import forecast_next_cycle, publish_file, write_forecast

__all__ = ["ci_label", "main"]

EXIT_PUBLISHED, EXIT_GATE_FAILED, EXIT_USAGE = 0, 1, 2
_CI_RUN_VARIABLES = ("GITHUB_RUN_ID", "CI_PIPELINE_ID", "BUILD_NUMBER")


def ci_label() -> str | None:
    """The CI run's id from the usual environment variables, if any."""
    for name in _CI_RUN_VARIABLES:
        if os.environ.get(name):
            return f"{name}={os.environ[name]}"
    return None


def _parser() -> argparse.ArgumentParser:
    p = argparse.ArgumentParser(prog="ci_gate.py", description=__doc__.splitlines()[0])
    p.add_argument("--config", type=Path, required=True, help="the accuracy-checks config")
    p.add_argument("--publish-dir", type=Path, required=True,
                   help="where a forecast that passed the gate is copied")
    p.add_argument("--forecast", type=Path,
                   help="the forecast to gate (default: forecast the next cycle here)")
    p.add_argument("--reports", type=Path, help="folder for accuracy.json/.xml/.md")
    p.add_argument("--fail-on", choices=("warn", "fail"), default="fail",
                   help="lowest verdict that stops publishing (default: fail)")
    p.add_argument("--label", help="label kept with the audit record (default: the CI run)")
    return p


def main(argv: Sequence[str] | None = None) -> int:
    args = _parser().parse_args(argv)
    try:
        config = load_config(args.config)
        forecast = args.forecast
        if forecast is None:
            cycle = forecast_next_cycle(config)
            forecast = write_forecast(cycle, config, config.archive.parent / "staging")
            print(f"· forecast the cycle of {cycle.issued:%Y-%m-%d} for {cycle.n_series:,} "
                  f"series: {forecast}", file=sys.stderr)
        report = run_checks(config, forecast_path=forecast, label=args.label or ci_label(),
                            progress=lambda text: print(f"· {text}", file=sys.stderr))
    except UsageError as exc:
        print(f"accuracy-checks: error: {exc.message}", file=sys.stderr)
        return EXIT_USAGE
    if args.reports:
        args.reports.mkdir(parents=True, exist_ok=True)
        write_json(report, args.reports / "accuracy.json")
        write_junit(report, args.reports / "accuracy.xml")
        write_markdown(report, args.reports / "accuracy.md")
    render_console(report, color=False if os.environ.get("NO_COLOR") else None)
    if report.status == "fail" or (report.status == "warn" and args.fail_on == "warn"):
        print(f"ci_gate: {headline(report)}: nothing published.", file=sys.stderr)
        return EXIT_GATE_FAILED
    dest = publish_file(Path(forecast), args.publish_dir)
    print(f"ci_gate: {headline(report)}: published {dest}")
    return EXIT_PUBLISHED


if __name__ == "__main__":
    sys.exit(main())
