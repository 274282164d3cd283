"""Inline SVG charts of the report: no dependency, no script, every string escaped.

Readable without colour: each status has its own marker shape (pass ●, warn ▲, fail ■,
waived ◇, skipped –) and its word in every table; each lag has its own line pattern and
marker; threshold zones are hatched (warn: sparse diagonal lines, fail: cross-hatch) and
labelled. The palette is this project's own, chosen so that its colours also differ in
lightness (they stay apart in greyscale and for the common colour-vision deficiencies).

Every chart is an ``<svg role="img">`` whose ``<title>`` and ``<desc>`` say what it shows in
words; the page adds a data table beside each chart. Marker glyphs of one kind are merged
into a single ``<path>`` so that large reports stay small. Coordinates are rounded to 0.1 px.
"""

from __future__ import annotations

import html
import math
import re
from collections.abc import Iterable, Sequence
from dataclasses import dataclass, field

__all__ = [
    "BAND_PATTERNS",
    "LAG_STYLES",
    "STATUS_STYLE",
    "Band",
    "DotRow",
    "Line",
    "bias_chart",
    "dot_chart",
    "esc",
    "lag_css",
    "legend_swatch",
    "marker_path",
    "nice_ticks",
    "pattern_defs",
    "timeline_chart",
    "trend_chart",
]

#: status → (fill colour, marker shape, word); shapes carry the meaning, colour only helps
STATUS_STYLE: dict[str, tuple[str, str, str]] = {
    "pass": ("#2e6e8e", "circle", "pass"),
    "warn": ("#b57600", "triangle", "warn"),
    "fail": ("#9c1d5a", "square", "fail"),
    "error": ("#9c1d5a", "cross", "error"),
    "waived": ("#555555", "diamond", "waived"),
    "skipped": ("#8a8a8a", "dash", "skipped"),
}
#: line styles of lags in trend charts: (colour, dash pattern, marker shape)
LAG_STYLES: tuple[tuple[str, str, str], ...] = (
    ("#1f4e79", "", "circle"),
    ("#c4561d", "6 3", "square"),
    ("#3f7a35", "2 3", "triangle"),
    ("#6a4a9c", "8 3 2 3", "diamond"),
)
#: id → (stroke colour, background) of the hatch patterns of threshold zones
BAND_PATTERNS: dict[str, tuple[str, str]] = {
    "ac-warn-zone": ("#c99a2e", "#fbf1d8"),
    "ac-fail-zone": ("#b0487a", "#f7dde8"),
    "ac-drift-zone": ("#777777", "#f0f0f0"),
}
#: code points the HTML standard forbids in a document: controls other than whitespace (C0 and
#: C1), surrogates (they cannot even be written as UTF-8) and the non-characters
_FORBIDDEN = re.compile(
    "[\x00-\x08\x0b\x0c\x0e-\x1f\x7f-\x9f\ud800-\udfff\ufdd0-\ufdef"
    + "".join(chr(plane + 0xFFFE) + chr(plane + 0xFFFF) for plane in range(0, 0x110000, 0x10000))
    + "]")


def esc(text: object) -> str:
    r"""Text for HTML or SVG: escaped (``<``, ``>``, ``&``, quotes), and every code point the
    HTML standard forbids (controls, surrogates, non-characters) replaced by U+FFFD, so that
    nothing from the data can become markup, break the file or make it non-conforming.

    >>> esc('<script>alert(1)</script> & "x"')
    '&lt;script&gt;alert(1)&lt;/script&gt; &amp; &quot;x&quot;'
    >>> esc("a\tb\x85c\ufdd0\udc80") == "a\tb\ufffdc\ufffd\ufffd"
    True
    """
    return html.escape(_FORBIDDEN.sub("\ufffd", str(text)), quote=True)


def _f(value: float) -> str:
    """A coordinate rounded to 0.1 px, without a trailing ``.0``."""
    text = f"{value:.1f}"
    if text.endswith(".0"):
        text = text[:-2]
    return "0" if text == "-0" else text


def marker_path(shape: str, x: float, y: float, r: float) -> str:
    """The ``d`` fragment of one marker of ``shape`` centred at (x, y), radius ``r``."""
    if shape == "circle":
        arc = f"a{_f(r)} {_f(r)} 0 1 0"
        return f"M{_f(x - r)} {_f(y)}{arc} {_f(2 * r)} 0{arc} {_f(-2 * r)} 0z"
    if shape == "square":
        s = r * 0.9
        return f"M{_f(x - s)} {_f(y - s)}h{_f(2 * s)}v{_f(2 * s)}h{_f(-2 * s)}z"
    if shape == "triangle":
        return f"M{_f(x)} {_f(y - r * 1.2)}l{_f(r * 1.1)} {_f(r * 2)}h{_f(-r * 2.2)}z"
    if shape == "diamond":
        s = r * 1.25
        return f"M{_f(x)} {_f(y - s)}l{_f(s)} {_f(s)}l{_f(-s)} {_f(s)}l{_f(-s)} {_f(-s)}z"
    if shape == "cross":
        s = r
        return (f"M{_f(x - s)} {_f(y - s)}l{_f(2 * s)} {_f(2 * s)}"
                f"M{_f(x + s)} {_f(y - s)}l{_f(-2 * s)} {_f(2 * s)}")
    if shape == "dash":
        return f"M{_f(x - r)} {_f(y)}h{_f(2 * r)}"
    raise ValueError(f"unknown marker shape {shape!r}")


def _markers(shape: str, points: Iterable[tuple[float, float]], r: float, fill: str,
             *, hollow: bool = False, cls: str = "") -> str:
    d = "".join(marker_path(shape, x, y, r) for x, y in points)
    if not d:
        return ""
    klass = f' class="{cls}"' if cls else ""
    if hollow or shape in ("cross", "dash"):
        return (f'<path{klass} d="{d}" fill="{"#ffffff" if hollow else "none"}" '
                f'stroke="{fill}" stroke-width="1.6"/>')
    return f'<path{klass} d="{d}" fill="{fill}" stroke="#ffffff" stroke-width="0.6"/>'


def status_markers(status: str, points: Iterable[tuple[float, float]], r: float,
                   cls: str = "") -> str:
    """Markers of ``status`` (its shape and colour) at ``points``, as one path."""
    colour, shape, _ = STATUS_STYLE.get(status, STATUS_STYLE["skipped"])
    return _markers(shape, points, r, colour, hollow=status == "waived", cls=cls)


def legend_swatch(status: str, *, size: int = 14) -> str:
    """A small standalone SVG of a status marker (for legends and tables)."""
    half = size / 2
    return (f'<svg class="swatch" width="{size}" height="{size}" viewBox="0 0 {size} {size}" '
            f'aria-hidden="true">{status_markers(status, [(half, half)], size * 0.32)}</svg>')


def pattern_defs() -> str:
    """One hidden SVG with the hatch patterns every chart refers to (``url(#ac-…)``)."""
    parts = []
    for pid, (stroke, bg) in BAND_PATTERNS.items():
        cross = pid == "ac-fail-zone"
        lines = f'<path d="M0 0L8 8M-2 6L2 10M6 -2L10 2" stroke-width="1.1" stroke="{stroke}"/>'
        if cross:
            lines += (f'<path d="M8 0L0 8M-2 2L2 -2M6 10L10 6" stroke-width="1.1" '
                      f'stroke="{stroke}"/>')
        if pid == "ac-drift-zone":
            lines = f'<path d="M0 4H8" stroke-width="0.9" stroke="{stroke}"/>'
        parts.append(f'<pattern id="{pid}" width="8" height="8" patternUnits="userSpaceOnUse">'
                     f'<rect width="8" height="8" fill="{bg}"/>{lines}</pattern>')
    for i, (colour, _, shape) in enumerate(LAG_STYLES):
        parts.append(f'<marker id="ac-lag{i}" viewBox="-4 -4 8 8" markerWidth="6.4" '
                     'markerHeight="6.4" markerUnits="userSpaceOnUse" refX="0" refY="0">'
                     f'<path d="{marker_path(shape, 0, 0, 2.6)}" fill="{colour}"/></marker>')
    return ('<svg class="defs" width="0" height="0" aria-hidden="true" focusable="false">'
            f'<defs>{"".join(parts)}</defs></svg>')


def lag_css() -> str:
    """CSS of the lag lines: colour, dash pattern and the marker at every point."""
    rules = []
    for i, (colour, dash, _) in enumerate(LAG_STYLES):
        dashed = f";stroke-dasharray:{dash}" if dash else ""
        rules.append(f"svg .lag{i}{{fill:none;stroke:{colour};stroke-width:1.6{dashed};"
                     f"marker-start:url(#ac-lag{i});marker-mid:url(#ac-lag{i});"
                     f"marker-end:url(#ac-lag{i})}}")
    return "\n".join(rules)


def nice_ticks(low: float, high: float, count: int = 5) -> list[float]:
    """About ``count`` round tick values (1, 2, 2.5 or 5 × 10^k apart) covering [low, high].

    >>> nice_ticks(0, 37)
    [0.0, 10.0, 20.0, 30.0, 40.0]
    >>> nice_ticks(-12.5, 3.2, 4)
    [-20.0, -10.0, 0.0, 10.0]
    """
    if not (math.isfinite(low) and math.isfinite(high)):
        return []
    if high <= low:
        high = low + (abs(low) or 1.0)
    raw = (high - low) / max(count - 1, 1)
    power = 10 ** math.floor(math.log10(raw))
    step = next(m * power for m in (1, 2, 2.5, 5, 10) if m * power >= raw)
    first = math.floor(low / step) * step
    ticks = []
    value = first
    while value < high + step * 0.999:
        ticks.append(round(value, 10))
        value += step
        if len(ticks) > 50:
            break
    return [float(t) + 0.0 for t in ticks]


def _tick_text(value: float) -> str:
    from accuracy_checks.outputs.wording import format_number

    return format_number(value)


class _Scale:
    def __init__(self, d0: float, d1: float, r0: float, r1: float) -> None:
        if d1 == d0:
            d1 = d0 + 1.0
        self.d0, self.d1, self.r0, self.r1 = d0, d1, r0, r1

    def __call__(self, v: float) -> float:
        return self.r0 + (v - self.d0) / (self.d1 - self.d0) * (self.r1 - self.r0)

    def clamp(self, v: float) -> float:
        lo, hi = min(self.r0, self.r1), max(self.r0, self.r1)
        return min(max(self(v), lo), hi)


def _svg_open(width: float, height: float, title: str, desc: str, uid: str,
              cls: str = "chart") -> str:
    return (f'<svg class="{cls}" role="img" width="{_f(width)}" height="{_f(height)}" '
            f'viewBox="0 0 {_f(width)} {_f(height)}" aria-labelledby="{uid}-t {uid}-d">'
            f'<title id="{uid}-t">{esc(title)}</title><desc id="{uid}-d">{esc(desc)}</desc>')


def _short(text: str, n: int) -> str:
    return text if len(text) <= n else text[: n - 1] + "…"


# --------------------------------------------------------------------------- zones


@dataclass(frozen=True)
class Band:
    """Threshold levels over a span: ``warn``/``fail`` as recorded (a number or a
    ``(low, high)`` pair) and the measure's direction (``lower``, ``higher``,
    ``centered``)."""

    warn: float | tuple[float, float] | None
    fail: float | tuple[float, float] | None
    direction: str


def _zones(band: Band) -> list[tuple[str, float, float]]:
    """The (pattern, from, to) value intervals of the warn and fail zones (±inf open)."""
    inf = math.inf
    out: list[tuple[str, float, float]] = []

    def pair(b: float | tuple[float, float]) -> tuple[float, float]:
        if isinstance(b, tuple):
            return float(b[0]), float(b[1])
        v = float(b)
        return (-abs(v), abs(v)) if band.direction == "centered" else (v, v)

    w, f = band.warn, band.fail
    if band.direction == "lower":
        if w is not None:
            out.append(("ac-warn-zone", pair(w)[1], pair(f)[1] if f is not None else inf))
        if f is not None:
            out.append(("ac-fail-zone", pair(f)[1], inf))
    elif band.direction == "higher":
        if w is not None:
            out.append(("ac-warn-zone", pair(f)[0] if f is not None else -inf, pair(w)[0]))
        if f is not None:
            out.append(("ac-fail-zone", -inf, pair(f)[0]))
    else:
        if w is not None:
            wl, wh = pair(w)
            fl, fh = pair(f) if f is not None else (-inf, inf)
            out += [("ac-warn-zone", wh, fh), ("ac-warn-zone", fl, wl)]
        if f is not None:
            fl, fh = pair(f)
            out += [("ac-fail-zone", fh, inf), ("ac-fail-zone", -inf, fl)]
    return [(p, a, b) for p, a, b in out if b > a]


def band_values(band: Band) -> list[float]:
    """The finite levels of a band (to fit an axis around them)."""
    out: list[float] = []
    for b in (band.warn, band.fail):
        if b is None:
            continue
        if isinstance(b, tuple):
            out += [float(b[0]), float(b[1])]
        elif band.direction == "centered":
            out += [-abs(float(b)), abs(float(b))]
        else:
            out.append(float(b))
    return [v for v in out if math.isfinite(v)]


def _zone_rects(band: Band, x0: float, x1: float, scale: _Scale) -> str:
    parts = []
    for pattern, a, b in _zones(band):
        ya, yb = scale.clamp(a), scale.clamp(b)
        top, h = min(ya, yb), abs(ya - yb)
        if h < 0.05 or x1 - x0 < 0.05:
            continue
        parts.append(f'<rect x="{_f(x0)}" y="{_f(top)}" width="{_f(x1 - x0)}" height="{_f(h)}" '
                     f'fill="url(#{pattern})"/>')
    return "".join(parts)


def _hzone_rects(band: Band, y0: float, y1: float, scale: _Scale) -> str:
    parts = []
    for pattern, a, b in _zones(band):
        xa, xb = scale.clamp(a), scale.clamp(b)
        left, w = min(xa, xb), abs(xa - xb)
        if w < 0.05:
            continue
        parts.append(f'<rect x="{_f(left)}" y="{_f(y0)}" width="{_f(w)}" height="{_f(y1 - y0)}" '
                     f'fill="url(#{pattern})"/>')
    return "".join(parts)


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
    x = _Scale(lo, hi, left, width - right)
    out = [_svg_open(width, height, title, desc, uid)]
    grid = []
    for t in ticks:
        gx = x(t)
        grid.append(f'<line x1="{_f(gx)}" y1="{top}" x2="{_f(gx)}" y2="{_f(height - bottom)}" '
                    f'class="{"zero" if t == 0 else "grid"}"/>'
                    f'<text x="{_f(gx)}" y="{_f(height - bottom + 14)}" class="tick" '
                    f'text-anchor="middle">{esc(_tick_text(t))}</text>')
    by_status: dict[str, list[tuple[float, float]]] = {}
    rows_svg = []
    for i, r in enumerate(rows):
        cy = top + row_h * i + row_h / 2
        if r.band is not None:
            rows_svg.append(_hzone_rects(r.band, cy - row_h / 2 + 1, cy + row_h / 2 - 1, x))
        rows_svg.append(f'<text x="{left - 8}" y="{_f(cy + 4)}" class="label" '
                        f'text-anchor="end">{esc(_short(r.label, 28))}<title>{esc(r.label)}'
                        f'</title></text>')
        rows_svg.append(f'<text x="{width - right + 10}" y="{_f(cy + 4)}" class="value">'
                        f'{esc(_short(r.text, 24))}</text>')
        if r.value is not None and math.isfinite(r.value):
            by_status.setdefault(r.status, []).append((x.clamp(r.value), cy))
    out += rows_svg + grid
    if unit_label:
        out.append(f'<text x="{_f((left + width - right) / 2)}" y="{height - 2}" class="axis" '
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
    x = _Scale(-lim, lim, left, width - right)
    zero = x(0)
    out = [_svg_open(width, height, title, desc, uid)]
    out.append(f'<text x="{_f(zero - 6)}" y="14" class="axis" text-anchor="end">'
               f'◀ over-forecast</text>'
               f'<text x="{_f(zero + 6)}" y="14" class="axis">under-forecast ▶</text>')
    for t in ticks:
        gx = x(t)
        out.append(f'<line x1="{_f(gx)}" y1="{top}" x2="{_f(gx)}" y2="{_f(height - bottom)}" '
                   f'class="{"zero" if t == 0 else "grid"}"/><text x="{_f(gx)}" '
                   f'y="{_f(height - bottom + 14)}" class="tick" text-anchor="middle">'
                   f'{esc(_tick_text(abs(t)))}{esc(" " + unit if unit else "")}</text>')
    for i, (label, value, words) in enumerate(rows):
        cy = top + row_h * i + row_h / 2
        out.append(f'<text x="{left - 8}" y="{_f(cy + 4)}" class="label" text-anchor="end">'
                   f'{esc(_short(label, 28))}<title>{esc(label)}</title></text>'
                   f'<text x="{width - right + 10}" y="{_f(cy + 4)}" class="value">'
                   f'{esc(_short(words, 28))}</text>')
        if value is None or not math.isfinite(value):
            continue
        xv = x.clamp(value)
        x0, w = min(zero, xv), abs(xv - zero)
        cls = "bar-under" if value > 0 else "bar-over"
        out.append(f'<rect x="{_f(x0)}" y="{_f(cy - 6)}" width="{_f(max(w, 0.8))}" height="12" '
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


def trend_chart(spec: TrendSpec, *, title: str, desc: str, uid: str, width: int = 380,
                height: int = 180) -> str:
    """Values over cycles with hatched threshold zones, dotted drift limits, status markers
    on breached points and rings on drift signals."""
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
    y = _Scale(lo, hi, height - bottom, top)
    step = (width - left - right) / max(n, 1)
    x = [left + step * (i + 0.5) for i in range(n)]
    out = [_svg_open(width, height, title, desc, uid)]
    # zones per run of equal bands
    i = 0
    while i < n:
        band = spec.bands[i] if i < len(spec.bands) else None
        j = i
        while j + 1 < n and (spec.bands[j + 1] if j + 1 < len(spec.bands) else None) == band:
            j += 1
        if band is not None:
            out.append(_zone_rects(band, left + step * i, left + step * (j + 1), y))
        i = j + 1
    for t in ticks:
        gy = y(t)
        out.append(f'<line x1="{left}" y1="{_f(gy)}" x2="{width - right}" y2="{_f(gy)}" '
                   f'class="{"zero" if t == 0 else "grid"}"/><text x="{left - 4}" '
                   f'y="{_f(gy + 3.5)}" class="tick" text-anchor="end">{esc(_tick_text(t))}'
                   '</text>')
    for k in _label_positions(n, 3):
        end = k == n - 1 and n > 1
        out.append(f'<text x="{_f(x[k] + step / 2 if end else x[k])}" '
                   f'y="{height - bottom + 13}" class="tick" '
                   f'text-anchor="{"end" if end else "middle"}">{esc(spec.cycles[k][:10])}</text>')
    out.append(f'<line x1="{left}" y1="{height - bottom}" x2="{width - right}" '
               f'y2="{height - bottom}" class="axisline"/>')
    # drift limits: dotted step lines
    for side in (0, 1):
        d = []
        for k in range(min(n, len(spec.limits))):
            pair = spec.limits[k]
            v = pair[side] if pair else None
            if v is None or not math.isfinite(v):
                continue
            gy = y.clamp(v)
            d.append(f"M{_f(left + step * k)} {_f(gy)}h{_f(step)}")
        if d:
            out.append(f'<path d="{"".join(d)}" class="limit"/>')
    # lines: one path per lag; its CSS class draws the lag's marker at every point
    status_pts: dict[str, list[tuple[float, float]]] = {}
    for ln in spec.lines:
        d, run = [], 0
        for k, v in enumerate(ln.values[:n]):
            if v is None or not math.isfinite(v):
                if run == 1:
                    d.append("l0 0")  # a lone point still gets its marker
                run = 0
                continue
            gx, gy = x[k], y.clamp(v)
            d.append(f"{'L' if run else 'M'}{_f(gx)} {_f(gy)}")
            run += 1
            st = ln.statuses[k] if k < len(ln.statuses) else "pass"
            if st in ("warn", "fail", "waived", "error"):
                status_pts.setdefault(st, []).append((gx, gy))
        if run == 1:
            d.append("l0 0")
        if d:
            out.append(f'<path d="{"".join(d)}" class="lag{ln.style % len(LAG_STYLES)}"/>')
    rings = [(x[k], y.clamp(v)) for k in range(n)
             if k < len(spec.drift_signals) and spec.drift_signals[k]
             for v in [spec.lines[0].values[k] if spec.lines else None]
             if v is not None and math.isfinite(v)]
    if rings:
        ring_d = "".join(marker_path("circle", gx, gy, 7.5) for gx, gy in rings)
        out.append(f'<path d="{ring_d}" class="ring"/>')
    out += [status_markers(s, pts, 4.6) for s, pts in status_pts.items()]
    out.append("</svg>")
    return "".join(out)


def _label_positions(n: int, most: int = 4) -> list[int]:
    """At most ``most`` evenly spaced columns to label, always the last (newest) one.

    >>> _label_positions(6), _label_positions(52), _label_positions(3)
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
    out = [_svg_open(width, height, title, desc, uid)]
    pts: dict[str, list[tuple[float, float]]] = {}
    bars = []
    for i, (label, states, spans) in enumerate(rows):
        cy = top + row_h * i + row_h / 2
        if i % 2:
            out.append(f'<rect x="0" y="{_f(cy - row_h / 2)}" width="{width}" height="{row_h}" '
                       'class="stripe"/>')
        out.append(f'<text x="{left - 8}" y="{_f(cy + 4)}" class="label" text-anchor="end">'
                   f'{esc(_short(label, 46))}<title>{esc(label)}</title></text>')
        for k, st in enumerate(states[:n]):
            if st is None or st == "skipped":
                continue
            pts.setdefault(st, []).append((left + step * (k + 0.5), cy))
        for a, b, text in spans:
            bx = left + step * a + 1
            bars.append(f'<rect x="{_f(bx)}" y="{_f(cy + 4.5)}" '
                        f'width="{_f(step * (b - a + 1) - 2)}" height="3" class="waiver-bar">'
                        f'<title>{esc(text)}</title></rect>')
    for k in _label_positions(n, 8):
        end = k == n - 1 and n > 1
        out.append(f'<text x="{_f(left + step * (k + (1 if end else 0.5)))}" '
                   f'y="{height - bottom + 14}" class="tick" '
                   f'text-anchor="{"end" if end else "middle"}">{esc(cycles[k][:10])}</text>')
    out += bars
    small = pts.pop("pass", [])
    if small:
        d = "".join(marker_path("circle", gx, gy, 1.6) for gx, gy in small)
        out.append(f'<path d="{d}" fill="{STATUS_STYLE["pass"][0]}"/>')
    out += [status_markers(s, p, 4.2) for s, p in pts.items()]
    out.append("</svg>")
    return "".join(out)
