"""A Markdown summary of a run, for a pull-request comment or a pipeline UI.

Sections, in order:

1. a title with the verdict and the one-line :func:`~accuracy_checks.outputs.wording.headline`;
2. "Failures and warnings": one row per result with status fail, error, warn or waived
   (failures first): status word, check, segment, lag, measure, value in words, thresholds,
   message;
3. "Accuracy by segment": rows = segments (``*`` first, then by name), columns = the
   accuracy measures present, for the first (smallest) lag; cells are plain numbers with
   their unit, a status word added when not passing;
4. "Accuracy by lag and segment": rows = segments, columns = lags, cells = the headline
   measure with the worst status of any measure (:mod:`~accuracy_checks.outputs.lag_table`);
5. the counts of passes and skips (with the reasons of skips);
6. the first 3 examples (offending rows) of each failure, error and warning, inside a
   collapsible ``<details>`` block.

Every text that comes from data or config (segment names, messages, examples, cycle) is
escaped: ``& < >`` as HTML entities, the backtick as ``&#96;``, ``| \\ * [ ] ~`` with a
backslash, line breaks as ``<br>`` — a segment name can neither break a table nor inject HTML
or links. Long tables are cut (:data:`MAX_TABLE_ROWS`, :data:`MAX_SEGMENT_ROWS`) with a note,
so the comment stays within the size that code-review sites accept.
"""

from __future__ import annotations

import math
import os
from collections.abc import Iterable, Mapping, Sequence

from accuracy_checks.measures.registry import display_order
from accuracy_checks.outputs.jsonfile import write_text_atomic
from accuracy_checks.outputs.lag_table import lag_table, measure_name
from accuracy_checks.outputs.wording import (
    describe_value,
    format_example_value,
    format_number,
    headline,
    listing,
    result_label,
    status_word,
    threshold_parts,
    unit_of,
    unit_suffix,
)
from accuracy_checks.results import (
    ALL_SERIES,
    FAILING,
    OPEN_FINDINGS,
    CheckResult,
    RunReport,
    sort_for_display,
)

__all__ = [
    "MAX_EXAMPLES",
    "MAX_SEGMENT_ROWS",
    "MAX_TABLE_ROWS",
    "escape_cell",
    "render_markdown",
    "write_markdown",
]

#: Examples shown per result.
MAX_EXAMPLES = 3
#: Rows of the failures-and-warnings table before it is cut.
MAX_TABLE_ROWS = 100
#: Segments of the accuracy-by-segment table before it is cut.
MAX_SEGMENT_ROWS = 50

_ESCAPES = str.maketrans(
    {
        "&": "&amp;",
        "<": "&lt;",
        ">": "&gt;",
        "`": "&#96;",
        "|": "\\|",
        "\\": "\\\\",
        "*": "\\*",
        "[": "\\[",
        "]": "\\]",
        "~": "\\~",
        "\r": "",
        "\n": "<br>",
    }
)


def escape_cell(text: object) -> str:
    """``text`` made safe for a Markdown table cell or line (no HTML, no table break).

    >>> escape_cell("x'<script>alert(1)</script>|&\\"")
    'x\\'&lt;script&gt;alert(1)&lt;/script&gt;\\\\|&amp;"'
    >>> escape_cell("*")
    '\\\\*'
    """
    return ("" if text is None else str(text)).translate(_ESCAPES)


def _row(cells: Sequence[str]) -> str:
    return "| " + " | ".join(cells) + " |"


def _table(header: Sequence[str], rows: Iterable[Sequence[str]], align: Sequence[str]) -> list[str]:
    lines = [_row([escape_cell(h) for h in header]), _row(list(align))]
    lines.extend(_row(r) for r in rows)
    return lines


def _status_cell(status: str) -> str:
    word = status_word(status)
    return f"**{word}**" if status in FAILING else word


def _attention_section(results: list[CheckResult]) -> list[str]:
    rows = [
        [
            _status_cell(r.status),
            escape_cell(r.check),
            escape_cell(r.segment),
            "" if r.lag is None else str(r.lag),
            escape_cell(measure_name(r) if r.measure else None),
            escape_cell(describe_value(r)),
            escape_cell(", ".join(threshold_parts(r)) or "none"),
            escape_cell(r.message),
        ]
        for r in results[:MAX_TABLE_ROWS]
    ]
    header = ("status", "check", "segment", "lag", "measure", "value", "thresholds", "message")
    lines = ["### Failures and warnings", ""]
    lines += _table(header, rows, ("---", "---", "---", "--:", "---", "---", "---", "---"))
    if len(results) > MAX_TABLE_ROWS:
        lines += ["", f"… and {len(results) - MAX_TABLE_ROWS} more (see the JSON report)."]
    return lines


def _segment_key(segment: str) -> tuple[int, str]:
    return (0 if segment == ALL_SERIES else 1, segment)


def _value_cell(result: CheckResult) -> str:
    if result.value is None or not math.isfinite(result.value):
        return escape_cell(describe_value(result))
    text = escape_cell(f"{format_number(result.value)}{unit_suffix(unit_of(result))}")
    if result.status in ("pass", "skipped"):
        return text
    return f"{text} {_status_cell(result.status)}"


def _segment_section(results: list[CheckResult]) -> list[str]:
    accuracy = [r for r in results if r.check == "accuracy" and r.measure and r.segment is not None]
    lags = sorted({r.lag for r in accuracy if r.lag is not None})
    first_lag = lags[0] if lags else None
    cells: dict[tuple[str, str], CheckResult] = {}
    for r in sort_for_display(accuracy):  # the worst result wins a (segment, measure) cell
        if r.lag == first_lag:
            cells.setdefault((str(r.segment), measure_name(r)), r)
    if not cells:
        return []
    measures = display_order({m for _, m in cells})
    segments = sorted({s for s, _ in cells}, key=_segment_key)
    rows = [
        [escape_cell(seg)]
        + [_value_cell(cells[(seg, m)]) if (seg, m) in cells else "–" for m in measures]
        for seg in segments[:MAX_SEGMENT_ROWS]
    ]
    title = "### Accuracy by segment" + (f" (lag {first_lag})" if first_lag is not None else "")
    lines = [title, ""]
    lines += _table(["segment", *measures], rows, ("---", *("--:" for _ in measures)))
    if len(segments) > MAX_SEGMENT_ROWS:
        lines += ["", f"… and {len(segments) - MAX_SEGMENT_ROWS} more segments."]
    return lines


def _lag_section(results: list[CheckResult]) -> list[str]:
    """The compact lag-by-segment table (:mod:`~accuracy_checks.outputs.lag_table`)."""
    overview = lag_table(results, max_rows=MAX_SEGMENT_ROWS)
    if overview is None:
        return []
    rows = [[escape_cell(cell) for cell in row] for row in overview.rows]
    title = (f"### Accuracy by lag and segment ({escape_cell(overview.headline)}; "
             "worst status of any measure)")
    lines = [title, ""]
    lines += _table(overview.header, rows, ("---", *("--:" for _ in overview.header[1:])))
    if overview.hidden:
        lines += ["", f"… and {overview.hidden} more segments."]
    return lines


def _examples_section(results: list[CheckResult]) -> list[str]:
    with_examples = [r for r in results if r.status in OPEN_FINDINGS and r.examples]
    if not with_examples:
        return []
    noun = "result" if len(with_examples) == 1 else "results"
    lines = [
        "<details>",
        f"<summary>Examples of offending rows ({len(with_examples)} {noun})</summary>",
        "",
    ]
    for r in with_examples:
        shown = [
            ex if isinstance(ex, Mapping) else {"value": ex} for ex in r.examples[:MAX_EXAMPLES]
        ]
        columns: list[str] = []
        for example in shown:
            for key in example:
                if str(key) not in columns:
                    columns.append(str(key))
        label = escape_cell(result_label(r))
        lines += [f"{status_word(r.status)} **{label}** ({len(shown)} of {len(r.examples)})", ""]
        rows = [
            [escape_cell(format_example_value(ex[c])) if c in ex else "" for c in columns]
            for ex in ({str(k): v for k, v in example.items()} for example in shown)
        ]
        lines += _table(columns, rows, ["---"] * len(columns))
        lines.append("")
    lines.append("</details>")
    return lines


def render_markdown(report: RunReport) -> str:
    """The Markdown summary of ``report`` (see module doc); deterministic, newline-ended."""
    shown = listing(report)
    ordered = shown.ordered
    lines = [
        f"## accuracy-checks: {status_word(report.status)}",
        "",
        f"**{escape_cell(headline(report))}**",
    ]
    if shown.listed:
        lines += ["", *_attention_section(shown.listed)]
    segment_lines = _segment_section(ordered)
    if segment_lines:
        lines += ["", *segment_lines]
    lag_lines = _lag_section(ordered)
    if lag_lines:
        lines += ["", *lag_lines]
    if shown.rest:
        lines += ["", escape_cell(f"{shown.rest[0].upper()}{shown.rest[1:]}.")]
    example_lines = _examples_section(ordered)
    if example_lines:
        lines += ["", *example_lines]
    lines += ["", f"<sub>run {escape_cell(report.run_id)}</sub>"]
    return "\n".join(lines) + "\n"


def write_markdown(report: RunReport, path: str | os.PathLike[str]) -> None:
    """Write :func:`render_markdown` of ``report`` to ``path`` atomically, UTF-8."""
    write_text_atomic(path, render_markdown(report))
