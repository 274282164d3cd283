"""The report's sections of the latest run: each measure by segment, bias direction, coverage
findings, drift, waivers and the worst series.

Each function returns one ``<section>`` (its id is the page's anchor). The trends over cycles
(:mod:`.trends`) and the breach timeline (:mod:`.timeline`) have modules of their own.
"""

from __future__ import annotations

import math
from collections.abc import Sequence

from accuracy_checks.measures.registry import get_measure, headline_measures
from accuracy_checks.outputs.wording import (
    describe_threshold,
    describe_value,
    format_example_value,
    unit_of,
)
from accuracy_checks.report.blocks import (
    ChartIds,
    band_of,
    example_text,
    html_figure,
    html_table,
    measure_label,
    order_measures,
    segment_name,
    segment_order,
    status_cell,
    unit_note,
    variant_of,
)
from accuracy_checks.report.charts import DotRow, bias_chart, dot_chart
from accuracy_checks.report.data import ReportData
from accuracy_checks.report.svg import esc
from accuracy_checks.results import (
    ALL_SERIES,
    BREACHED,
    DISPLAY_ORDER,
    NEEDS_ATTENTION,
    WAIVABLE,
    CheckResult,
)

__all__ = ["MAX_WORST_RESULTS", "bias_measure", "bias_section", "coverage_section", "drift_section",
           "findings_table", "measures_section", "waivers_section", "worst_section"]

#: breached results whose worst series are listed
MAX_WORST_RESULTS = 40
#: figure columns of worst-series examples, in display order (after the series' keys)
_EXAMPLE_FIGURES = ("segment", "n_obs", "error", "abs_error", "share_of_bias_pct",
                    "share_of_abs_error_pct")


def measures_section(latest: list[CheckResult], ids: ChartIds,
                     directions: dict[str, str]) -> str:
    """A dot chart per thresholded (measure, lag, variant) over the segments; the measures
    without thresholds in a table."""
    acc = [r for r in latest if r.check == "accuracy" and r.measure]
    groups: dict[tuple[str, int | None, str], list[CheckResult]] = {}
    for r in acc:
        groups.setdefault((r.measure or "", r.lag, variant_of(r)), []).append(r)
    judged = {k: v for k, v in groups.items() if any(r.warn is not None or r.fail is not None
                                                     for r in v)}
    out = ['<section id="measures"><h2>Each measure by segment, against its thresholds</h2>',
           "<p>The latest run's value of every thresholded measure for each segment: the "
           "marker's shape gives its status, the hatched zones the warn and fail levels that "
           "applied to that segment.</p>"]
    if not judged:
        out.append("<p>No accuracy measure with thresholds in the latest run.</p>")
    order = segment_order(latest)
    rank = {m: i for i, m in enumerate(order_measures([k[0] for k in judged]))}
    for (measure, lag, variant) in sorted(judged, key=lambda k: (rank[k[0]], k[1] or 0, k[2])):
        rows_r = sorted(judged[(measure, lag, variant)],
                        key=lambda r: order.get(r.segment or ALL_SERIES, 0))
        out += _measure_chart(rows_r, measure, lag, variant, ids, directions)
    untouched = sorted({(r.measure or "", r.lag) for r in acc} - {(m, lg) for m, lg, _ in judged})
    if untouched:
        rest = [r for r in acc if (r.measure, r.lag) in set(untouched)]
        rest.sort(key=lambda r: (r.measure or "", r.lag or 0, order.get(r.segment or "*", 0)))
        out.append("<details><summary>Measures reported without thresholds "
                   f"({len(rest)} figures)</summary>")
        out.append(html_table(["measure", "lag", "segment", "value", "status"],
                              [[measure_label(r.measure)
                                + (f" ({variant_of(r)})" if variant_of(r) else ""),
                                str(r.lag), segment_name(r.segment), describe_value(r),
                                r.status.upper()] for r in rest]))
        out.append("</details>")
    out.append("</section>")
    return "".join(out)


def _measure_chart(rows_r: list[CheckResult], measure: str, lag: int | None, variant: str,
                   ids: ChartIds, directions: dict[str, str]) -> list[str]:
    """The heading and figure of one (measure, lag, variant) over the segments."""
    label = measure_label(measure) + (f" ({variant})" if variant else "")
    rows = [DotRow(segment_name(r.segment), r.value, r.status, describe_value(r),
                   band_of(r, directions)) for r in rows_r]
    n_bad = sum(r.status in WAIVABLE for r in rows_r)
    title = f"{label} at lag {lag} by segment, latest run"
    desc = (f"{len(rows)} segments; {n_bad} breach a threshold. "
            + "; ".join(f"{row.label}: {row.text} ({row.status})" for row in rows[:12])
            + (" …" if len(rows) > 12 else ""))
    svg = dot_chart(rows, title=title, desc=desc, uid=ids(),
                    unit_label=label + unit_note(label, unit_of(rows_r[0])))
    table = html_table(["segment", "value", "status", "thresholds"],
                       [[segment_name(r.segment), describe_value(r), r.status.upper(),
                         describe_threshold(r)] for r in rows_r])
    return [f"<h3>{esc(title)}</h3>",
            html_figure(svg, f"{title}: {n_bad} of {len(rows)} segments breach a threshold.",
                        table)]


def bias_measure(latest: list[CheckResult]) -> str | None:
    """The bias measure the latest run reports, if any: the first centred candidate headline
    measure (:func:`~accuracy_checks.measures.registry.headline_measures`: ``bias_pct``, then
    ``me``) among its accuracy results."""
    reported = {r.measure for r in latest if r.check == "accuracy"}
    return next((m for m in headline_measures()
                 if m in reported and get_measure(m).direction == "centered"), None)


def bias_section(latest: list[CheckResult], ids: ChartIds) -> str:
    """Diverging bars of the bias measure (:func:`bias_measure`) per segment, per lag."""
    out = ['<section id="bias"><h2>Bias direction per segment</h2>',
           "<p>Error = actual − forecast. Bars to the right (solid) mean the actuals came in "
           "above the forecast: <strong>under-forecast</strong>; bars to the left (hatched) "
           "mean <strong>over-forecast</strong>. Each bar says so in words.</p>"]
    measure = bias_measure(latest)
    acc = [r for r in latest if r.check == "accuracy" and r.measure == measure]
    if measure is None or not acc:
        out.append("<p>The latest run reports no bias measure.</p></section>")
        return "".join(out)
    order = segment_order(latest)
    for lag in sorted({r.lag or 0 for r in acc}):
        rs = sorted([r for r in acc if (r.lag or 0) == lag],
                    key=lambda r: order.get(r.segment or ALL_SERIES, 0))
        rows = [(segment_name(r.segment), r.value, describe_value(r)) for r in rs]
        under = sum(1 for r in rs if r.value is not None and r.value > 0)
        over = sum(1 for r in rs if r.value is not None and r.value < 0)
        title = f"{measure_label(measure)} by segment at lag {lag}, latest run"
        desc = (f"{under} segment(s) under-forecast, {over} over-forecast. "
                + "; ".join(f"{a}: {c}" for a, _, c in rows[:12])
                + (" …" if len(rows) > 12 else ""))
        svg = bias_chart(rows, title=title, desc=desc, uid=ids(),
                         unit="%" if get_measure(measure).unit == "%" else "")
        table = html_table(["segment", "bias", "status", "thresholds"],
                           [[segment_name(r.segment), describe_value(r), r.status.upper(),
                             describe_threshold(r)] for r in rs])
        out.append(f"<h3>{esc(title)}</h3>")
        out.append(html_figure(svg, f"{title}: {under} under-forecast, {over} over-forecast.",
                               table))
    out.append("</section>")
    return "".join(out)


def coverage_section(latest: list[CheckResult]) -> str:
    """The coverage and output findings of the latest run; passes folded away."""
    found = [r for r in latest if r.check.startswith(("coverage.", "output."))]
    found.sort(key=lambda r: (DISPLAY_ORDER.get(r.status, 9), r.check, str(r.segment)))
    out = ['<section id="coverage"><h2>Coverage findings</h2>',
           "<p>Is the latest forecast whole: every active series forecast, every horizon step "
           "present, valid values.</p>"]
    bad = [r for r in found if r.status in NEEDS_ATTENTION]
    good = [r for r in found if r.status not in NEEDS_ATTENTION]
    if not found:
        out.append("<p>The latest run has no coverage or output results.</p>")
    if bad:
        out.append(findings_table(bad))
    elif found:
        out.append("<p>Every coverage and output check passed.</p>")
    if good:
        out.append(f"<details><summary>Passed and skipped ({len(good)})</summary>"
                   f"{findings_table(good)}</details>")
    out.append("</section>")
    return "".join(out)


def findings_table(results: Sequence[CheckResult], *, examples: int = 3,
                   messages: bool = True) -> str:
    """Results as a table: with their messages and first examples, or (``messages=False``)
    their figures only."""
    if not messages:
        return html_table(["status", "check", "segment", "lag", "measure", "value",
                           "thresholds"],
                          [[r.status.upper(), r.check, segment_name(r.segment),
                            "" if r.lag is None else str(r.lag), r.measure or "",
                            describe_value(r), describe_threshold(r)] for r in results])
    rows = []
    for r in results:
        ex = "".join(f"<li>{esc(example_text(e))}</li>" for e in r.examples[:examples])
        more = (f"<li>… and {len(r.examples) - examples} more</li>"
                if len(r.examples) > examples else "")
        rows.append([status_cell(r.status), esc(r.check), esc(segment_name(r.segment)),
                     esc(describe_value(r)), esc(describe_threshold(r)),
                     f'<div class="msg">{esc(r.message)}</div>'
                     + (f"<ul>{ex}{more}</ul>" if ex else "")])
    return html_table(["status", "check", "segment", "value", "thresholds", "finding"], rows,
                      raw=True)


def drift_section(latest: list[CheckResult]) -> str:
    """The drift results of the latest run: breaches first, the rest folded away."""
    found = [r for r in latest if r.check.startswith("drift.")]
    out = ['<section id="drift"><h2>Drift and sustained breaches</h2>',
           "<p><code>drift.control_limit</code>: a figure against its own earlier cycles "
           "(mean ± k standard deviations); only a worsening counts. "
           "<code>drift.sustained_breach</code>: a threshold breached in several consecutive "
           "cycles escalates.</p>"]
    if not found:
        out.append("<p>The latest run has no drift results (drift checks off, or no "
                   "earlier cycles).</p></section>")
        return "".join(out)
    found.sort(key=lambda r: (DISPLAY_ORDER.get(r.status, 9), r.check, str(r.segment)))
    bad = [r for r in found if r.status in NEEDS_ATTENTION]
    counts = {s: sum(r.status == s for r in found) for s in DISPLAY_ORDER}
    out.append(f"<p>{esc(', '.join(f'{v} {k}' for k, v in counts.items() if v))}.</p>")
    if bad:
        out.append(findings_table(bad))
    rest = [r for r in found if r.status not in NEEDS_ATTENTION]
    if rest:
        out.append(f"<details><summary>Within limits or not yet judged ({len(rest)})"
                   f"</summary>{findings_table(rest, messages=False)}</details>")
    out.append("</section>")
    return "".join(out)


def waivers_section(data: ReportData) -> str:
    """Every waiver granted, with its state and revocation."""
    out = ['<section id="waivers"><h2>Waivers</h2>']
    if not data.waivers:
        out.append("<p>No waiver has been granted.</p></section>")
        return "".join(out)
    rows = []
    for w in data.waivers:
        d = w.to_dict(data.generated_at)
        revoked = (f"revoked {d['revoked_at'][:16]} by {w.revoked_by}: {w.revoke_reason}"
                   if w.revoked_at else "")
        rows.append([f"#{w.id}", d["state"], segment_name(w.segment), w.measure,
                     "every lag" if w.lag is None else str(w.lag), w.until.isoformat(),
                     w.created_by, d["created_at"][:16], w.reason, revoked])
    out.append(html_table(["waiver", "state", "segment", "measure", "lag",
                           "until (UTC, incl.)", "by", "granted (UTC)", "reason", "revoked"],
                          rows))
    out.append("</section>")
    return "".join(out)


def worst_section(latest: list[CheckResult]) -> str:
    """The worst series of each breached accuracy result of the latest run."""
    out = ['<section id="worst"><h2>Worst series</h2>',
           "<p>For each breached accuracy result of the latest run, the series that contribute "
           "most to the segment's error (or to its bias, for bias measures). Error = actual − "
           "forecast: positive is under-forecast.</p>"]
    found = [r for r in latest if r.examples and r.check == "accuracy"
             and r.status in BREACHED]
    found.sort(key=lambda r: (DISPLAY_ORDER.get(r.status, 9), str(r.segment), r.measure or ""))
    if not found:
        out.append("<p>No breached accuracy result lists worst series.</p></section>")
        return "".join(out)
    for r in found[:MAX_WORST_RESULTS]:
        out.append(f"<h3>{status_cell(r.status)} {esc(measure_label(r.measure))} of "
                   f"{esc(segment_name(r.segment))} at lag {esc(r.lag)}: "
                   f"{esc(describe_value(r))}</h3>")
        out.append(_worst_table(r))
    if len(found) > MAX_WORST_RESULTS:
        out.append(f"<p>{len(found) - MAX_WORST_RESULTS} more breached result(s) with worst "
                   "series: see the run's JSON (<code>--json</code>).</p>")
    out.append("</section>")
    return "".join(out)


def _worst_table(r: CheckResult) -> str:
    """A result's examples: the series' own columns first, then the figures behind the
    ranking, then the direction of its error in words."""
    cols: list[str] = []
    for e in r.examples:
        if isinstance(e, dict):
            cols += [c for c in e if c not in cols]
    cols.sort(key=lambda c: (_EXAMPLE_FIGURES.index(c) if c in _EXAMPLE_FIGURES else -1))
    rows = []
    for e in r.examples:
        if not isinstance(e, dict):
            rows.append([example_text(e)] + [""] * len(cols))
            continue
        err = e.get("error")
        words = ""
        if isinstance(err, int | float) and math.isfinite(err):
            words = ("under-forecast" if err > 0 else "over-forecast" if err < 0
                     else "no bias")
        rows.append([format_example_value(e.get(c)) if c in e else "" for c in cols] + [words])
    return html_table([*cols, "direction"], rows)
