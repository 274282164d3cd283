"""The report's breach timeline: every figure that breached a threshold in the cycles shown,
one row each, one column per cycle, with the waivers that covered it.

Split by job: :func:`_breached_figures` picks and orders the rows, :func:`_figure_row` lays
one figure's statuses over the cycles, :func:`_waiver_spans` finds its waivers' runs of
cycles, :func:`timeline_section` draws the chart and its table.
"""

from __future__ import annotations

from typing import TYPE_CHECKING, Any

import numpy as np
import pandas as pd

from accuracy_checks.report.blocks import (
    ChartIds,
    html_figure,
    html_table,
    measure_label,
    segment_name,
)
from accuracy_checks.report.charts import timeline_chart
from accuracy_checks.report.data import ReportData
from accuracy_checks.results import BREACHED

if TYPE_CHECKING:
    from accuracy_checks.store.waivers import Waiver

__all__ = ["MAX_TIMELINE_ROWS", "timeline_section"]

#: figures shown in the breach timeline (the latest breaches first)
MAX_TIMELINE_ROWS = 150
#: the columns that name one figure
_KEY = ["check", "segment", "measure", "lag", "variant"]
#: short tags of checks in timeline labels
_CHECK_TAGS = {"drift.control_limit": "drift limit", "drift.sustained_breach": "sustained"}

#: a chart row: its label, the status per cycle (None: no figure), waiver spans
_Row = tuple[str, list[str | None], list[tuple[int, int, str]]]


def timeline_section(data: ReportData, ids: ChartIds) -> str:
    """The section: the chart (the run's verdict first, then one row per breached figure)
    and its data table."""
    out = ['<section id="timeline"><h2>Breach timeline</h2>',
           "<p>Every figure that breached a threshold in the cycles shown: one row each, one "
           "column per cycle (last attempt). Markers give the status; a bar under the "
           "markers is a waiver that covered those cycles (its number in the table).</p>"]
    if not len(data.figures) or not data.cycles:
        out.append("<p>No recorded figures.</p></section>")
        return "".join(out)
    stats, total = _breached_figures(data)
    if stats is None:
        out.append("<p>No figure breached a threshold in these cycles.</p></section>")
        return "".join(out)
    n = len(data.cycles)
    cyc_index = {c: i for i, c in enumerate(data.cycles)}
    verdicts: list[str | None] = [None] * n
    for c, run in data.cycle_runs.items():
        if c in cyc_index:
            verdicts[cyc_index[c]] = run["status"]
    rows: list[_Row] = [("verdict of the run (last attempt)", verdicts, [])]
    table_rows: list[list[str]] = []
    wanted = data.figures.merge(stats[_KEY], on=_KEY, how="inner")
    groups = wanted.groupby(_KEY, dropna=False, sort=False).indices
    waivers = {w.id: w for w in data.waivers}
    for rec in stats.itertuples(index=False):
        idx = groups.get((rec.check, rec.segment, rec.measure, rec.lag, rec.variant))
        if idx is None:
            continue
        states, wcol = _figure_row(wanted, idx, cyc_index)
        spans = _waiver_spans(wcol, waivers)
        label = _label(rec)
        rows.append((label, states, spans))
        marks = [f"{data.cycles[j]}: {states[j]}" for j in range(n) if states[j] in BREACHED]
        wtext = "; ".join(t for _, _, t in spans) or "—"
        table_rows.append([label, str(len(marks)), ", ".join(marks), wtext])
    last_cycle = data.cycles[-1]
    desc = (f"{total} figure(s) breached a threshold in at least one cycle"
            + (f" (the {MAX_TIMELINE_ROWS} most recent shown)" if total > MAX_TIMELINE_ROWS
               else "")
            + f"; {int(stats['now'].sum())} are breached in the latest cycle {last_cycle}.")
    svg = timeline_chart(rows, data.cycles, title=f"Breached figures × {n} cycles", desc=desc,
                         uid=ids())
    out.append(html_figure(svg, desc, html_table(["figure", "breached cycles",
                                                  "cycles (status)", "waivers"], table_rows)))
    out.append("</section>")
    return "".join(out)


def _breached_figures(data: ReportData) -> tuple[pd.DataFrame | None, int]:
    """The figures that breached in the cycles shown (at most :data:`MAX_TIMELINE_ROWS`):
    those breached in the latest cycle first, then by their last and their number of
    breaches; and how many there are in all. ``None`` when none breached."""
    breached = data.figures.loc[data.figures["status"].isin(BREACHED)]
    if not len(breached):
        return None, 0
    stats = breached.groupby(_KEY, dropna=False, sort=False).agg(
        n=("cycle", "size"), last=("cycle", "max")).reset_index()
    stats["now"] = stats["last"] == data.cycles[-1]
    stats = stats.sort_values(["now", "last", "n"], ascending=[False, False, False],
                              kind="stable")
    return stats.head(MAX_TIMELINE_ROWS), len(stats)


def _figure_row(wanted: pd.DataFrame, idx: np.ndarray, cyc_index: dict[str, int]
                ) -> tuple[list[str | None], list[int | None]]:
    """One figure's status and waiver id per cycle (None where it has none)."""
    n = len(cyc_index)
    cyc, st, wid = (wanted["cycle"].to_numpy()[idx], wanted["status"].to_numpy()[idx],
                    wanted["waiver_id"].to_numpy()[idx])
    states: list[str | None] = [None] * n
    wcol: list[int | None] = [None] * n
    for c, s, w in zip(cyc, st, wid, strict=True):
        j = cyc_index.get(c)
        if j is None:
            continue
        states[j] = str(s)
        wcol[j] = int(w) if w is not None and not pd.isna(w) else None
    return states, wcol


def _waiver_spans(wcol: list[int | None], waivers: dict[int, Waiver]
                  ) -> list[tuple[int, int, str]]:
    """Runs of consecutive cycles under one waiver: (first, last, the waiver in words)."""
    n = len(wcol)
    spans = []
    j = 0
    while j < n:
        if wcol[j] is None:
            j += 1
            continue
        a, w_id = j, wcol[j]
        while j + 1 < n and wcol[j + 1] == w_id:
            j += 1
        w = waivers.get(w_id) if w_id is not None else None
        text = (f"waiver #{w_id}" + (f" by {w.created_by} until {w.until.isoformat()}: "
                                      f"{w.reason}" if w is not None else ""))
        spans.append((a, j, text))
        j += 1
    return spans


def _label(rec: Any) -> str:
    """A figure in words: segment · measure (variant) lag N [check]."""
    lag = "" if rec.lag is None or pd.isna(rec.lag) else f" lag {int(rec.lag)}"
    what = measure_label(rec.measure) + (f" ({rec.variant})" if rec.variant else "")
    check = "" if rec.check == "accuracy" else f" [{_CHECK_TAGS.get(rec.check, rec.check)}]"
    return f"{segment_name(rec.segment)} · {what}{lag}{check}"
