"""The report page: one self-contained HTML file (inline CSS and SVG, no script, no network).

Sections, in order: the latest run's verdict; each measure by segment against its thresholds;
bias direction per segment; each segment's trend over cycles with its threshold zones and
drift limits; coverage findings; drift and sustained breaches; the breach timeline with its
waivers; the worst series of each breach. Every chart has a ``<title>``, a ``<desc>`` and a
data table (in a ``<details>``) as its text alternative. This module holds the page itself
(head, header, navigation, stylesheet); the sections live in :mod:`.sections`,
:mod:`.trends` and :mod:`.timeline`, their building blocks in :mod:`.blocks`.

Safety: every string from the data goes through :func:`~accuracy_checks.report.svg.esc`; no
attribute value or id comes from the data. A Content-Security-Policy ``<meta>`` forbids every
script, connection, font, image and frame and allows only the page's own stylesheet (by its
SHA-256), so even a string that slipped through escaping could not run.
"""

from __future__ import annotations

import base64
import hashlib
from dataclasses import dataclass
from datetime import UTC

from accuracy_checks.report.blocks import ChartIds, directions, html_table
from accuracy_checks.report.data import ReportData
from accuracy_checks.report.sections import (
    bias_section,
    coverage_section,
    drift_section,
    measures_section,
    waivers_section,
    worst_section,
)
from accuracy_checks.report.svg import esc, lag_css, legend_swatch, pattern_defs
from accuracy_checks.report.timeline import MAX_TIMELINE_ROWS, timeline_section
from accuracy_checks.report.trends import MAX_TREND_SEGMENTS, trend_section
from accuracy_checks.results import DISPLAY_ORDER, CheckResult, worst_status
from accuracy_checks.version import __version__

__all__ = ["CSS", "MAX_TIMELINE_ROWS", "MAX_TREND_SEGMENTS", "RenderedReport", "render_report"]

_VERDICT_WORDS = {"pass": "every check passed", "warn": "warnings only, the gate passes",
                  "fail": "the gate failed"}


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



def render_report(data: ReportData) -> RenderedReport:
    """The whole page for ``data``."""
    ids = ChartIds()
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
        how = directions()
        trends, segments = trend_section(data, latest, ids, how)
        body = "".join([
            _header(data, latest), _nav(), "<main>",
            measures_section(latest, ids, how),
            bias_section(latest, ids),
            trends,
            coverage_section(latest),
            drift_section(latest),
            timeline_section(data, ids),
            waivers_section(data),
            worst_section(latest),
            "</main>",
        ])
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
    return RenderedReport(page, ids.count, segments, len(data.cycles))


def _page_title(data: ReportData) -> str:
    run = data.latest or {}
    if not run:
        return "Forecast accuracy report"
    return (f"Forecast accuracy report: {str(run.get('status', '')).upper()} — cycle "
            f"{run.get('cycle') or '—'}")


def _header(data: ReportData, latest: list[CheckResult]) -> str:
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
            + html_table(["cycle", "attempt", "verdict", "recorded (UTC)", "run", "pipeline label"],
                     rows))


def _nav() -> str:
    links = [("measures", "Measures by segment"), ("bias", "Bias direction"),
             ("trends", "Trends over cycles"), ("coverage", "Coverage findings"),
             ("drift", "Drift and sustained breaches"), ("timeline", "Breach timeline"),
             ("waivers", "Waivers"), ("worst", "Worst series")]
    items = "".join(f'<li><a href="#{k}">{esc(t)}</a></li>' for k, t in links)
    return f'<nav aria-label="Sections"><ul>{items}</ul></nav>'
