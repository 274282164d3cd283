"""The report's trends over cycles: each segment's measures as small multiples, one line per
lag, over the threshold zones recorded in each cycle and the drift limits the gate used.

The figures come as recorded (:attr:`~accuracy_checks.report.data.ReportData.figures`); the
columns are read once as numpy arrays and each chart picks its rows by index.
"""

from __future__ import annotations

from collections.abc import Sequence
from typing import Any

import numpy as np
import pandas as pd

from accuracy_checks.report.blocks import (
    ChartIds,
    html_figure,
    html_table,
    measure_label,
    num_text,
    order_measures,
    segment_name,
    segment_order,
    unit_note,
)
from accuracy_checks.report.charts import Line, TrendSpec, trend_chart
from accuracy_checks.report.data import ReportData
from accuracy_checks.report.svg import LAG_STYLES, Band, esc, legend_swatch
from accuracy_checks.results import ALL_SERIES, BREACHED, JUDGED, CheckResult

__all__ = ["MAX_TREND_SEGMENTS", "legend", "trend_section"]

#: segments that get trend charts (the breached ones first); the rest are listed by name
MAX_TREND_SEGMENTS = 150

#: the status sets as plain text, for numpy's isin
_BREACHED = sorted(str(s) for s in BREACHED)
_JUDGED = sorted(str(s) for s in JUDGED)

#: a lag's values and statuses per cycle (NaN and "skipped" where it has none)
_Grid = tuple[np.ndarray, np.ndarray]


def legend(lags: Sequence[int]) -> str:
    """The legend of the trend charts: status markers, zones, drift limits, lag lines."""
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


def trend_section(data: ReportData, latest: list[CheckResult], ids: ChartIds,
                  directions: dict[str, str]) -> tuple[str, int]:
    """The section and the number of segments charted (at most :data:`MAX_TREND_SEGMENTS`,
    the worst first)."""
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
    measures = order_measures([m for m in (thresholded | drifted) if m])
    if not measures:
        measures = order_measures(acc["measure"].dropna().unique().tolist())[:2]
    lags = sorted(int(v) for v in acc["lag"].dropna().unique())
    out.append(legend(lags))
    cyc_index = {c: i for i, c in enumerate(data.cycles)}
    order = segment_order(latest)
    acc = acc.loc[acc["measure"].isin(measures)]
    segs = sorted(acc["segment"].dropna().unique().tolist(),
                  key=lambda s: (order.get(s, len(order)), s != ALL_SERIES, s))
    shown, hidden = segs[:MAX_TREND_SEGMENTS], segs[MAX_TREND_SEGMENTS:]
    drift = fig.loc[fig["check"] == "drift.control_limit"]
    charts = _TrendCharts(
        data.cycles, lags, ids, directions,
        groups=acc.groupby(["segment", "measure", "variant"], sort=False, dropna=False).indices,
        drift_groups=drift.groupby(["segment", "measure", "variant"], sort=False,
                                   dropna=False).indices if len(drift) else {},
        col=_columns(acc, cyc_index, ("value", "status", "warn", "fail", "unit")),
        dcol=_columns(drift, cyc_index, ("status", "details")))
    for seg in shown:
        cells = [charts.figure(seg, measure, variant) for measure in measures
                 for variant in charts.variants(seg, measure)]
        if cells:
            out.append(f"<h3>{esc(segment_name(seg))}</h3><div class=\"multiples\">"
                       f"{''.join(cells)}</div>")
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


class _TrendCharts:
    """The trend charts of one report: the figures' columns, grouped by (segment, measure,
    variant), and the drift results' columns."""

    def __init__(self, cycles: list[str], lags: list[int], ids: ChartIds,
                 directions: dict[str, str], *, groups: dict[Any, np.ndarray],
                 drift_groups: dict[Any, np.ndarray], col: dict[str, np.ndarray],
                 dcol: dict[str, np.ndarray]) -> None:
        self.cycles, self.lags, self.ids, self.directions = cycles, lags, ids, directions
        self.groups, self.drift_groups, self.col, self.dcol = groups, drift_groups, col, dcol
        self._variants: dict[tuple[Any, Any], list[str]] = {}
        for key in groups:
            self._variants.setdefault((key[0], key[1]), []).append(key[2])

    def variants(self, seg: Any, measure: str) -> list[str]:
        return sorted(self._variants.get((seg, measure), []))

    def figure(self, seg: Any, measure: str, variant: Any) -> str:
        """One chart with its caption and data table."""
        n = len(self.cycles)
        rows = self.groups[(seg, measure, variant)]
        spec, summary, table = _trend_spec(rows, self.col, n, self.lags, self.cycles,
                                           self.drift_groups.get((seg, measure, variant)),
                                           self.dcol, self.directions.get(measure, "lower"))
        label = measure_label(measure) + (f" ({variant})" if variant else "")
        unit = next((u for u in self.col["unit"][rows] if isinstance(u, str) and u), "")
        title = f"{label} of {segment_name(seg)} over {n} cycles"
        svg = trend_chart(spec, title=title, desc=summary, uid=self.ids())
        return html_figure(svg, f"{label} of {segment_name(seg)}{unit_note(label, unit)}",
                           table)


def _trend_spec(rows: np.ndarray, col: dict[str, np.ndarray], n: int, lags: list[int],
                cycles: list[str], drift_rows: np.ndarray | None, dcol: dict[str, np.ndarray],
                direction: str) -> tuple[TrendSpec, str, str]:
    """The chart of one (segment, measure, variant), its summary in words and its table."""
    rows = rows[col["ci"][rows] >= 0]
    lag_of = col["lag_i"][rows]
    own_lags = sorted(int(v) for v in np.unique(lag_of) if v >= 0)
    first_lag = own_lags[0] if own_lags else -1
    grids = {lag: _lag_grid(rows[lag_of == lag], col, n) for lag in own_lags}
    lines = [Line(f"lag {lag}", [None if np.isnan(v) else float(v) for v in values],
                  list(statuses), lags.index(lag) if lag in lags else 0)
             for lag, (values, statuses) in grids.items()]
    bands: list[Band | None] = (_bands(rows[lag_of == first_lag], col, n, direction)
                                if own_lags else [None] * n)
    limits, signals = _drift_limits(drift_rows, dcol, n, first_lag, direction)
    spec = TrendSpec(cycles, lines, bands, limits, signals)
    first = grids.get(first_lag)
    defined = first[0][np.isfinite(first[0])] if first is not None else np.array([])
    breaches = sum(int(np.isin(g[1].astype(str), _BREACHED).sum()) for g in grids.values())
    summary = (f"{defined.size} of {n} cycles measured at lag {first_lag}"
               + (f"; first {num_text(defined[0])}, last {num_text(defined[-1])}, lowest "
                  f"{num_text(defined.min())}, highest {num_text(defined.max())}"
                  if defined.size else "")
               + f"; {breaches} breached point(s); {sum(signals)} drift signal(s).")
    return spec, summary, _trend_table(cycles, own_lags, grids, limits, signals)


def _lag_grid(sel: np.ndarray, col: dict[str, np.ndarray], n: int) -> _Grid:
    """One lag's values (NaN unless judged) and statuses per cycle."""
    ci = col["ci"][sel]
    status = col["status"][sel].astype(str)
    value = col["value"][sel].astype(np.float64)
    values = np.full(n, np.nan)
    values[ci] = np.where(np.isin(status, _JUDGED), value, np.nan)
    statuses = np.full(n, "skipped", dtype=object)
    statuses[ci] = status
    return values, statuses


def _bands(sel: np.ndarray, col: dict[str, np.ndarray], n: int,
           direction: str) -> list[Band | None]:
    """The threshold band of each cycle (of the first lag), one object per distinct band."""
    bands: list[Band | None] = [None] * n
    cache: dict[tuple[Any, Any], Band] = {}
    for k, w, f in zip(col["ci"][sel], col["warn"][sel], col["fail"][sel], strict=True):
        if w is None and f is None:
            continue
        band = cache.get((w, f))
        if band is None:
            band = cache[(w, f)] = Band(w, f, direction)
        bands[int(k)] = band
    return bands


def _drift_limits(drift_rows: np.ndarray | None, dcol: dict[str, np.ndarray], n: int,
                  first_lag: int, direction: str
                  ) -> tuple[list[tuple[float | None, float | None] | None], list[bool]]:
    """The drift limits of each cycle on the side that counts, and whether the value was
    beyond them (from ``drift.control_limit`` details)."""
    limits: list[tuple[float | None, float | None] | None] = [None] * n
    signals = [False] * n
    if drift_rows is None:
        return limits, signals
    mine = drift_rows[(dcol["lag_i"][drift_rows] == first_lag) & (dcol["ci"][drift_rows] >= 0)]
    for k, d, st in zip(dcol["ci"][mine], dcol["details"][mine], dcol["status"][mine],
                        strict=True):
        if not isinstance(d, dict) or "lower" not in d:
            continue
        limits[int(k)] = (d.get("lower") if direction != "lower" else None,
                          d.get("upper") if direction != "higher" else None)
        signals[int(k)] = bool(d.get("signal")) or str(st) in BREACHED
    return limits, signals


def _trend_table(cycles: list[str], own_lags: list[int], grids: dict[int, _Grid],
                 limits: list[tuple[float | None, float | None] | None],
                 signals: list[bool]) -> str:
    """The chart's data table: a row per cycle with a value or drift limits."""
    head = ["cycle", *[f"lag {lag}" for lag in own_lags], "drift limits (first lag)"]
    body = []
    for k, cyc in enumerate(cycles):
        cells = []
        for lag in own_lags:
            v, st = grids[lag][0][k], grids[lag][1][k]
            text = num_text(v) if np.isfinite(v) else ""
            cells.append(f"{text} {st.upper()}".strip() if st != "pass" else text)
        lim = limits[k]
        if all(c in ("", "SKIPPED") for c in cells) and lim is None:
            continue
        lim_text = ("" if lim is None else
                    f"{num_text(lim[0]) if lim[0] is not None else '−∞'} to "
                    f"{num_text(lim[1]) if lim[1] is not None else '+∞'}"
                    + (" BEYOND" if signals[k] else ""))
        body.append([cyc, *cells, lim_text])
    return html_table(head, body)
