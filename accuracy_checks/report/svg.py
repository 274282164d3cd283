"""The report's SVG primitives: palette, markers, hatch patterns, scales, escaping.

Readable without colour: each status has its own marker shape (pass ●, warn ▲, fail ■,
waived ◇, skipped –) and its word in every table; each lag has its own line pattern and
marker; threshold zones are hatched (warn: sparse diagonal lines, fail: cross-hatch) and
labelled. The palette is this project's own, chosen so that its colours also differ in
lightness (they stay apart in greyscale and for the common colour-vision deficiencies).

The charts themselves (:mod:`accuracy_checks.report.charts`) are built from these pieces.
Marker glyphs of one kind are merged into a single ``<path>`` so that large reports stay
small. Coordinates are rounded to 0.1 px (:func:`px`).
"""

from __future__ import annotations

import html
import math
import re
from collections.abc import Iterable
from dataclasses import dataclass

from accuracy_checks.outputs.wording import format_number

__all__ = [
    "BAND_PATTERNS",
    "LAG_STYLES",
    "STATUS_STYLE",
    "Band",
    "Scale",
    "band_values",
    "esc",
    "hzone_rects",
    "lag_css",
    "legend_swatch",
    "marker_path",
    "nice_ticks",
    "pattern_defs",
    "px",
    "shorten",
    "status_markers",
    "svg_open",
    "tick_text",
    "zone_rects",
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


def px(value: float) -> str:
    """A coordinate rounded to 0.1 px, without a trailing ``.0``."""
    text = f"{value:.1f}"
    if text.endswith(".0"):
        text = text[:-2]
    return "0" if text == "-0" else text


def marker_path(shape: str, x: float, y: float, r: float) -> str:
    """The ``d`` fragment of one marker of ``shape`` centred at (x, y), radius ``r``."""
    if shape == "circle":
        arc = f"a{px(r)} {px(r)} 0 1 0"
        return f"M{px(x - r)} {px(y)}{arc} {px(2 * r)} 0{arc} {px(-2 * r)} 0z"
    if shape == "square":
        s = r * 0.9
        return f"M{px(x - s)} {px(y - s)}h{px(2 * s)}v{px(2 * s)}h{px(-2 * s)}z"
    if shape == "triangle":
        return f"M{px(x)} {px(y - r * 1.2)}l{px(r * 1.1)} {px(r * 2)}h{px(-r * 2.2)}z"
    if shape == "diamond":
        s = r * 1.25
        return f"M{px(x)} {px(y - s)}l{px(s)} {px(s)}l{px(-s)} {px(s)}l{px(-s)} {px(-s)}z"
    if shape == "cross":
        s = r
        return (f"M{px(x - s)} {px(y - s)}l{px(2 * s)} {px(2 * s)}"
                f"M{px(x + s)} {px(y - s)}l{px(-2 * s)} {px(2 * s)}")
    if shape == "dash":
        return f"M{px(x - r)} {px(y)}h{px(2 * r)}"
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


def tick_text(value: float) -> str:
    """An axis tick's text, worded as every number of the report."""
    return format_number(value)


class Scale:
    """A linear map of the domain [d0, d1] onto the range [r0, r1] (pixels)."""

    def __init__(self, d0: float, d1: float, r0: float, r1: float) -> None:
        if d1 == d0:
            d1 = d0 + 1.0
        self.d0, self.d1, self.r0, self.r1 = d0, d1, r0, r1

    def __call__(self, v: float) -> float:
        return self.r0 + (v - self.d0) / (self.d1 - self.d0) * (self.r1 - self.r0)

    def clamp(self, v: float) -> float:
        lo, hi = min(self.r0, self.r1), max(self.r0, self.r1)
        return min(max(self(v), lo), hi)


def svg_open(width: float, height: float, title: str, desc: str, uid: str,
              cls: str = "chart") -> str:
    """The opening ``<svg role="img">`` of a chart, labelled by its ``<title>`` and ``<desc>``
    (ids ``{uid}-t`` and ``{uid}-d``: ``uid`` never comes from the data)."""
    return (f'<svg class="{cls}" role="img" width="{px(width)}" height="{px(height)}" '
            f'viewBox="0 0 {px(width)} {px(height)}" aria-labelledby="{uid}-t {uid}-d">'
            f'<title id="{uid}-t">{esc(title)}</title><desc id="{uid}-d">{esc(desc)}</desc>')


def shorten(text: str, n: int) -> str:
    """``text`` cut to ``n`` characters with an ellipsis (a label's full text goes in its
    ``<title>``)."""
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


def zone_rects(band: Band, x0: float, x1: float, scale: Scale) -> str:
    """The hatched zones of ``band`` between x0 and x1, values on the vertical ``scale``."""
    parts = []
    for pattern, a, b in _zones(band):
        ya, yb = scale.clamp(a), scale.clamp(b)
        top, h = min(ya, yb), abs(ya - yb)
        if h < 0.05 or x1 - x0 < 0.05:
            continue
        parts.append(f'<rect x="{px(x0)}" y="{px(top)}" width="{px(x1 - x0)}" height="{px(h)}" '
                     f'fill="url(#{pattern})"/>')
    return "".join(parts)


def hzone_rects(band: Band, y0: float, y1: float, scale: Scale) -> str:
    """The hatched zones of ``band`` between y0 and y1, values on the horizontal ``scale``."""
    parts = []
    for pattern, a, b in _zones(band):
        xa, xb = scale.clamp(a), scale.clamp(b)
        left, w = min(xa, xb), abs(xa - xb)
        if w < 0.05:
            continue
        parts.append(f'<rect x="{px(left)}" y="{px(y0)}" width="{px(w)}" height="{px(y1 - y0)}" '
                     f'fill="url(#{pattern})"/>')
    return "".join(parts)
