"""Quantile and interval measures as mergeable per-group reductions (docs/measures.md §13–15).

The formulas stay in :mod:`accuracy_checks.measures.probabilistic`; a shard runs them on its
rows and keeps per (group, variant) what they pool:

- ``pinball``, ``mis``: the sum of the losses or scores (``mean × rows``) and the rows
  (and crossed rows); merged, ``mean = Σ sum / Σ rows`` (the pooled mean);
- ``interval_coverage``: the rows, the rows inside and the crossed rows; merged, the registry
  formula (coverage, the binomial p-value of the veto) runs on three weighted pseudo-rows per
  (group, interval) — inside, outside, crossed — whose weights are those counts
  (:class:`Weighted`: ``gsum`` counts a pseudo-row ``weight`` times; the counts are exact);
- ``msis`` (per series, then the mean): as MASE, per candidate scale cut: the sum of the
  series' values, the series used and skipped (too few rows, zero scale), the rows and the
  crossed rows.
"""

from __future__ import annotations

from collections.abc import Callable

import numpy as np
import pandas as pd

from accuracy_checks.dask.accuracy_tables import series_scales
from accuracy_checks.evaluation.baselines import ActualsIndex
from accuracy_checks.measures.data import (
    SCALE_OK,
    SCALE_TOO_FEW_ROWS,
    MeasureData,
    MeasureSettings,
    result_frame,
    scaled_result,
    stack_variants,
)
from accuracy_checks.measures.probabilistic import (
    coverage_from_data,
    interval_rows,
    mis_from_data,
    msis_from_data,
    pinball_from_data,
)
from accuracy_checks.sources import frames as F

__all__ = ["INTERVAL_SUMS", "Weighted", "interval_figures", "interval_tables"]

#: the sums kept per (group, variant[, cut]) for each measure
INTERVAL_SUMS = {
    "pinball": ["total", "n"],
    "mis": ["total", "n", "crossed"],
    "interval_coverage": ["n", "inside", "crossed"],
    "msis": ["total", "used", "too_few", "zero", "n", "crossed"],
}


class Weighted(MeasureData):
    """Pseudo-rows that each stand for ``weight`` rows: :meth:`gsum` counts (and sums) every
    pseudo-row ``weight`` times."""

    def __init__(self, rows: pd.DataFrame, group: np.ndarray, groups: pd.DataFrame,
                 settings: MeasureSettings, weight: np.ndarray) -> None:
        super().__init__(rows, group, groups, np.zeros(len(rows), dtype=np.int64), 1, settings)
        self.weight = np.asarray(weight, dtype=np.float64)

    def gsum(self, weights: np.ndarray | None = None, mask: np.ndarray | None = None
             ) -> np.ndarray:
        return super().gsum(self.weight if weights is None else weights * self.weight, mask)


def _by_variant(frame: pd.DataFrame, labels: pd.DataFrame, columns: dict[str, str]
                ) -> pd.DataFrame:
    """A stacked registry frame (``group``, ``variant``, …) as a table keyed by the groups'
    labels and the variant, with ``columns`` renamed (``value × rows`` as ``total``)."""
    group = frame["group"].to_numpy(dtype=np.int64)
    out = labels.iloc[group].reset_index(drop=True).assign(
        variant=frame["variant"].astype(str).to_numpy())
    for new, old in columns.items():
        out[new] = frame[old].to_numpy(dtype=np.float64)
    return out


def _totals(frame: pd.DataFrame, count: str) -> pd.DataFrame:
    """The sum behind each pooled mean: ``value × count`` (0 where no row)."""
    value = frame["value"].to_numpy(dtype=np.float64)
    n = frame[count].to_numpy(dtype=np.float64)
    return frame.assign(total=np.where(n > 0, value * n, 0.0))


def interval_tables(wanted: set[str], data: MeasureData, labels: pd.DataFrame,
                    history: ActualsIndex | None, cuts: list[int]) -> dict[str, pd.DataFrame]:
    """The per-(group, variant) reductions of the interval measures in ``wanted``."""
    out: dict[str, pd.DataFrame] = {}
    if "pinball" in wanted and data.settings.quantiles:
        got = _totals(pinball_from_data(data), "n_obs")
        out["pinball"] = _by_variant(got, labels, {"total": "total", "n": "n_obs"})
    if not data.settings.intervals:
        return out
    if "mis" in wanted:
        got = _totals(mis_from_data(data), "n_obs")
        out["mis"] = _by_variant(got, labels, {"total": "total", "n": "n_obs",
                                               "crossed": "n_crossed"})
    if "interval_coverage" in wanted:
        out["interval_coverage"] = _by_variant(coverage_from_data(data), labels, {
            "n": "n_obs", "inside": "n_inside", "crossed": "n_crossed"})
    if "msis" in wanted:
        parts = [_msis_cut(data, labels, history, before) for before in cuts]
        out["msis"] = pd.concat(parts, ignore_index=True) if parts else labels.iloc[:0]
    return out


def _msis_cut(data: MeasureData, labels: pd.DataFrame, history: ActualsIndex | None,
              before: int) -> pd.DataFrame:
    scale, reason = series_scales(history, data.n_series, data.settings, before)
    cut = MeasureData(data.rows, data.group, data.groups, data.series, data.n_series,
                      data.settings, scale=scale, scale_reason=reason)
    got = _totals(msis_from_data(cut), "n_series_used")
    table = _by_variant(got, labels, {"total": "total", "used": "n_series_used",
                                      "n": "n_obs", "crossed": "n_crossed"})
    too_few, zero = [], []
    for interval in data.settings.intervals:  # the skipped series by reason, as msis counts
        units = cut.units(interval_rows(cut, interval)[2])
        why = reason[units.series]
        too_few.append(np.bincount(units.group[why == SCALE_TOO_FEW_ROWS],
                                   minlength=data.n_groups))
        zero.append(np.bincount(units.group[(why != SCALE_OK) & (why != SCALE_TOO_FEW_ROWS)],
                                minlength=data.n_groups))
    return table.assign(before=before, too_few=np.concatenate(too_few).astype(np.float64),
                        zero=np.concatenate(zero).astype(np.float64))


# --------------------------------------------------------------------------- merged

#: ``table(name, columns, variant)``: a merged table's sums of one variant, in group order
VariantTable = Callable[[str, list[str], str | None], pd.DataFrame]


def interval_figures(measure_id: str, data: MeasureData, table: VariantTable) -> pd.DataFrame:
    """The figure frame of an interval measure from the merged per-variant sums (the rows in
    the registry's order: by variant, then group)."""
    settings = data.settings
    if measure_id == "interval_coverage":
        return coverage_from_data(_coverage_rows(data, table))
    frames: dict[str, pd.DataFrame] = {}
    extra: dict[str, dict[str, object]] = {}
    if measure_id == "pinball":
        for tau in settings.quantiles:
            label = f"q{tau:g}"
            sums = table("pinball", INTERVAL_SUMS["pinball"], label)
            frames[label] = _pooled(data, sums, crossed=False)
            extra[label] = {"quantile": tau}
        return stack_variants(frames, extra)
    for interval in settings.intervals:
        label = interval.label
        sums = table(measure_id, INTERVAL_SUMS[measure_id], label)
        if measure_id == "mis":
            frames[label] = _pooled(data, sums, crossed=True)
            extra[label] = {"alpha": interval.alpha}
        else:
            frames[label] = _msis(data, sums)
            extra[label] = {"alpha": interval.alpha,
                            "seasonal_period": settings.seasonal_period}
    return stack_variants(frames, extra)


def _pooled(data: MeasureData, sums: pd.DataFrame, *, crossed: bool) -> pd.DataFrame:
    """The tail of ``pinball_from_data`` / ``mis_from_data``: the pooled mean per group."""
    n = sums["n"].to_numpy(dtype=np.float64)
    mean = np.full(data.n_groups, np.nan)
    np.divide(sums["total"].to_numpy(dtype=np.float64), n, out=mean, where=n > 0)
    extra = {"n_crossed": sums["crossed"].to_numpy().astype(np.int64)} if crossed else {}
    return result_frame(data.n_groups, mean, [(n == 0, "no_data")], n_obs=n.astype(np.int64),
                        **extra)


def _msis(data: MeasureData, sums: pd.DataFrame) -> pd.DataFrame:
    """The tail of ``msis_from_data`` on the merged per-group sums of one interval."""
    n = sums["n"].to_numpy(dtype=np.float64)
    used = sums["used"].to_numpy(dtype=np.float64)
    too_few = sums["too_few"].to_numpy(dtype=np.float64)
    zero = sums["zero"].to_numpy(dtype=np.float64)
    mean = np.full(data.n_groups, np.nan)
    np.divide(sums["total"].to_numpy(dtype=np.float64), used, out=mean, where=used > 0)
    return scaled_result(
        data.n_groups, mean, n, used, too_few, zero,
        n_crossed=sums["crossed"].to_numpy().astype(np.int64),
    )


def _coverage_rows(data: MeasureData, table: VariantTable) -> Weighted:
    """Three weighted pseudo-rows per (group, interval): inside (``y = L = U = 0``), outside
    (``y = 1``) and crossed (``L = 1 > U = 0``); the other intervals' quantiles missing."""
    intervals = data.settings.intervals
    columns: dict[str, list[np.ndarray]] = {
        F.quantile_column(t): [] for i in intervals for t in (i.lower, i.upper)}
    y: list[np.ndarray] = []
    group: list[np.ndarray] = []
    weight: list[np.ndarray] = []
    every = np.arange(data.n_groups, dtype=np.int64)
    for interval in intervals:
        sums = table("interval_coverage", INTERVAL_SUMS["interval_coverage"], interval.label)
        n, inside, crossed = (sums[c].to_numpy(dtype=np.float64)
                              for c in ("n", "inside", "crossed"))
        for value, lower, upper, w in ((0.0, 0.0, 0.0, inside), (1.0, 0.0, 0.0, n - inside),
                                       (0.0, 1.0, 0.0, crossed)):
            y.append(np.full(data.n_groups, value))
            group.append(every)
            weight.append(w)
            for name in columns:
                fill = (lower if name == F.quantile_column(interval.lower)
                        else upper if name == F.quantile_column(interval.upper) else np.nan)
                columns[name].append(np.full(data.n_groups, fill))
    rows = pd.DataFrame({F.ACTUAL: np.concatenate(y) if y else np.zeros(0),
                         **{k: np.concatenate(v) if v else np.zeros(0)
                            for k, v in columns.items()}})
    rows[F.FORECAST] = 0.0
    return Weighted(rows, np.concatenate(group) if group else np.zeros(0, dtype=np.int64),
                    data.groups, data.settings,
                    np.concatenate(weight) if weight else np.zeros(0))
