"""Building blocks of the report's sections: tables, figures, status cells, chart ids, and
the words and orders every section shares (segment names, measure labels and order, bands).
Everything about a measure (label, direction, order) comes from the measure registry.

Every string from the data goes through :func:`~accuracy_checks.report.svg.esc`; no id or
attribute value comes from the data (chart ids are counted by :class:`ChartIds`).
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from typing import Any

from accuracy_checks.measures.catalogue import measure_directions
from accuracy_checks.measures.registry import display_order, headline_measures, measure_label
from accuracy_checks.outputs.wording import format_example_value, format_number
from accuracy_checks.report.svg import Band, esc, legend_swatch
from accuracy_checks.results import ALL_SERIES, DISPLAY_ORDER, CheckResult

__all__ = [
    "ChartIds",
    "band_of",
    "directions",
    "example_text",
    "html_figure",
    "html_table",
    "measure_label",
    "num_text",
    "order_measures",
    "segment_name",
    "segment_order",
    "status_cell",
    "unit_note",
    "variant_of",
]



class ChartIds:
    """Ids of the page's charts (``c1``, ``c2`` …): one per chart, so ``count`` is the number
    of charts drawn."""

    def __init__(self) -> None:
        self.count = 0

    def __call__(self) -> str:
        self.count += 1
        return f"c{self.count}"


def segment_name(segment: object) -> str:
    """A segment as the report words it (``*`` is "all series (*)")."""
    return "all series (*)" if segment in (ALL_SERIES, None) else str(segment)


def status_cell(status: str) -> str:
    """A status as its marker and its word in capitals."""
    return f'<span class="status">{legend_swatch(status)} {esc(status.upper())}</span>'


def num_text(value: float | None) -> str:
    """A number as the report words it; undefined or non-finite is a dash."""
    if value is None or not math.isfinite(value):
        return "—"
    return format_number(value)


def html_table(head: Sequence[str], rows: Sequence[Sequence[str]], *, raw: bool = False,
               num: Sequence[int] = ()) -> str:
    """A table; cells are escaped unless ``raw`` (then the caller escaped them)."""
    hs = "".join(f'<th scope="col">{esc(h)}</th>' for h in head)
    body = []
    for row in rows:
        cells = []
        for i, c in enumerate(row):
            cls = ' class="num"' if i in num else ""
            cells.append(f"<td{cls}>{c if raw else esc(c)}</td>")
        body.append(f"<tr>{''.join(cells)}</tr>")
    return f"<table><thead><tr>{hs}</tr></thead><tbody>{''.join(body)}</tbody></table>"


def html_figure(svg: str, caption: str, table: str, *, cls: str = "") -> str:
    """A chart with its caption and its data table. The caption comes first: the HTML
    standard allows a ``figcaption`` only as the first or the last child of its ``figure``."""
    klass = f' class="{cls}"' if cls else ""
    return (f"<figure{klass}><figcaption>{esc(caption)}</figcaption>{svg}"
            f"<details><summary>Data table (text version of the chart)</summary>{table}"
            "</details></figure>")


def unit_note(label: str, unit: str | None) -> str:
    """`` (units)`` after a label, unless the label already ends with its unit."""
    if not unit or label.rstrip().endswith(unit):
        return ""
    return f" ({unit})"


def directions() -> dict[str, str]:
    """Each measure's direction (``lower``, ``higher``, ``centered``) by id."""
    return {m: d for m, (d, _) in measure_directions().items()}


def order_measures(measures: Sequence[str]) -> list[str]:
    """The distinct measures in the report's order: the candidate headline figures first,
    best first (:func:`~accuracy_checks.measures.registry.headline_measures`), then the others
    in the registry's table order (:func:`~accuracy_checks.measures.registry.display_order`;
    unknown ids last, by id).

    >>> order_measures(["me", "bias_pct", "zz", "wape", "pinball", "wape"])
    ['wape', 'bias_pct', 'me', 'pinball', 'zz']
    """
    distinct = set(measures)
    headline = [m for m in headline_measures() if m in distinct]
    return headline + display_order(distinct.difference(headline))


def band_of(r: CheckResult | dict[str, Any], directions: dict[str, str]) -> Band | None:
    """The threshold band of a result (or of a recorded result's dict), None without levels."""
    get = r.get if isinstance(r, dict) else (lambda k: getattr(r, k))
    warn, fail, measure = get("warn"), get("fail"), get("measure")
    if warn is None and fail is None:
        return None
    if isinstance(warn, list):
        warn = (float(warn[0]), float(warn[1]))
    if isinstance(fail, list):
        fail = (float(fail[0]), float(fail[1]))
    return Band(warn, fail, directions.get(measure or "", "lower"))


def variant_of(r: CheckResult) -> str:
    """The result's variant (a quantile or interval), or ``""``."""
    return str(r.details.get("variant") or "") if isinstance(r.details, dict) else ""


def segment_order(results: Sequence[CheckResult]) -> dict[str, int]:
    """``*`` first, then segments with the worst latest results, then by name."""
    worst: dict[str, int] = {}
    for r in results:
        seg = r.segment if r.segment is not None else ALL_SERIES
        rank = DISPLAY_ORDER.get(r.status, 9)
        worst[seg] = min(worst.get(seg, 9), rank)
    names = sorted(worst, key=lambda s: (s != ALL_SERIES, worst[s], s))
    return {s: i for i, s in enumerate(names)}


def example_text(example: Any) -> str:
    """A worst-series example in one line (``key=value, …``)."""
    if isinstance(example, dict):
        return ", ".join(f"{k}={format_example_value(v)}" for k, v in example.items())
    return format_example_value(example)
