"""The console summary of a run, for a terminal or a CI log (``rich``).

Layout, failures first (:func:`~accuracy_checks.results.sort_for_display`):

1. a compact table of the results that need attention (fail, error, warn, waived): status
   word, check, segment, lag, measure, value in words, thresholds — with ``verbose=True``
   the passing and skipped results are listed too;
2. a line counting what is not listed (passes, and skips with their reasons);
3. when an accuracy result needs attention, the compact lag-by-segment overview
   (:mod:`~accuracy_checks.outputs.lag_table`);
4. the findings of the non-accuracy checks that need attention, and the accuracy failures
   with worst offenders, each as its sentence with the first 3 examples under it;
5. the one-line headline (verdict, counts, cycle).

The status is always a word (FAIL, WARN…), colour only adds to it. Text from the data
(segment names, messages, examples) is never read as markup. Outside a real terminal the
table uses a plain ASCII box and a fixed width of 140 columns, so CI logs wrap well and the
output does not depend on the environment.
"""

from __future__ import annotations

import sys
from typing import IO

from rich import box
from rich.console import Console
from rich.table import Table
from rich.text import Text

from accuracy_checks.outputs.lag_table import lag_table, measure_name
from accuracy_checks.outputs.wording import (
    describe_value,
    format_example,
    headline,
    listing,
    result_label,
    status_word,
    threshold_parts,
)
from accuracy_checks.results import (
    FAILING,
    NEEDS_ATTENTION,
    OPEN_FINDINGS,
    CheckResult,
    RunReport,
    Status,
)

__all__ = ["render_console"]

#: Width used when the output is not an interactive terminal (CI logs, files, pipes).
LOG_WIDTH = 140
#: Examples shown under each failure.
MAX_EXAMPLES = 3
#: Segments of the lag-by-segment overview.
MAX_OVERVIEW_ROWS = 20

_STYLES: dict[str, str] = {
    "fail": "bold red",
    "error": "bold red",
    "warn": "bold yellow",
    "waived": "cyan",
    "skipped": "dim",
    "pass": "green",
}


def _is_tty(file: IO[str]) -> bool:
    isatty = getattr(file, "isatty", None)
    try:
        return bool(isatty()) if callable(isatty) else False
    except (ValueError, OSError):  # closed or detached stream
        return False


def _make_console(file: IO[str] | None, color: bool | None) -> Console:
    target = file if file is not None else sys.stdout
    tty = _is_tty(target)
    return Console(
        file=target,
        force_terminal=color,
        no_color=color is False,
        width=None if tty else LOG_WIDTH,
        highlight=False,
        emoji=False,
        markup=False,
        soft_wrap=False,
    )


def _cell(value: object) -> Text:
    return Text("" if value is None else str(value))


def _results_table(results: list[CheckResult], ascii_box: bool) -> Table:
    table = Table(
        box=box.ASCII if ascii_box else box.SIMPLE_HEAVY,
        show_edge=not ascii_box,
        pad_edge=False,
        header_style="bold",
        expand=False,
    )
    table.add_column("status", no_wrap=True)
    table.add_column("check", no_wrap=True, overflow="fold")
    table.add_column("segment", overflow="fold")
    table.add_column("lag", justify="right", no_wrap=True)
    table.add_column("measure", no_wrap=True)
    table.add_column("value", overflow="fold")
    table.add_column("thresholds", overflow="fold")
    for result in results:
        table.add_row(
            Text(status_word(result.status), style=_STYLES.get(result.status, "")),
            _cell(result.check),
            _cell(result.segment),
            _cell(result.lag),
            _cell(measure_name(result) if result.measure else None),
            _cell(describe_value(result)),
            _cell(", ".join(threshold_parts(result)) or "none"),
        )
    return table


def _lag_overview(results: list[CheckResult], ascii_box: bool) -> tuple[str, Table] | None:
    """The title and table of the lag-by-segment overview, when an accuracy result needs
    attention."""
    if not any(r.check == "accuracy" and r.status in OPEN_FINDINGS for r in results):
        return None
    overview = lag_table(results, max_rows=MAX_OVERVIEW_ROWS)
    if overview is None:
        return None
    title = f"Accuracy by lag ({overview.headline}; worst status of any measure)"
    if overview.hidden:
        title += f", first {MAX_OVERVIEW_ROWS} segments"
    table = Table(box=box.ASCII if ascii_box else box.SIMPLE_HEAVY, show_edge=not ascii_box,
                  pad_edge=False, header_style="bold", expand=False)
    for i, name in enumerate(overview.header):
        table.add_column(name, overflow="fold", justify="left" if i == 0 else "right")
    for row in overview.rows:
        table.add_row(*(_cell(c) for c in row))
    return title + ":", table


def _example_lines(result: CheckResult) -> list[Text]:
    lines: list[Text] = []
    shown = result.examples[:MAX_EXAMPLES]
    for example in shown:
        pairs = format_example(example)
        lines.append(Text(f"    - {pairs}"))
    hidden = len(result.examples) - len(shown)
    if hidden > 0:
        lines.append(Text(f"    (and {hidden} more)"))
    return lines


def render_console(
    report: RunReport,
    *,
    file: IO[str] | None = None,
    color: bool | None = None,
    verbose: bool = False,
) -> None:
    """Print the summary of ``report`` to ``file`` (default: standard output).

    ``color``: ``True`` forces colour (a CI log that shows ANSI colours), ``False`` prints
    plain text, ``None`` decides from the stream. ``verbose`` also lists passing and skipped
    results. The output is deterministic for a given report, width and colour choice.
    """
    console = _make_console(file, color)
    with console.capture() as captured:
        _print_report(console, report, verbose=verbose)
    # Cells are padded to the column width: drop the trailing blanks so logs stay clean.
    text = "\n".join(line.rstrip(" ") for line in captured.get().split("\n"))
    console.file.write(text)
    console.file.flush()


def _print_report(console: Console, report: RunReport, *, verbose: bool) -> None:
    ascii_box = not console.is_terminal or not _is_tty(console.file)
    shown = listing(report, verbose=verbose)
    ordered, rest = shown.ordered, shown.rest
    if shown.listed:
        console.print(_results_table(shown.listed, ascii_box))
        if rest:
            console.print(Text(f"Not shown: {rest}."))
    elif rest:
        console.print(Text(f"{rest}."))

    overview = _lag_overview(report.results, ascii_box)
    if overview is not None:
        console.print()
        console.print(Text(overview[0]))
        console.print(overview[1])

    # accuracy results say all in the tables, except the worst offenders of a failure
    findings = [r for r in ordered if r.status in NEEDS_ATTENTION
                and (r.check != "accuracy" or (r.status == Status.FAIL and r.examples))]
    for result in findings:
        console.print()
        title = Text()
        title.append(status_word(result.status), style=_STYLES[result.status])
        title.append(f" {result_label(result)}: {result.message}")
        console.print(title)
        if result.status in FAILING:
            for line in _example_lines(result):
                console.print(line)

    console.print()
    console.print(Text(headline(report), style=_STYLES.get(report.status, "") or "bold"))
