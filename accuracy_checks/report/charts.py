"""The report's charts as inline SVG: the dot chart, the bias chart, the trend chart and the
breach timeline.

Every chart is an ``<svg role="img">`` whose ``<title>`` and ``<desc>`` say what it shows in
words; the page adds a data table beside each chart. Markers, zones and scales come from
:mod:`accuracy_checks.report.svg`; every string from the data goes through its ``esc``.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Sequence
from dataclasses import dataclass, field

from accuracy_checks.report.svg import (
    LAG_STYLES,
    STATUS_STYLE,
    Band,
    Scale,
    band_values,
    esc,
    hzone_rects,
    marker_path,
    nice_ticks,
    px,
    shorten,
    status_markers,
    svg_open,
    tick_text,
    zone_rects,
)
from accuracy_checks.results import NEEDS_ATTENTION

__all__ = [
    "DotRow",
    "Line",
    "TrendSpec",
    "bias_chart",
    "dot_chart",
    "label_positions",
    "timeline_chart",
    "trend_chart",
]


def _value_grid(ticks: Sequence[float], x: Scale, top: float, bottom: float,
                text: Callable[[float], str]) -> list[str]:
    """Vertical grid lines at ``ticks`` (the zero line stands out) with their labels below."""
    return [f'<line x1="{px(x(t))}" y1="{top}" x2="{px(x(t))}" y2="{px(bottom)}" '
            f'class="{"zero" if t == 0 else "grid"}"/><text x="{px(x(t))}" '
            f'y="{px(bottom + 14)}" class="tick" text-anchor="middle">{text(t)}</text>'
            for t in ticks]


def _row_label(x: float, y: float, label: str, n: int) -> str:
    """A row's label, right-aligned at (x, y), cut to ``n`` characters (in full as its title)."""
    return (f'<text x="{x}" y="{px(y)}" class="label" text-anchor="end">'
            f'{esc(shorten(label, n))}<title>{esc(label)}</title></text>')


def _circles(points: Sequence[tuple[float, float]], r: float, attrs: str) -> list[str]:
    """Circles of radius ``r`` at ``points`` as one path with ``attrs`` (none: no path)."""
    if not points:
        return []
    return [f'<path d="{"".join(marker_path("circle", x, y, r) for x, y in points)}" {attrs}/>']


def _cycle_labels(cycles: Sequence[str], left: float, step: float, y: float,
                  most: int) -> list[str]:
    """Labels under at most ``most`` cycle columns (``step`` wide from ``left``): centred,
    the newest one's right-aligned to its column's end."""
    n = len(cycles)
    out = []
    for k in label_positions(n, most):
        end = k == n - 1 and n > 1
        out.append(f'<text x="{px(left + step * (k + (1 if end else 0.5)))}" y="{y}" '
                   f'class="tick" text-anchor="{"end" if end else "middle"}">'
                   f"{esc(cycles[k][:10])}</text>")
    return out


# --------------------------------------------------------------------------- dot chart


@dataclass(frozen=True)
class DotRow:
    """One row of a dot chart: a label, its value (None: undefined), status, text and band."""

    label: str
    value: float | None
    status: str
    text: str
    band: Band | None = None


def dot_chart(rows: Sequence[DotRow], *, title: str, desc: str, uid: str,
              unit_label: str = "", width: int = 720) -> str:
    """One row per segment: the value as a status marker over its hatched warn/fail zones."""
    row_h, top, bottom = 18, 8, 30
    left, right = 190, 150
    height = top + bottom + row_h * max(len(rows), 1)
    values = [r.value for r in rows if r.value is not None and math.isfinite(r.value)]
    levels = [v for r in rows if r.band is not None for v in band_values(r.band)]
    span = values + levels
    lo, hi = (min(span), max(span)) if span else (0.0, 1.0)
    if lo > 0 and (not values or min(values) >= 0):
        lo = 0.0
    pad = (hi - lo) * 0.06 or 1.0
    ticks = nice_ticks(lo - pad if lo < 0 else lo, hi + pad)
    lo, hi = (ticks[0], ticks[-1]) if ticks else (lo, hi)
    x = Scale(lo, hi, left, width - right)
    out = [svg_open(width, height, title, desc, uid)]
    by_status: dict[str, list[tuple[float, float]]] = {}
    for i, r in enumerate(rows):
        cy = top + row_h * i + row_h / 2
        if r.band is not None:
            out.append(hzone_rects(r.band, cy - row_h / 2 + 1, cy + row_h / 2 - 1, x))
        out.append(_row_label(left - 8, cy + 4, r.label, 28))
        out.append(f'<text x="{width - right + 10}" y="{px(cy + 4)}" class="value">'
                   f'{esc(shorten(r.text, 24))}</text>')
        if r.value is not None and math.isfinite(r.value):
            by_status.setdefault(r.status, []).append((x.clamp(r.value), cy))
    out += _value_grid(ticks, x, top, height - bottom, lambda t: esc(tick_text(t)))
    if unit_label:
        out.append(f'<text x="{px((left + width - right) / 2)}" y="{height - 2}" class="axis" '
                   f'text-anchor="middle">{esc(unit_label)}</text>')
    out += [status_markers(s, pts, 5.5) for s, pts in by_status.items()]
    out.append("</svg>")
    return "".join(out)


# --------------------------------------------------------------------------- bias chart


def bias_chart(rows: Sequence[tuple[str, float | None, str]], *, title: str, desc: str,
               uid: str, unit: str = "%", width: int = 720) -> str:
    """Diverging bars from 0: under-forecast (positive error) to the right, solid; over-
    forecast to the left, hatched; each bar's value in words in the right-hand column."""
    row_h, top, bottom = 18, 22, 26
    left, right = 190, 170
    height = top + bottom + row_h * max(len(rows), 1)
    values = [abs(v) for _, v, _ in rows if v is not None and math.isfinite(v)]
    m = max(values, default=1.0) or 1.0
    ticks = nice_ticks(-m, m)
    lim = max(abs(ticks[0]), abs(ticks[-1])) if ticks else m
    x = Scale(-lim, lim, left, width - right)
    zero = x(0)
    out = [svg_open(width, height, title, desc, uid)]
    out.append(f'<text x="{px(zero - 6)}" y="14" class="axis" text-anchor="end">'
               f'◀ over-forecast</text>'
               f'<text x="{px(zero + 6)}" y="14" class="axis">under-forecast ▶</text>')
    suffix = esc(" " + unit if unit else "")
    out += _value_grid(ticks, x, top, height - bottom, lambda t: esc(tick_text(abs(t))) + suffix)
    for i, (label, value, words) in enumerate(rows):
        cy = top + row_h * i + row_h / 2
        out.append(_row_label(left - 8, cy + 4, label, 28)
                   + f'<text x="{width - right + 10}" y="{px(cy + 4)}" class="value">'
                   f'{esc(shorten(words, 28))}</text>')
        if value is None or not math.isfinite(value):
            continue
        xv = x.clamp(value)
        x0, w = min(zero, xv), abs(xv - zero)
        cls = "bar-under" if value > 0 else "bar-over"
        out.append(f'<rect x="{px(x0)}" y="{px(cy - 6)}" width="{px(max(w, 0.8))}" height="12" '
                   f'class="{cls}"/>')
    out.append("</svg>")
    return "".join(out)


# --------------------------------------------------------------------------- trend chart


@dataclass
class Line:
    """One line of a trend chart: a value (or None) per cycle and each point's status."""

    label: str
    values: list[float | None]
    statuses: list[str]
    style: int = 0


@dataclass
class TrendSpec:
    """A trend chart: cycles on x, lines, threshold bands per cycle, drift limits per cycle."""

    cycles: list[str]
    lines: list[Line]
    bands: list[Band | None] = field(default_factory=list)
    #: (lower, upper) drift limits per cycle (None: not judged that cycle)
    limits: list[tuple[float | None, float | None] | None] = field(default_factory=list)
    #: cycles whose value signalled drift (ringed)
    drift_signals: list[bool] = field(default_factory=list)


@dataclass(frozen=True)
class _Frame:
    """Where a trend chart draws: margins, the value scale and each cycle's column."""

    width: int
    height: int
    left: int
    right: int
    bottom: int
    y: Scale
    step: float
    x: list[float]


def trend_chart(spec: TrendSpec, *, title: str, desc: str, uid: str, width: int = 380,
                height: int = 180) -> str:
    """Values over cycles with hatched threshold zones, dotted drift limits, status markers
    on breached points and rings on drift signals."""
    frame, ticks = _trend_frame(spec, width, height)
    status_pts: dict[str, list[tuple[float, float]]] = {}
    out = [svg_open(width, height, title, desc, uid),
           *_trend_zones(spec, frame), *_trend_axes(spec, frame, ticks),
           *_limit_paths(spec, frame),
           *(_line_path(ln, len(spec.cycles), frame, status_pts) for ln in spec.lines)]
    rings = [(frame.x[k], frame.y.clamp(v)) for k in range(len(spec.cycles))
             if k < len(spec.drift_signals) and spec.drift_signals[k]
             for v in [spec.lines[0].values[k] if spec.lines else None]
             if v is not None and math.isfinite(v)]
    out += _circles(rings, 7.5, 'class="ring"')
    out += [status_markers(s, pts, 4.6) for s, pts in status_pts.items()]
    out.append("</svg>")
    return "".join(out)


def _trend_frame(spec: TrendSpec, width: int, height: int) -> tuple[_Frame, list[float]]:
    """The value axis (data, drift limits and the levels near them) and the cycle columns."""
    left, right, top, bottom = 46, 10, 8, 34
    n = len(spec.cycles)
    vals = [v for ln in spec.lines for v in ln.values if v is not None and math.isfinite(v)]
    lims = [v for p in spec.limits if p for v in p if v is not None and math.isfinite(v)]
    levels = [v for b in spec.bands if b is not None for v in band_values(b)]
    data_span = vals + lims
    lo, hi = (min(data_span), max(data_span)) if data_span else (0.0, 1.0)
    # show a level when it lies near the data (within the data's range again beyond it)
    reach = (hi - lo) or abs(hi) or 1.0
    near = [v for v in levels if lo - reach <= v <= hi + reach]
    if near:
        lo, hi = min(lo, *near), max(hi, *near)
    pad = (hi - lo) * 0.08 or 1.0
    ticks = nice_ticks(lo - pad, hi + pad, 5)
    if ticks:
        lo, hi = ticks[0], ticks[-1]
    step = (width - left - right) / max(n, 1)
    frame = _Frame(width, height, left, right, bottom, Scale(lo, hi, height - bottom, top),
                   step, [left + step * (i + 0.5) for i in range(n)])
    return frame, ticks


def _trend_zones(spec: TrendSpec, f: _Frame) -> list[str]:
    """The threshold zones, one set of rectangles per run of cycles with equal bands."""
    n = len(spec.cycles)
    out = []
    i = 0
    while i < n:
        band = spec.bands[i] if i < len(spec.bands) else None
        j = i
        while j + 1 < n and (spec.bands[j + 1] if j + 1 < len(spec.bands) else None) == band:
            j += 1
        if band is not None:
            out.append(zone_rects(band, f.left + f.step * i, f.left + f.step * (j + 1), f.y))
        i = j + 1
    return out


def _trend_axes(spec: TrendSpec, f: _Frame, ticks: Sequence[float]) -> list[str]:
    """Horizontal grid lines with their values, a few cycle labels, the x axis line."""
    base = f.height - f.bottom
    out = []
    for t in ticks:
        gy = f.y(t)
        out.append(f'<line x1="{f.left}" y1="{px(gy)}" x2="{f.width - f.right}" y2="{px(gy)}" '
                   f'class="{"zero" if t == 0 else "grid"}"/><text x="{f.left - 4}" '
                   f'y="{px(gy + 3.5)}" class="tick" text-anchor="end">{esc(tick_text(t))}'
                   '</text>')
    out += _cycle_labels(spec.cycles, f.left, f.step, base + 13, 3)
    out.append(f'<line x1="{f.left}" y1="{base}" x2="{f.width - f.right}" '
               f'y2="{base}" class="axisline"/>')
    return out


def _limit_paths(spec: TrendSpec, f: _Frame) -> list[str]:
    """The drift limits: a dotted step line for each side that has one."""
    out = []
    for side in (0, 1):
        d = []
        for k in range(min(len(spec.cycles), len(spec.limits))):
            pair = spec.limits[k]
            v = pair[side] if pair else None
            if v is None or not math.isfinite(v):
                continue
            d.append(f"M{px(f.left + f.step * k)} {px(f.y.clamp(v))}h{px(f.step)}")
        if d:
            out.append(f'<path d="{"".join(d)}" class="limit"/>')
    return out


def _line_path(ln: Line, n: int, f: _Frame, status_pts: dict[str, list[tuple[float, float]]]
               ) -> str:
    """One lag's line (its CSS class draws the lag's marker at every point); its breached
    points are added to ``status_pts``."""
    d, run = [], 0
    for k, v in enumerate(ln.values[:n]):
        if v is None or not math.isfinite(v):
            if run == 1:
                d.append("l0 0")  # a lone point still gets its marker
            run = 0
            continue
        gx, gy = f.x[k], f.y.clamp(v)
        d.append(f"{'L' if run else 'M'}{px(gx)} {px(gy)}")
        run += 1
        st = ln.statuses[k] if k < len(ln.statuses) else "pass"
        if st in NEEDS_ATTENTION:
            status_pts.setdefault(st, []).append((gx, gy))
    if run == 1:
        d.append("l0 0")
    return f'<path d="{"".join(d)}" class="lag{ln.style % len(LAG_STYLES)}"/>' if d else ""


def label_positions(n: int, most: int = 4) -> list[int]:
    """At most ``most`` evenly spaced columns to label, always the last (newest) one.

    >>> label_positions(6), label_positions(52), label_positions(3)
    ([1, 3, 5], [12, 25, 38, 51], [0, 1, 2])
    """
    if n <= 0:
        return []
    step = max(1, math.ceil(n / most))
    return list(range(n - 1, -1, -step))[::-1]


# ------------------------------------------------------------------------ timeline chart


def timeline_chart(rows: Sequence[tuple[str, list[str | None], list[tuple[int, int, str]]]],
                   cycles: Sequence[str], *, title: str, desc: str, uid: str,
                   width: int = 1000) -> str:
    """A grid of figures (rows) × cycles (columns): each judged cell shows its status marker
    (pass as a small dot); waivers are bars under their cells, labelled with the waiver's
    number. ``rows`` are (label, status per cycle or None, [(first col, last col, text)])."""
    left, right, top, bottom = 300, 16, 10, 34
    row_h = 16
    n = len(cycles)
    height = top + bottom + row_h * max(len(rows), 1)
    step = (width - left - right) / max(n, 1)
    out = [svg_open(width, height, title, desc, uid)]
    pts: dict[str, list[tuple[float, float]]] = {}
    bars = []
    for i, (label, states, spans) in enumerate(rows):
        cy = top + row_h * i + row_h / 2
        if i % 2:
            out.append(f'<rect x="0" y="{px(cy - row_h / 2)}" width="{width}" height="{row_h}" '
                       'class="stripe"/>')
        out.append(_row_label(left - 8, cy + 4, label, 46))
        for k, st in enumerate(states[:n]):
            if st is None or st == "skipped":
                continue
            pts.setdefault(st, []).append((left + step * (k + 0.5), cy))
        for a, b, text in spans:
            bx = left + step * a + 1
            bars.append(f'<rect x="{px(bx)}" y="{px(cy + 4.5)}" '
                        f'width="{px(step * (b - a + 1) - 2)}" height="3" class="waiver-bar">'
                        f'<title>{esc(text)}</title></rect>')
    out += _cycle_labels(cycles, left, step, height - bottom + 14, 8)
    out += bars
    out += _circles(pts.pop("pass", []), 1.6, f'fill="{STATUS_STYLE["pass"][0]}"')
    out += [status_markers(s, p, 4.2) for s, p in pts.items()]
    out.append("</svg>")
    return "".join(out)
