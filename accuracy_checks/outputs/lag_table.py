"""The compact lag-by-segment overview of the accuracy results, shared by console and Markdown.

One row per segment (``"*"`` first, then by name), one column per lag. A cell holds the value
of the headline measure (WAPE when it is reported, else the first reported measure in the usual
order) and, when any measure of that (segment, lag) needs attention, the worst status word with
the measures that have it: ``23.4 % FAIL bias_pct, wape``. Cells are plain text; each output
escapes them its own way.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

from accuracy_checks.measures.registry import headline_measures
from accuracy_checks.outputs.wording import describe_value, format_number, status_word, unit_of
from accuracy_checks.results import ALL_SERIES, DISPLAY_ORDER, OPEN_FINDINGS, CheckResult

__all__ = ["LagTable", "lag_table", "measure_name"]

#: Measures named in a cell before "…".
_MAX_NAMED = 3


@dataclass(frozen=True)
class LagTable:
    """``header`` (``segment``, ``lag 1`` …), ``rows`` of text cells, the headline measure
    and how many segments were left out."""

    header: list[str]
    rows: list[list[str]]
    headline: str
    hidden: int


def measure_name(result: CheckResult) -> str:
    """The measure of a result with its variant (quantile or interval) when it has one.

    >>> measure_name(CheckResult("accuracy", "pass", measure="pinball",
    ...                          details={"variant": "q0.1"}))
    'pinball (q0.1)'
    """
    variant = result.details.get("variant") if isinstance(result.details, dict) else None
    return f"{result.measure} ({variant})" if variant else str(result.measure or "")


def _headline(results: list[CheckResult]) -> str | None:
    present = {r.measure for r in results if r.measure}
    for measure in headline_measures():
        if measure in present:
            return measure
    return min(present) if present else None


def _value(result: CheckResult | None) -> str:
    if result is None:
        return "–"
    if result.value is None or not math.isfinite(result.value):
        return describe_value(result)
    unit = unit_of(result)
    suffix = f" {unit}" if unit and unit != "count" else ""
    return f"{format_number(result.value)}{suffix}"


def lag_table(results: list[CheckResult], max_rows: int = 50) -> LagTable | None:
    """The overview of the accuracy results with a segment and a lag (``None`` if none).

    >>> rs = [CheckResult("accuracy", "pass", segment="*", lag=1, measure="wape", value=12.0,
    ...                   unit="%"),
    ...       CheckResult("accuracy", "fail", segment="*", lag=4, measure="wape", value=41.0,
    ...                   unit="%"),
    ...       CheckResult("accuracy", "warn", segment="*", lag=4, measure="bias_pct",
    ...                   value=6.0, unit="%")]
    >>> t = lag_table(rs)
    >>> t.header, t.rows
    (['segment', 'lag 1', 'lag 4'], [['*', '12 %', '41 % FAIL wape']])
    """
    accuracy = [r for r in results
                if r.check == "accuracy" and r.segment is not None and r.lag is not None]
    if not accuracy:
        return None
    headline = _headline(accuracy)
    lags = sorted({int(r.lag) for r in accuracy if r.lag is not None})
    segments = sorted({str(r.segment) for r in accuracy},
                      key=lambda s: (0 if s == ALL_SERIES else 1, s))
    by_cell: dict[tuple[str, int], list[CheckResult]] = {}
    for r in accuracy:
        by_cell.setdefault((str(r.segment), int(r.lag)), []).append(r)  # type: ignore[arg-type]
    rows = []
    for segment in segments[:max_rows]:
        row = [segment]
        for lag in lags:
            cell = by_cell.get((segment, lag), [])
            head = next((r for r in cell if r.measure == headline and
                         not r.details.get("variant")), None)
            text = _value(head)
            worst = min((r.status for r in cell), key=lambda s: DISPLAY_ORDER[s], default="pass")
            if worst in OPEN_FINDINGS:
                named = sorted({measure_name(r) for r in cell if r.status == worst})
                more = "…" if len(named) > _MAX_NAMED else ""
                text += f" {status_word(worst)} {', '.join(named[:_MAX_NAMED])}{more}"
            row.append(text)
        rows.append(row)
    return LagTable(["segment", *(f"lag {lag}" for lag in lags)], rows, headline or "",
                    max(len(segments) - max_rows, 0))
