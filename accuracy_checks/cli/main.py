"""The ``accuracy-checks`` command line. Thin: parse, call the library, render, exit.

Exit codes: 0 pass or warnings only, 1 gate failed (or warned with ``--fail-on warn``),
2 unusable config or input (one paragraph on stderr, no traceback), 3 internal error.
"""

from __future__ import annotations

import argparse
import json
import os
import sys
from collections.abc import Callable
from pathlib import Path
from typing import TYPE_CHECKING

from accuracy_checks.cli.audit import COMMANDS as AUDIT_COMMANDS
from accuracy_checks.cli.audit import add_audit_commands, iso_day, run_audit_command
from accuracy_checks.errors import UsageError
from accuracy_checks.version import __version__

if TYPE_CHECKING:
    from accuracy_checks.config.places import Url

EXIT_PASS, EXIT_FAIL, EXIT_USAGE, EXIT_INTERNAL = 0, 1, 2, 3


def _parser() -> argparse.ArgumentParser:
    p = argparse.ArgumentParser(
        prog="accuracy-checks",
        description="Gate a forecast: coverage and output checks, accuracy of earlier cycles "
        "against actuals, per-segment thresholds.",
    )
    p.add_argument("--version", action="version", version=f"accuracy-checks {__version__}")
    sub = p.add_subparsers(dest="command", required=True, metavar="COMMAND")

    run = sub.add_parser("run", help="check the current forecast and judge accuracy")
    run.add_argument("--config", required=True, type=Path, help="the YAML config file")
    run.add_argument("--forecast", metavar="PLACE",
                     help="forecast file, folder or URL (overrides the config)")
    run.add_argument("--actuals", metavar="PLACE",
                     help="actuals file, folder or URL (overrides the config)")
    run.add_argument("--json", type=Path, metavar="PATH", help="write the results as JSON")
    run.add_argument("--junit", type=Path, metavar="PATH", help="write JUnit XML for CI")
    run.add_argument("--markdown", type=Path, metavar="PATH", help="write a Markdown summary")
    run.add_argument("--report", type=Path, metavar="PATH",
                     help="write the HTML report of the audit trail (this run included)")
    run.add_argument("--fail-on", choices=("warn", "fail"), default="fail",
                     help="lowest verdict that exits 1 (default: fail)")
    run.add_argument("--no-snapshot", action="store_true",
                     help="do not archive this forecast (a dry run)")
    run.add_argument("-v", "--verbose", action="store_true", help="list passing results too")
    run.add_argument("-q", "--quiet", action="store_true", help="no progress lines")
    run.add_argument("--no-color", action="store_true", help="plain text output")
    run.add_argument("--label", metavar="TEXT",
                     help="a label of the pipeline run kept in the audit record "
                     "(e.g. the scheduler's run id)")
    run.add_argument("--engine", choices=("pandas", "dask"),
                     help="the engine (default: the config's `engine`, else pandas); dask "
                     "checks the series in shards on a Dask cluster, with the same results")
    run.add_argument("--scheduler", metavar="ADDRESS",
                     help="the dask engine on a running cluster (tcp://host:8786) instead of "
                     "a local cluster started for the run")

    rep = sub.add_parser("report", help="write the HTML report of the audit trail (charts)")
    rep_where = rep.add_mutually_exclusive_group(required=True)
    rep_where.add_argument("--config", type=Path, help="the YAML config (its `store:`)")
    rep_where.add_argument("--store", metavar="URL", help="a store URL instead of a config")
    rep.add_argument("--out", required=True, type=Path, metavar="PATH",
                     help="the HTML file to write (one self-contained file)")
    rep.add_argument("--since", type=iso_day, metavar="DATE",
                     help="only cycles issued on or after this date (YYYY-MM-DD)")

    val = sub.add_parser("validate", help="validate a config file and exit")
    val.add_argument("--config", required=True, type=Path)

    sch = sub.add_parser("schema", help="print the config's JSON Schema (for editors)")
    sch.add_argument("--out", type=Path, help="write to a file instead of stdout")

    demo = sub.add_parser("demo", help="run the garden-centre demo over several cycles")
    demo.add_argument("--out", type=Path, default=Path("accuracy-checks-demo"),
                      help="folder to write the demo into (default: ./accuracy-checks-demo)")
    demo.add_argument("--cycles", type=int, default=6, help="number of weekly cycles (default 6)")
    demo.add_argument("--warehouse", action="store_true",
                      help="load the scenario into a DuckDB file and run the gate on its final "
                           "cycle from SQL (needs the warehouse extra)")

    add_audit_commands(sub)  # history, breaches, waive, waivers, revoke, verify
    return p


def main(argv: list[str] | None = None) -> int:
    """Run one command; return its exit code (usage errors are exit 2 with one paragraph on
    stderr, a bug is exit 3 without a traceback unless ``ACCURACY_CHECKS_DEBUG`` is set)."""
    args = _parser().parse_args(argv)
    try:
        if args.command in AUDIT_COMMANDS:
            return run_audit_command(args)
        return _COMMANDS[args.command](args)
    except UsageError as exc:
        print(f"accuracy-checks: error: {exc.message}", file=sys.stderr)
        return EXIT_USAGE
    except KeyboardInterrupt:
        print("accuracy-checks: interrupted; nothing was archived.", file=sys.stderr)
        return 130
    except Exception as exc:
        if os.environ.get("ACCURACY_CHECKS_DEBUG"):
            raise
        print(f"accuracy-checks: internal error: {type(exc).__name__}: {exc}. This is a bug; "
              "set ACCURACY_CHECKS_DEBUG=1 for the traceback and please report it.",
              file=sys.stderr)
        return EXIT_INTERNAL


def _validate(args: argparse.Namespace) -> int:
    from accuracy_checks.measures.catalogue import load_config

    cfg = load_config(args.config)
    print(f"{args.config}: valid (forecast {cfg.forecast.place}, horizon {cfg.horizon}, "
          f"frequency {cfg.frequency})")
    return EXIT_PASS


def _schema(args: argparse.Namespace) -> int:
    from accuracy_checks.measures.catalogue import json_schema

    text = json.dumps(json_schema(), indent=2)
    if not args.out:
        print(text)
        return EXIT_PASS
    from accuracy_checks.outputs.jsonfile import write_text_atomic

    try:
        write_text_atomic(args.out, text + "\n")
    except OSError as exc:
        raise UsageError(
            f"Cannot write the schema to {args.out}: {exc.strerror or exc}. Give "
            "--out a file in a folder you can write, or leave it out to print."
        ) from None
    return EXIT_PASS


def _demo(args: argparse.Namespace) -> int:
    if args.warehouse:
        from accuracy_checks.demo.warehouse import run_warehouse_demo

        run_warehouse_demo(args.out, cycles=args.cycles)
    else:
        from accuracy_checks.demo import run_demo

        run_demo(args.out, cycles=args.cycles)
    return EXIT_PASS


def _place(text: str | None, option: str) -> Path | Url | None:
    """A command-line place: a URL with a known scheme, else a local path (relative to the
    working directory, as shells mean it)."""
    if text is None:
        return None
    from accuracy_checks.config.places import Url, to_location  # pydantic: not for --help

    try:
        place = to_location(text)
    except ValueError as exc:
        raise UsageError(f"{option} {text}: {exc}") from None
    return place if isinstance(place, Path | Url) else Path(str(place))


def _run(args: argparse.Namespace) -> int:
    from accuracy_checks.cli.memory import keep_freed_memory
    from accuracy_checks.engine import run_checks
    from accuracy_checks.measures.catalogue import load_config
    from accuracy_checks.outputs import render_console, write_json, write_junit, write_markdown

    keep_freed_memory()  # this process ends with the run: reuse what it frees (see module)
    config = load_config(args.config)
    color = False if args.no_color or os.environ.get("NO_COLOR") else None

    def progress(text: str) -> None:
        if not args.quiet:
            print(f"· {text}", file=sys.stderr, flush=True)

    report = run_checks(config, forecast_path=_place(args.forecast, "--forecast"),
                        actuals_path=_place(args.actuals, "--actuals"),
                        progress=progress, snapshot=not args.no_snapshot, label=args.label,
                        engine=args.engine or ("dask" if args.scheduler else None),
                        scheduler=args.scheduler)
    if args.json:
        write_json(report, args.json)
    if args.junit:
        write_junit(report, args.junit)
    if args.markdown:
        write_markdown(report, args.markdown)
    if args.report:
        from accuracy_checks.report import write_report

        rendered = write_report(config, args.report)
        progress(f"report: {args.report} ({rendered.charts} charts, "
                 f"{rendered.bytes / 1e6:.1f} MB)")
    render_console(report, color=color, verbose=args.verbose)
    if report.status == "fail" or (report.status == "warn" and args.fail_on == "warn"):
        return EXIT_FAIL
    return EXIT_PASS


def _report(args: argparse.Namespace) -> int:
    """``accuracy-checks report``: the HTML report of a config's (or a URL's) audit store."""
    from accuracy_checks.config import Config
    from accuracy_checks.measures.catalogue import load_config
    from accuracy_checks.report import write_report

    target: Config | str = load_config(args.config) if args.config is not None else args.store
    rendered = write_report(target, args.out, since=args.since)
    print(f"Wrote {args.out}: {rendered.cycles} cycle(s), {rendered.segments} segment(s) "
          f"charted, {rendered.charts} charts, {rendered.bytes / 1e6:.1f} MB.")
    return EXIT_PASS


_COMMANDS: dict[str, Callable[[argparse.Namespace], int]] = {
    "run": _run, "report": _report, "validate": _validate, "schema": _schema, "demo": _demo}


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
