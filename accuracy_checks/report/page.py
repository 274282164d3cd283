"""The report page: one self-contained HTML file (inline CSS and SVG, no script, no network).

Sections, in order: the latest run's verdict; each measure by segment against its thresholds;
bias direction per segment; each segment's trend over cycles with its threshold zones and
drift limits; coverage findings; drift and sustained breaches; the breach timeline with its
waivers; the worst series of each breach. Every chart has a ``<title>``, a ``<desc>`` and a
data table (in a ``<details>``) as its text alternative.

Safety: every string from the data goes through :func:`~accuracy_checks.report.svg.esc`; no
attribute value or id comes from the data. A Content-Security-Policy ``<meta>`` forbids every
script, connection, font, image and frame and allows only the page's own stylesheet (by its
SHA-256), so even a string that slipped through escaping could not run.
"""

from __future__ import annotations

import base64
import hashlib
import math
from collections.abc import Sequence
from dataclasses import dataclass
from datetime import UTC
from typing import Any

import numpy as np
import pandas as pd

from accuracy_checks.outputs.wording import (
    describe_threshold,
    describe_value,
    format_example_value,
    format_number,
    unit_of,
)
from accuracy_checks.report.data import ReportData
from accuracy_checks.report.svg import (
    LAG_STYLES,
    Band,
    DotRow,
    Line,
    TrendSpec,
    bias_chart,
    dot_chart,
    esc,
    lag_css,
    legend_swatch,
    pattern_defs,
    timeline_chart,
    trend_chart,
)
from accuracy_checks.results import ALL_SERIES, DISPLAY_ORDER, CheckResult

__all__ = ["MAX_TIMELINE_ROWS", "MAX_TREND_SEGMENTS", "RenderedReport", "render_report"]

#: segments that get trend charts (the breached ones first); the rest are listed by name
MAX_TREND_SEGMENTS = 150
#: figures shown in the breach timeline (the latest breaches first)
MAX_TIMELINE_ROWS = 150
#: breached results whose worst series are listed
MAX_WORST_RESULTS = 40
#: preferred order of measures in the charts
_MEASURE_ORDER = ("wape", "bias_pct", "mape", "mae", "rmse", "sde", "me", "mase", "smape",
                  "tracking_signal")
_JUDGED = ("pass", "warn", "fail", "waived")
#: figure columns of worst-series examples, in display order (after the series' keys)
_EXAMPLE_FIGURES = ("segment", "n_obs", "error", "abs_error", "share_of_bias_pct",
                    "share_of_abs_error_pct")
#: short tags of checks in timeline labels
_CHECK_TAGS = {"drift.control_limit": "drift limit", "drift.sustained_breach": "sustained"}
_VERDICT_WORDS = {"pass": "every check passed", "warn": "warnings only, the gate passes",
                  "fail": "the gate failed"}
_BREACHED = ("warn", "fail", "waived")


@dataclass(frozen=True)
class RenderedReport:
    """The page and what it holds (for logs and tests)."""

    html: str
    charts: int
    segments: int
    cycles: int

    @property
    def bytes(self) -> int:
        return len(self.html.encode("utf-8"))


CSS = """
:root{--ink:#1d2430;--muted:#5b6472;--line:#d5d9e0;--bg:#ffffff;--panel:#f6f7f9;
--pass:#2e6e8e;--warn:#b57600;--fail:#9c1d5a;--waived:#555555}
*{box-sizing:border-box}
body{margin:0;font:14px/1.45 system-ui,-apple-system,"Segoe UI",Roboto,sans-serif;
color:var(--ink);background:var(--bg)}
header,main,footer,nav{max-width:1180px;margin:0 auto;padding:0 20px}
header{padding-top:20px}
h1{font-size:22px;margin:0 0 6px}
h2{font-size:18px;margin:34px 0 8px;padding-top:8px;border-top:2px solid var(--line)}
h3{font-size:15px;margin:18px 0 6px}
p{margin:6px 0}
.muted{color:var(--muted)}
nav ul{list-style:none;padding:0;margin:12px 0;display:flex;flex-wrap:wrap;gap:6px 18px}
nav a{color:#1f4e79}
.verdict{display:flex;align-items:center;gap:16px;border:2px solid var(--ink);
border-radius:6px;padding:12px 16px;margin:12px 0;background:var(--panel)}
.verdict .word{font-size:26px;font-weight:700;letter-spacing:.04em}
.verdict.fail{border-color:var(--fail)}
.verdict.warn{border-color:var(--warn)}
.verdict.pass{border-color:var(--pass)}
.verdict .big{width:34px;height:34px}
dl.meta{display:grid;grid-template-columns:max-content 1fr;gap:2px 14px;margin:8px 0}
dl.meta dt{color:var(--muted)}
dl.meta dd{margin:0}
.legend{display:flex;flex-wrap:wrap;gap:4px 18px;margin:8px 0;padding:8px 10px;
background:var(--panel);border-radius:4px}
.legend span{display:inline-flex;align-items:center;gap:5px}
.swatch{vertical-align:middle}
figure{margin:10px 0 18px}
figcaption{color:var(--muted);margin:2px 0}
svg.chart{display:block;max-width:100%;height:auto;font:11px system-ui,sans-serif}
svg.defs{position:absolute;width:0;height:0}
svg .label{fill:var(--ink)}
svg .value{fill:var(--ink)}
svg .tick{fill:var(--muted);font-size:10px}
svg .axis{fill:var(--muted);font-size:11px}
svg .grid{stroke:#e6e8ec;stroke-width:1}
svg .zero{stroke:#8d94a0;stroke-width:1}
svg .axisline{stroke:#8d94a0;stroke-width:1}
svg .limit{stroke:#333333;stroke-width:1.3;stroke-dasharray:1.5 2.5;fill:none}
svg .ring{fill:none;stroke:#111111;stroke-width:1.4}
svg .bar-under{fill:#1f4e79}
svg .bar-over{fill:url(#ac-warn-zone);stroke:#8a5a00;stroke-width:1}
svg .stripe{fill:#f5f6f8}
svg .waiver-bar{fill:#555555}
.multiples{display:flex;flex-wrap:wrap;gap:4px 18px}
.multiples figure{margin:4px 0 10px;width:380px}
table{border-collapse:collapse;margin:6px 0 12px;font-size:13px}
th,td{border-bottom:1px solid var(--line);padding:3px 8px;text-align:left;vertical-align:top}
th{background:var(--panel)}
td.num{text-align:right;font-variant-numeric:tabular-nums}
details{margin:4px 0 8px}
summary{cursor:pointer;color:#1f4e79}
.status{white-space:nowrap;font-weight:600}
.msg{max-width:560px}
footer{margin:40px auto 30px;color:var(--muted);font-size:12px}
@media print{nav{display:none}details{display:block}h2{break-before:auto}}
"""


def _csp(css: str) -> str:
    digest = base64.b64encode(hashlib.sha256(css.encode("utf-8")).digest()).decode("ascii")
    return ("default-src 'none'; script-src 'none'; connect-src 'none'; img-src 'none'; "
            f"font-src 'none'; frame-src 'none'; style-src 'sha256-{digest}'; "
            "base-uri 'none'; form-action 'none'")


class _Ids:
    def __init__(self) -> None:
        self.n = 0

    def __call__(self) -> str:
        self.n += 1
        return f"c{self.n}"


# ------------------------------------------------------------------------------- helpers


def _seg(segment: object) -> str:
    return "all series (*)" if segment in (ALL_SERIES, None) else str(segment)


def _status_cell(status: str) -> str:
    return f'<span class="status">{legend_swatch(status)} {esc(status.upper())}</span>'


def _num(value: float | None) -> str:
    if value is None or not math.isfinite(value):
        return "—"
    return format_number(value)


def _table(head: Sequence[str], rows: Sequence[Sequence[str]], *, raw: bool = False,
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


def _figure(svg: str, caption: str, table: str, *, cls: str = "") -> str:
    """A chart with its caption and its data table. The caption comes first: the HTML
    standard allows a ``figcaption`` only as the first or the last child of its ``figure``."""
    klass = f' class="{cls}"' if cls else ""
    return (f"<figure{klass}><figcaption>{esc(caption)}</figcaption>{svg}"
            f"<details><summary>Data table (text version of the chart)</summary>{table}"
            "</details></figure>")


def _measure_label(measure: str | None) -> str:
    from accuracy_checks.measures.registry import measure_label

    return measure_label(measure)


def _unit_note(label: str, unit: str | None) -> str:
    """`` (units)`` after a label, unless the label already ends with its unit."""
    if not unit or label.rstrip().endswith(unit):
        return ""
    return f" ({unit})"


def _directions() -> dict[str, str]:
    from accuracy_checks.config import measure_directions

    return {m: d for m, (d, _) in measure_directions().items()}


def _order_measures(measures: Sequence[str]) -> list[str]:
    rank = {m: i for i, m in enumerate(_MEASURE_ORDER)}
    return sorted(set(measures), key=lambda m: (rank.get(m, len(rank)), m))


def _legend(lags: Sequence[int]) -> str:
    items = [f"<span>{legend_swatch(s)} {esc(w)}</span>" for s, w in (
        ("pass", "pass (circle)"), ("warn", "warn (triangle)"), ("fail", "fail (square)"),
        ("waived", "waived (hollow diamond)"), ("skipped", "skipped (dash)"))]
    items.append('<span><svg class="swatch" width="26" height="14" aria-hidden="true">'
                 '<rect width="26" height="14" fill="url(#ac-warn-zone)"/></svg>'
                 "warn zone (sparse hatch)</span>")
    items.append('<span><svg class="swatch" width="26" height="14" aria-hidden="true">'
                 '<rect width="26" height="14" fill="url(#ac-fail-zone)"/></svg>'
                 "fail zone (cross-hatch)</span>")
    items.append('<span><svg class="swatch" width="26" height="14" aria-hidden="true">'
                 '<path d="M0 7H26" stroke="#333" stroke-width="1.3" stroke-dasharray="1.5 2.5"/>'
                 "</svg>drift limits (dotted)</span>")
    items.append('<span><svg class="swatch" width="16" height="16" aria-hidden="true">'
                 '<circle cx="8" cy="8" r="6.5" fill="none" stroke="#111" stroke-width="1.4"/>'
                 "</svg>ring: beyond its drift limits</span>")
    for i, lag in enumerate(lags):
        colour, dash, shape = LAG_STYLES[i % len(LAG_STYLES)]
        dash_attr = f' stroke-dasharray="{dash}"' if dash else ""
        items.append(f'<span><svg class="swatch" width="30" height="14" aria-hidden="true">'
                     f'<path d="M1 7H29" stroke="{colour}" stroke-width="1.6"{dash_attr}/>'
                     f"</svg>lag {lag} ({esc(shape)} points"
                     f"{', ' + ('solid' if not dash else 'dashed') if i < 2 else ''})</span>")
    # a div may carry an aria-label only with a role (the Nu checker rejects it otherwise)
    return f'<div class="legend" role="group" aria-label="Legend">{"".join(items)}</div>'


# ------------------------------------------------------------------------------ sections


def _header(data: ReportData, latest: list[CheckResult]) -> str:
    from accuracy_checks.results import worst_status

    run = data.latest or {}
    status = str(run.get("status") or worst_status([r.status for r in latest]))
    counts: dict[str, int] = {}
    for r in latest:
        counts[r.status] = counts.get(r.status, 0) + 1
    words = ", ".join(f"{counts[s]} {s}" for s in DISPLAY_ORDER if counts.get(s))
    icon = {"pass": "pass", "warn": "warn", "fail": "fail"}.get(status, "fail")
    big = legend_swatch(icon, size=34).replace('class="swatch"', 'class="swatch big"')
    first, last = (data.cycles[0], data.cycles[-1]) if data.cycles else ("—", "—")
    meta = [
        ("Cycle", f"{run.get('cycle') or '—'} (attempt {run.get('attempt') or '—'})"),
        ("Run", str(run.get("run_id") or "—")),
        ("Started (UTC)", str(run.get("started_at") or "—")),
        ("By", f"{run.get('user') or '—'} on {run.get('host') or '—'}"),
        ("Pipeline label", str(run.get("label") or "—")),
        ("Config", str(run.get("config_path") or "—")),
        ("Results", words or "none"),
    ]
    dl = "".join(f"<dt>{esc(k)}</dt><dd>{esc(v)}</dd>" for k, v in meta)
    since = f", issued on or after {data.since.isoformat()}" if data.since else ""
    return (
        "<header><h1>Forecast accuracy report</h1>"
        f'<p class="muted">Audit store {esc(data.store_url)} · {len(data.cycles)} cycle(s) '
        f"from {esc(first)} to {esc(last)}{esc(since)} · {len(data.runs)} recorded run(s) · "
        f"generated {esc(data.generated_at.astimezone(UTC).isoformat(timespec='seconds'))}</p>"
        f'<section id="verdict" aria-label="Latest verdict"><div class="verdict {esc(status)}">'
        f'{big}<div><div class="word">{esc(status.upper())}</div>'
        f"<div>the verdict of the latest cycle's last attempt: "
        f"{esc(_VERDICT_WORDS.get(status, status))}</div></div></div>"
        f"<dl class=\"meta\">{dl}</dl>{_later_runs(data)}</section></header>"
    )


def _later_runs(data: ReportData) -> str:
    """The runs recorded after the headline run (re-runs of older cycles): listed under the
    verdict, which stays that of the latest cycle's last attempt."""
    if not data.later_runs:
        return ""
    rows = [[str(r.get("cycle") or "—"), str(r.get("attempt") or "—"),
             str(r.get("status") or "—").upper(), str(r.get("recorded_at") or "—"),
             str(r.get("run_id") or "—"), str(r.get("label") or "")] for r in data.later_runs]
    return ('<p class="later">Recorded after this run, for earlier cycles: '
            f"{len(rows)} run(s). They do not change the verdict above, which is that of the "
            "latest cycle's last attempt.</p>"
            + _table(["cycle", "attempt", "verdict", "recorded (UTC)", "run", "pipeline label"],
                     rows))


def _nav() -> str:
    links = [("measures", "Measures by segment"), ("bias", "Bias direction"),
             ("trends", "Trends over cycles"), ("coverage", "Coverage findings"),
             ("drift", "Drift and sustained breaches"), ("timeline", "Breach timeline"),
             ("waivers", "Waivers"), ("worst", "Worst series")]
    items = "".join(f'<li><a href="#{k}">{esc(t)}</a></li>' for k, t in links)
    return f'<nav aria-label="Sections"><ul>{items}</ul></nav>'


def _band(r: CheckResult | dict[str, Any], directions: dict[str, str]) -> Band | None:
    get = r.get if isinstance(r, dict) else (lambda k: getattr(r, k))
    warn, fail, measure = get("warn"), get("fail"), get("measure")
    if warn is None and fail is None:
        return None
    if isinstance(warn, list):
        warn = (float(warn[0]), float(warn[1]))
    if isinstance(fail, list):
        fail = (float(fail[0]), float(fail[1]))
    return Band(warn, fail, directions.get(measure or "", "lower"))


def _variant(r: CheckResult) -> str:
    return str(r.details.get("variant") or "") if isinstance(r.details, dict) else ""


def _segment_order(results: Sequence[CheckResult]) -> dict[str, int]:
    """``*`` first, then segments with the worst latest results, then by name."""
    worst: dict[str, int] = {}
    for r in results:
        seg = r.segment if r.segment is not None else ALL_SERIES
        rank = DISPLAY_ORDER.get(r.status, 9)
        worst[seg] = min(worst.get(seg, 9), rank)
    names = sorted(worst, key=lambda s: (s != ALL_SERIES, worst[s], s))
    return {s: i for i, s in enumerate(names)}


def _measures_section(latest: list[CheckResult], ids: _Ids, directions: dict[str, str],
                      counter: list[int]) -> str:
    acc = [r for r in latest if r.check == "accuracy" and r.measure]
    groups: dict[tuple[str, int | None, str], list[CheckResult]] = {}
    for r in acc:
        groups.setdefault((r.measure or "", r.lag, _variant(r)), []).append(r)
    judged = {k: v for k, v in groups.items() if any(r.warn is not None or r.fail is not None
                                                     for r in v)}
    out = ['<section id="measures"><h2>Each measure by segment, against its thresholds</h2>',
           "<p>The latest run's value of every thresholded measure for each segment: the "
           "marker's shape gives its status, the hatched zones the warn and fail levels that "
           "applied to that segment.</p>"]
    if not judged:
        out.append("<p>No accuracy measure with thresholds in the latest run.</p>")
    order = _segment_order(latest)
    rank = {m: i for i, m in enumerate(_MEASURE_ORDER)}
    for (measure, lag, variant) in sorted(judged, key=lambda k: (
            rank.get(k[0], len(rank)), k[0], k[1] or 0, k[2])):
        rows_r = sorted(judged[(measure, lag, variant)],
                        key=lambda r: order.get(r.segment or ALL_SERIES, 0))
        label = _measure_label(measure) + (f" ({variant})" if variant else "")
        rows = [DotRow(_seg(r.segment), r.value, r.status, describe_value(r),
                       _band(r, directions)) for r in rows_r]
        n_bad = sum(r.status in ("warn", "fail") for r in rows_r)
        title = f"{label} at lag {lag} by segment, latest run"
        desc = (f"{len(rows)} segments; {n_bad} breach a threshold. "
                + "; ".join(f"{row.label}: {row.text} ({row.status})" for row in rows[:12])
                + (" …" if len(rows) > 12 else ""))
        svg = dot_chart(rows, title=title, desc=desc, uid=ids(),
                        unit_label=label + _unit_note(label, unit_of(rows_r[0])))
        counter[0] += 1
        table = _table(["segment", "value", "status", "thresholds"],
                       [[_seg(r.segment), describe_value(r), r.status.upper(),
                         describe_threshold(r)] for r in rows_r])
        out.append(f"<h3>{esc(title)}</h3>")
        out.append(_figure(svg, f"{title}: {n_bad} of {len(rows)} segments breach a "
                                "threshold.", table))
    untouched = sorted({(r.measure or "", r.lag) for r in acc} - {(m, lg) for m, lg, _ in judged})
    if untouched:
        rest = [r for r in acc if (r.measure, r.lag) in set(untouched)]
        rest.sort(key=lambda r: (r.measure or "", r.lag or 0, order.get(r.segment or "*", 0)))
        out.append("<details><summary>Measures reported without thresholds "
                   f"({len(rest)} figures)</summary>")
        out.append(_table(["measure", "lag", "segment", "value", "status"],
                          [[_measure_label(r.measure) + (f" ({_variant(r)})" if _variant(r)
                                                         else ""),
                            str(r.lag), _seg(r.segment), describe_value(r), r.status.upper()]
                           for r in rest]))
        out.append("</details>")
    out.append("</section>")
    return "".join(out)


def _bias_section(latest: list[CheckResult], ids: _Ids, counter: list[int]) -> str:
    out = ['<section id="bias"><h2>Bias direction per segment</h2>',
           "<p>Error = actual − forecast. Bars to the right (solid) mean the actuals came in "
           "above the forecast: <strong>under-forecast</strong>; bars to the left (hatched) "
           "mean <strong>over-forecast</strong>. Each bar says so in words.</p>"]
    measure = "bias_pct" if any(r.measure == "bias_pct" for r in latest) else "me"
    acc = [r for r in latest if r.check == "accuracy" and r.measure == measure]
    if not acc:
        out.append("<p>The latest run reports no bias measure.</p></section>")
        return "".join(out)
    order = _segment_order(latest)
    for lag in sorted({r.lag or 0 for r in acc}):
        rs = sorted([r for r in acc if (r.lag or 0) == lag],
                    key=lambda r: order.get(r.segment or ALL_SERIES, 0))
        rows = [(_seg(r.segment), r.value, describe_value(r)) for r in rs]
        under = sum(1 for r in rs if r.value is not None and r.value > 0)
        over = sum(1 for r in rs if r.value is not None and r.value < 0)
        title = f"{_measure_label(measure)} by segment at lag {lag}, latest run"
        desc = (f"{under} segment(s) under-forecast, {over} over-forecast. "
                + "; ".join(f"{a}: {c}" for a, _, c in rows[:12])
                + (" …" if len(rows) > 12 else ""))
        svg = bias_chart(rows, title=title, desc=desc, uid=ids(),
                         unit="%" if measure == "bias_pct" else "")
        counter[0] += 1
        table = _table(["segment", "bias", "status", "thresholds"],
                       [[_seg(r.segment), describe_value(r), r.status.upper(),
                         describe_threshold(r)] for r in rs])
        out.append(f"<h3>{esc(title)}</h3>")
        out.append(_figure(svg, f"{title}: {under} under-forecast, {over} over-forecast.",
                           table))
    out.append("</section>")
    return "".join(out)


def _trend_section(data: ReportData, latest: list[CheckResult], ids: _Ids,
                   directions: dict[str, str], counter: list[int]) -> tuple[str, int]:
    fig = data.figures
    out = ['<section id="trends"><h2>Trends over cycles</h2>',
           "<p>Each segment's measures over the cycles (last attempt of each), one line per "
           "lag, over the warn and fail zones recorded in each cycle. Dotted lines are the "
           "drift limits the gate used for the first lag (mean ± k standard deviations of the "
           "earlier cycles); a ring marks a value beyond them.</p>"]
    acc = fig.loc[fig["check"] == "accuracy"] if len(fig) else fig
    if not len(acc) or not data.cycles:
        out.append("<p>No accuracy figures recorded yet.</p></section>")
        return "".join(out), 0
    thresholded = {r.measure for r in latest if r.check == "accuracy"
                   and (r.warn is not None or r.fail is not None)}
    drifted = set(fig.loc[fig["check"] == "drift.control_limit", "measure"].dropna())
    measures = _order_measures([m for m in (thresholded | drifted) if m])
    if not measures:
        measures = _order_measures(acc["measure"].dropna().unique().tolist())[:2]
    lags = sorted(int(v) for v in acc["lag"].dropna().unique())
    out.append(_legend(lags))
    cyc_index = {c: i for i, c in enumerate(data.cycles)}
    n = len(data.cycles)
    order = _segment_order(latest)
    acc = acc.loc[acc["measure"].isin(measures)]
    segs = sorted(acc["segment"].dropna().unique().tolist(),
                  key=lambda s: (order.get(s, len(order)), s != ALL_SERIES, s))
    shown, hidden = segs[:MAX_TREND_SEGMENTS], segs[MAX_TREND_SEGMENTS:]
    drift = fig.loc[fig["check"] == "drift.control_limit"]
    drift_groups = drift.groupby(["segment", "measure", "variant"], sort=False,
                                 dropna=False).indices if len(drift) else {}
    groups = acc.groupby(["segment", "measure", "variant"], sort=False, dropna=False).indices
    col = _columns(acc, cyc_index, ("value", "status", "warn", "fail", "unit"))
    dcol = _columns(drift, cyc_index, ("status", "details"))
    variants_of: dict[tuple[Any, Any], list[str]] = {}
    for key in groups:
        variants_of.setdefault((key[0], key[1]), []).append(key[2])
    charts = 0
    for seg in shown:
        cells = []
        for measure in measures:
            for variant in sorted(variants_of.get((seg, measure), [])):
                rows = groups[(seg, measure, variant)]
                spec, summary, table = _trend_spec(rows, col, n, lags, data.cycles,
                                                   drift_groups.get((seg, measure, variant)),
                                                   dcol, directions.get(measure, "lower"))
                label = _measure_label(measure) + (f" ({variant})" if variant else "")
                unit = next((u for u in col["unit"][rows] if isinstance(u, str) and u), "")
                title = f"{label} of {_seg(seg)} over {n} cycles"
                svg = trend_chart(spec, title=title, desc=summary, uid=ids())
                counter[0] += 1
                charts += 1
                cells.append(_figure(svg, f"{label} of {_seg(seg)}{_unit_note(label, unit)}",
                                     table))
        if cells:
            out.append(f"<h3>{esc(_seg(seg))}</h3><div class=\"multiples\">{''.join(cells)}"
                       "</div>")
    if hidden:
        out.append(f"<p>{len(hidden)} more segment(s) not charted (the report charts "
                   f"{MAX_TREND_SEGMENTS}, breached ones first): "
                   f"{esc(', '.join(map(str, hidden)))}. "
                   "Use <code>accuracy-checks history --segment NAME --csv</code> for them.</p>")
    out.append("</section>")
    return "".join(out), len(shown)


def _columns(frame: pd.DataFrame, cyc_index: dict[str, int],
             names: Sequence[str]) -> dict[str, np.ndarray]:
    """Columns as numpy arrays, plus ``ci`` (the cycle's column, −1 if out of range) and
    ``lag_i`` (−1 for no lag)."""
    out = {c: frame[c].to_numpy() for c in names}
    out["ci"] = frame["cycle"].map(cyc_index).fillna(-1).to_numpy(dtype=np.int64)
    out["lag_i"] = frame["lag"].fillna(-1).to_numpy(dtype=np.int64)
    return out


def _trend_spec(rows: np.ndarray, col: dict[str, np.ndarray], n: int, lags: list[int],
                cycles: list[str], drift_rows: np.ndarray | None, dcol: dict[str, np.ndarray],
                direction: str) -> tuple[TrendSpec, str, str]:
    rows = rows[col["ci"][rows] >= 0]
    lag_of = col["lag_i"][rows]
    own_lags = sorted(int(v) for v in np.unique(lag_of) if v >= 0)
    first_lag = own_lags[0] if own_lags else -1
    lines = []
    bands: list[Band | None] = [None] * n
    grids: dict[int, tuple[np.ndarray, np.ndarray]] = {}
    for lag in own_lags:
        sel = rows[lag_of == lag]
        ci = col["ci"][sel]
        status = col["status"][sel].astype(str)
        value = col["value"][sel].astype(np.float64)
        values = np.full(n, np.nan)
        values[ci] = np.where(np.isin(status, _JUDGED), value, np.nan)
        statuses = np.full(n, "skipped", dtype=object)
        statuses[ci] = status
        grids[lag] = (values, statuses)
        if lag == first_lag:
            cache: dict[tuple[Any, Any], Band] = {}
            for k, w, f in zip(ci, col["warn"][sel], col["fail"][sel], strict=True):
                if w is None and f is None:
                    continue
                key = (w, f)
                band = cache.get(key)
                if band is None:
                    band = cache[key] = Band(w, f, direction)
                bands[int(k)] = band
        lines.append(Line(f"lag {lag}", [None if np.isnan(v) else float(v) for v in values],
                          list(statuses), lags.index(lag) if lag in lags else 0))
    limits: list[tuple[float | None, float | None] | None] = [None] * n
    signals = [False] * n
    if drift_rows is not None:
        mine = drift_rows[(dcol["lag_i"][drift_rows] == first_lag)
                          & (dcol["ci"][drift_rows] >= 0)]
        for k, d, st in zip(dcol["ci"][mine], dcol["details"][mine], dcol["status"][mine],
                            strict=True):
            if not isinstance(d, dict) or "lower" not in d:
                continue
            limits[int(k)] = (d.get("lower") if direction != "lower" else None,
                              d.get("upper") if direction != "higher" else None)
            signals[int(k)] = bool(d.get("signal")) or str(st) in _BREACHED
    spec = TrendSpec(cycles, lines, bands, limits, signals)
    first = grids.get(first_lag)
    defined = first[0][np.isfinite(first[0])] if first is not None else np.array([])
    breaches = sum(int(np.isin(g[1].astype(str), _BREACHED).sum()) for g in grids.values())
    summary = (f"{defined.size} of {n} cycles measured at lag {first_lag}"
               + (f"; first {_num(defined[0])}, last {_num(defined[-1])}, lowest "
                  f"{_num(defined.min())}, highest {_num(defined.max())}" if defined.size
                  else "")
               + f"; {breaches} breached point(s); {sum(signals)} drift signal(s).")
    head = ["cycle", *[f"lag {lag}" for lag in own_lags], "drift limits (first lag)"]
    body = []
    for k, cyc in enumerate(cycles):
        cells = []
        for lag in own_lags:
            v, st = grids[lag][0][k], grids[lag][1][k]
            text = _num(v) if np.isfinite(v) else ""
            cells.append(f"{text} {st.upper()}".strip() if st != "pass" else text)
        lim = limits[k]
        if all(c in ("", "SKIPPED") for c in cells) and lim is None:
            continue
        lim_text = ("" if lim is None else
                    f"{_num(lim[0]) if lim[0] is not None else '−∞'} to "
                    f"{_num(lim[1]) if lim[1] is not None else '+∞'}"
                    + (" BEYOND" if signals[k] else ""))
        body.append([cyc, *cells, lim_text])
    return spec, summary, _table(head, body)


def _coverage_section(latest: list[CheckResult]) -> str:
    found = [r for r in latest if r.check.startswith(("coverage.", "output."))]
    found.sort(key=lambda r: (DISPLAY_ORDER.get(r.status, 9), r.check, str(r.segment)))
    out = ['<section id="coverage"><h2>Coverage findings</h2>',
           "<p>Is the latest forecast whole: every active series forecast, every horizon step "
           "present, valid values.</p>"]
    bad = [r for r in found if r.status not in ("pass", "skipped")]
    good = [r for r in found if r.status in ("pass", "skipped")]
    if not found:
        out.append("<p>The latest run has no coverage or output results.</p>")
    if bad:
        out.append(_findings_table(bad))
    elif found:
        out.append("<p>Every coverage and output check passed.</p>")
    if good:
        out.append(f"<details><summary>Passed and skipped ({len(good)})</summary>"
                   f"{_findings_table(good)}</details>")
    out.append("</section>")
    return "".join(out)


def _findings_table(results: Sequence[CheckResult], *, examples: int = 3,
                    messages: bool = True) -> str:
    if not messages:
        return _table(["status", "check", "segment", "lag", "measure", "value", "thresholds"],
                      [[r.status.upper(), r.check, _seg(r.segment),
                        "" if r.lag is None else str(r.lag), r.measure or "",
                        describe_value(r), describe_threshold(r)] for r in results])
    rows = []
    for r in results:
        ex = "".join(f"<li>{esc(_example_text(e))}</li>" for e in r.examples[:examples])
        more = (f"<li>… and {len(r.examples) - examples} more</li>"
                if len(r.examples) > examples else "")
        rows.append([_status_cell(r.status), esc(r.check), esc(_seg(r.segment)),
                     esc(describe_value(r)), esc(describe_threshold(r)),
                     f'<div class="msg">{esc(r.message)}</div>'
                     + (f"<ul>{ex}{more}</ul>" if ex else "")])
    return _table(["status", "check", "segment", "value", "thresholds", "finding"], rows,
                  raw=True)


def _example_text(example: Any) -> str:
    if isinstance(example, dict):
        return ", ".join(f"{k}={format_example_value(v)}" for k, v in example.items())
    return format_example_value(example)


def _drift_section(latest: list[CheckResult]) -> str:
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
    bad = [r for r in found if r.status not in ("pass", "skipped")]
    counts = {s: sum(r.status == s for r in found) for s in DISPLAY_ORDER}
    out.append(f"<p>{esc(', '.join(f'{v} {k}' for k, v in counts.items() if v))}.</p>")
    if bad:
        out.append(_findings_table(bad))
    rest = [r for r in found if r.status in ("pass", "skipped")]
    if rest:
        out.append(f"<details><summary>Within limits or not yet judged ({len(rest)})"
                   f"</summary>{_findings_table(rest, messages=False)}</details>")
    out.append("</section>")
    return "".join(out)


def _timeline_section(data: ReportData, ids: _Ids, counter: list[int]) -> str:
    fig = data.figures
    out = ['<section id="timeline"><h2>Breach timeline</h2>',
           "<p>Every figure that breached a threshold in the cycles shown: one row each, one "
           "column per cycle (last attempt). Markers give the status; a bar under the "
           "markers is a waiver that covered those cycles (its number in the table).</p>"]
    if not len(fig) or not data.cycles:
        out.append("<p>No recorded figures.</p></section>")
        return "".join(out)
    key = ["check", "segment", "measure", "lag", "variant"]
    breached = fig.loc[fig["status"].isin(_BREACHED)]
    if not len(breached):
        out.append("<p>No figure breached a threshold in these cycles.</p></section>")
        return "".join(out)
    last_cycle = data.cycles[-1]
    stats = breached.groupby(key, dropna=False, sort=False).agg(
        n=("cycle", "size"), last=("cycle", "max")).reset_index()
    stats["now"] = stats["last"] == last_cycle
    stats = stats.sort_values(["now", "last", "n"], ascending=[False, False, False],
                              kind="stable")
    total = len(stats)
    stats = stats.head(MAX_TIMELINE_ROWS)
    wanted = fig.merge(stats[key], on=key, how="inner")
    cyc_index = {c: i for i, c in enumerate(data.cycles)}
    n = len(data.cycles)
    groups = wanted.groupby(key, dropna=False, sort=False).indices
    cyc, st, wid = (wanted["cycle"].to_numpy(), wanted["status"].to_numpy(),
                    wanted["waiver_id"].to_numpy())
    waivers = {w.id: w for w in data.waivers}
    rows: list[tuple[str, list[str | None], list[tuple[int, int, str]]]] = []
    table_rows: list[list[str]] = []
    verdicts: list[str | None] = [None] * n
    for c, run in data.cycle_runs.items():
        if c in cyc_index:
            verdicts[cyc_index[c]] = run["status"]
    rows.append(("verdict of the run (last attempt)", verdicts, []))
    for rec in stats.itertuples(index=False):
        k = (rec.check, rec.segment, rec.measure, rec.lag, rec.variant)
        idx = groups.get(k)
        if idx is None:
            continue
        states: list[str | None] = [None] * n
        wcol: list[int | None] = [None] * n
        for i in idx:
            j = cyc_index.get(cyc[i])
            if j is None:
                continue
            states[j] = str(st[i])
            w = wid[i]
            wcol[j] = int(w) if w is not None and not pd.isna(w) else None
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
        lag = "" if rec.lag is None or pd.isna(rec.lag) else f" lag {int(rec.lag)}"
        what = _measure_label(rec.measure) + (f" ({rec.variant})" if rec.variant else "")
        check = ("" if rec.check == "accuracy"
                 else f" [{_CHECK_TAGS.get(rec.check, rec.check)}]")
        label = f"{_seg(rec.segment)} · {what}{lag}{check}"
        rows.append((label, states, spans))
        marks = [f"{data.cycles[j]}: {states[j]}" for j in range(n)
                 if states[j] in _BREACHED]
        wtext = "; ".join(t for _, _, t in spans) or "—"
        table_rows.append([label, str(len(marks)), ", ".join(marks), wtext])
    title = f"Breached figures × {n} cycles"
    desc = (f"{total} figure(s) breached a threshold in at least one cycle"
            + (f" (the {MAX_TIMELINE_ROWS} most recent shown)" if total > MAX_TIMELINE_ROWS
               else "")
            + f"; {int(stats['now'].sum())} are breached in the latest cycle {last_cycle}.")
    svg = timeline_chart(rows, data.cycles, title=title, desc=desc, uid=ids())
    counter[0] += 1
    out.append(_figure(svg, desc, _table(["figure", "breached cycles", "cycles (status)",
                                          "waivers"], table_rows)))
    out.append("</section>")
    return "".join(out)


def _waivers_section(data: ReportData) -> str:
    out = ['<section id="waivers"><h2>Waivers</h2>']
    if not data.waivers:
        out.append("<p>No waiver has been granted.</p></section>")
        return "".join(out)
    rows = []
    for w in data.waivers:
        d = w.to_dict(data.generated_at)
        revoked = (f"revoked {d['revoked_at'][:16]} by {w.revoked_by}: {w.revoke_reason}"
                   if w.revoked_at else "")
        rows.append([f"#{w.id}", d["state"], _seg(w.segment), w.measure,
                     "every lag" if w.lag is None else str(w.lag), w.until.isoformat(),
                     w.created_by, d["created_at"][:16], w.reason, revoked])
    out.append(_table(["waiver", "state", "segment", "measure", "lag", "until (UTC, incl.)",
                       "by", "granted (UTC)", "reason", "revoked"], rows))
    out.append("</section>")
    return "".join(out)


def _worst_section(latest: list[CheckResult]) -> str:
    out = ['<section id="worst"><h2>Worst series</h2>',
           "<p>For each breached accuracy result of the latest run, the series that contribute "
           "most to the segment's error (or to its bias, for bias measures). Error = actual − "
           "forecast: positive is under-forecast.</p>"]
    found = [r for r in latest if r.examples and r.check == "accuracy"
             and r.status in ("warn", "fail", "waived")]
    found.sort(key=lambda r: (DISPLAY_ORDER.get(r.status, 9), str(r.segment), r.measure or ""))
    if not found:
        out.append("<p>No breached accuracy result lists worst series.</p></section>")
        return "".join(out)
    for r in found[:MAX_WORST_RESULTS]:
        out.append(f"<h3>{_status_cell(r.status)} {esc(_measure_label(r.measure))} of "
                   f"{esc(_seg(r.segment))} at lag {esc(r.lag)}: {esc(describe_value(r))}</h3>")
        cols: list[str] = []
        for e in r.examples:
            if isinstance(e, dict):
                cols += [c for c in e if c not in cols]
        # the series' own columns first, then the figures behind the ranking
        cols.sort(key=lambda c: (_EXAMPLE_FIGURES.index(c) if c in _EXAMPLE_FIGURES else -1))
        rows = []
        for e in r.examples:
            if not isinstance(e, dict):
                rows.append([_example_text(e)] + [""] * len(cols))
                continue
            err = e.get("error")
            words = ""
            if isinstance(err, int | float) and math.isfinite(err):
                words = ("under-forecast" if err > 0 else "over-forecast" if err < 0
                         else "no bias")
            rows.append([format_example_value(e.get(c)) if c in e else "" for c in cols]
                        + [words])
        out.append(_table([*cols, "direction"], rows))
    if len(found) > MAX_WORST_RESULTS:
        out.append(f"<p>{len(found) - MAX_WORST_RESULTS} more breached result(s) with worst "
                   "series: see the run's JSON (<code>--json</code>).</p>")
    out.append("</section>")
    return "".join(out)


# --------------------------------------------------------------------------------- page


def render_report(data: ReportData) -> RenderedReport:
    """The whole page for ``data``."""
    ids = _Ids()
    counter = [0]
    directions = _directions()
    latest = data.latest_results
    if data.empty:
        body = ("<header><h1>Forecast accuracy report</h1>"
                f'<p class="muted">Audit store {esc(data.store_url)}</p></header><main>'
                "<p>No run is recorded in this store"
                + (f" for cycles issued on or after {esc(data.since.isoformat())}"
                   if data.since else "")
                + ": run <code>accuracy-checks run</code> first.</p></main>")
        segments = 0
    else:
        trends, segments = _trend_section(data, latest, ids, directions, counter)
        body = "".join([
            _header(data, latest), _nav(), "<main>",
            _measures_section(latest, ids, directions, counter),
            _bias_section(latest, ids, counter),
            trends,
            _coverage_section(latest),
            _drift_section(latest),
            _timeline_section(data, ids, counter),
            _waivers_section(data),
            _worst_section(latest),
            "</main>",
        ])
    from accuracy_checks import __version__

    # no leading or trailing whitespace: the CSP hash is of the exact text, and some checkers
    # (the Nu HTML checker) hash the stylesheet's text trimmed
    css = (CSS + lag_css()).strip()
    page = (
        "<!DOCTYPE html>\n<html lang=\"en\"><head><meta charset=\"utf-8\">"
        f'<meta http-equiv="Content-Security-Policy" content="{esc(_csp(css))}">'
        '<meta name="viewport" content="width=device-width, initial-scale=1">'
        '<meta name="referrer" content="no-referrer">'
        f"<title>{esc(_page_title(data))}</title><style>{css}</style></head><body>"
        f"{pattern_defs()}{body}"
        f"<footer>accuracy-checks {esc(__version__)} · a self-contained page: no script, "
        "nothing loaded from the network. Statuses are words and marker shapes, never colour "
        "alone.</footer></body></html>\n"
    )
    return RenderedReport(page, counter[0], segments, len(data.cycles))


def _page_title(data: ReportData) -> str:
    run = data.latest or {}
    if not run:
        return "Forecast accuracy report"
    return (f"Forecast accuracy report: {str(run.get('status', '')).upper()} — cycle "
            f"{run.get('cycle') or '—'}")
