"""The measure families beyond the core statistics, as mergeable per-group reductions.

Each family's formula stays in its registry module; this module only chooses what a shard keeps
and how the merged reduction is handed back to the formula:

- **sMAPE** (per series, then the mean): the shard runs ``smape_from_data`` and keeps per group
  the sum of its series' values (``mean × series used``) and the series used; merged, the mean
  is ``Σ sum / Σ used`` (the unweighted mean over every series of the group).
- **MASE** (per series ``MAE / s``, then the mean): ``s`` comes from the actuals before the
  issue date of the earliest cycle evaluated over ALL series, which no shard knows. So each
  shard runs ``mase_from_data`` for every candidate cut (``before``: the grid position after
  what was known at each issue date that can be the earliest, up to the shard's own earliest)
  and keeps per (group, cut) the sum of values, series used and skipped; merged, the global
  earliest cut (the smallest shard cut) picks the rows.
- **FVA** (pooled): per group the sums ``fva_from_data`` pools (rows, Σ|e|, Σ|y − baseline|,
  Σ|y|, rows without a baseline); merged, the formula runs on two pseudo-rows per group that
  carry those sums exactly (``y = Σ|y|, f = y, b = y`` and ``y = 0, f = −Σ|e|, b = −Σ|y−b|``:
  ``x − 0`` and ``0 − (−x)`` are exact), its row counts replaced by the merged ones.
- **Tracking signal, Trigg** (per group and period of the tracking window): per (group, period)
  the summed error and usable rows; merged, the formulas run on one pseudo-row per (group,
  period) whose error is that sum (``E_t − 0`` exact), the row counts replaced.
"""

from __future__ import annotations

from collections.abc import Callable

import numpy as np
import pandas as pd

from accuracy_checks.checks.accuracy_groups import EvaluationGroups
from accuracy_checks.dask.accuracy_cost import COST_SUMS, cost_cells, cost_figures
from accuracy_checks.dask.accuracy_intervals import (
    INTERVAL_SUMS,
    interval_figures,
    interval_tables,
)
from accuracy_checks.dask.accuracy_tables import series_scales
from accuracy_checks.evaluation.baselines import ActualsIndex, known_through
from accuracy_checks.measures.data import MeasureData, result_frame, scaled_result
from accuracy_checks.measures.registry import Measure
from accuracy_checks.measures.scaled import mase_from_data, smape_from_data
from accuracy_checks.measures.signals import tracking_signal_from_data, trigg_from_data
from accuracy_checks.measures.value_added import fva_from_data
from accuracy_checks.sources import frames as F

__all__ = ["FAMILIES", "family_figures", "family_tables", "scale_cut"]

#: the families this module computes, by measure id → the table each reads
FAMILIES = {"smape": "smape", "mase": "mase", "fva_naive": "fva_naive",
            "fva_seasonal_naive": "fva_seasonal_naive", "tracking_signal": "periods",
            "trigg": "periods", "error_cost": "cost", **{m: m for m in INTERVAL_SUMS}}
#: the sums kept per table (beside the group keys and, for MASE, ``before``; for the
#: periods, ``period``)
SUMS = {
    "smape": ["total", "used"],
    "mase": ["total", "used", "too_few", "zero"],
    "fva_naive": ["n", "sum_f", "sum_b", "sum_y", "n_without"],
    "fva_seasonal_naive": ["n", "sum_f", "sum_b", "sum_y", "n_without"],
    "periods": ["error", "rows"],
    "cost": COST_SUMS,
}
EXTRA_KEYS = {"mase": ["before"], "periods": ["period"], "cost": ["row_segment"],
              "pinball": ["variant"], "mis": ["variant"], "interval_coverage": ["variant"],
              "msis": ["variant", "before"]}


def scale_cut(frame: pd.DataFrame, job: EvaluationGroups, frequency: str) -> int | None:
    """The shard's own MASE cut: the grid position after the last period known at the issue
    date of its earliest cycle with a usable evaluation-window row (``None``: no such row)."""
    rows = job.rows("evaluation")
    y = rows[F.ACTUAL].to_numpy(dtype=np.float64, na_value=np.nan)
    f = rows[F.FORECAST].to_numpy(dtype=np.float64, na_value=np.nan)
    used = rows.loc[~(np.isnan(y) | np.isnan(f)), F.ISSUED]
    if len(used) == 0:
        return None
    return int(known_through(pd.Series([used.min()]), frequency)[0]) + 1


def family_tables(measures: list[str], data: MeasureData, labels: pd.DataFrame,
                  history: ActualsIndex | None, cuts: list[int]) -> dict[str, pd.DataFrame]:
    """The families' per-group reductions of one (window, grouping) of a shard, keyed by
    ``labels`` (the groups' keys); only the tables the ``measures`` read."""
    wanted = {FAMILIES[m] for m in measures if m in FAMILIES}
    out: dict[str, pd.DataFrame] = {}
    if "smape" in wanted:
        got = smape_from_data(data)
        used = got["n_series_used"].to_numpy(dtype=np.float64)
        value = got["value"].to_numpy(dtype=np.float64)
        out["smape"] = labels.assign(total=np.where(used > 0, value * used, 0.0), used=used)
    if "mase" in wanted:
        parts = []
        for before in cuts:
            scale, reason = series_scales(history, data.n_series, data.settings, before)
            cut = MeasureData(data.rows, data.group, data.groups, data.series, data.n_series,
                              data.settings, scale=scale, scale_reason=reason)
            got = mase_from_data(cut)
            used = got["n_series_used"].to_numpy(dtype=np.float64)
            value = got["value"].to_numpy(dtype=np.float64)
            parts.append(labels.assign(
                before=before, total=np.where(used > 0, value * used, 0.0), used=used,
                too_few=got["skipped_too_few_rows"].to_numpy(dtype=np.float64),
                zero=got["skipped_zero_scale"].to_numpy(dtype=np.float64)))
        out["mase"] = pd.concat(parts, ignore_index=True) if parts else labels.iloc[:0]
    for kind in ("naive", "seasonal_naive"):
        if f"fva_{kind}" in wanted:
            out[f"fva_{kind}"] = labels.assign(**_fva_sums(data, kind))
    if "periods" in wanted:
        out["periods"] = _period_sums(data, labels)
    if "cost" in wanted and data.settings.costs is not None:
        out["cost"] = cost_cells(data, labels)
    out.update(interval_tables(wanted, data, labels, history, cuts))
    return out


def _fva_sums(data: MeasureData, kind: str) -> dict[str, np.ndarray]:
    """The sums ``fva_from_data`` pools per group (its masks: usable rows with a baseline)."""
    baseline = data.baseline(kind)
    y = data.actual
    has = ~np.isnan(baseline)
    use = data.usable & has
    with np.errstate(invalid="ignore"):
        abs_baseline = np.where(use, np.abs(y - baseline), 0.0)
    return {"n": data.gsum(mask=use), "sum_f": data.gsum(np.abs(data.error), use),
            "sum_b": data.gsum(abs_baseline, use), "sum_y": data.gsum(np.abs(y), use),
            "n_without": data.gsum(mask=data.usable & ~has)}


def _period_sums(data: MeasureData, labels: pd.DataFrame) -> pd.DataFrame:
    """Per (group, period) with a usable row: the summed error and the usable rows."""
    usable = data.usable
    codes, uniques = pd.factorize(data.rows[F.PERIOD], sort=True)
    width = max(len(uniques), 1)
    cell = data.group[usable] * width + codes[usable]
    cells = data.n_groups * width
    errors = np.bincount(cell, weights=data.error[usable], minlength=cells)
    rows = np.bincount(cell, minlength=cells)
    present = np.flatnonzero(rows)
    out = labels.iloc[present // width].reset_index(drop=True)
    return out.assign(period=pd.DatetimeIndex(uniques).take(present % width) if len(uniques)
                      else pd.DatetimeIndex([]),
                      error=errors[present], rows=rows[present].astype(np.float64))


# --------------------------------------------------------------------------- merged


#: ``table(name, columns, variant)``: a merged table's sums (of one variant, when given) in
#: group order, zeros where a group has none
Table = Callable[[str, list[str], str | None], pd.DataFrame]


def family_figures(measure: Measure, data: MeasureData, table: Table,
                   cells: dict[str, pd.DataFrame | None], cut: int | None) -> pd.DataFrame:
    """The figure frame of a family measure for the groups of ``data``, from the merged
    reductions: ``table(name, columns)`` gives a table's sums in group order (zeros where a
    group has none); ``cells`` the merged per-(group, period) sums (``periods``) and
    per-(group, row segment) cost cells (``cost``), with their group number; ``cut`` the global
    MASE cut."""
    n = data.stats["n"].to_numpy(dtype=np.float64)
    if measure.id in INTERVAL_SUMS:
        return interval_figures(measure.id, data, table)
    if measure.id == "error_cost":
        return cost_figures(data, cells.get("cost"))
    if measure.id == "smape":
        sums = table("smape", SUMS["smape"], None)
        used = sums["used"].to_numpy(dtype=np.float64)
        mean = np.full(data.n_groups, np.nan)
        np.divide(sums["total"].to_numpy(dtype=np.float64), used, out=mean, where=used > 0)
        return result_frame(  # the tail of smape_from_data
            data.n_groups, mean, [(n == 0, "no_data")],
            n_obs=n.astype(np.int64), n_series_used=used.astype(np.int64),
            n_series_skipped=np.zeros(data.n_groups, dtype=np.int64))
    if measure.id == "mase":
        sums = table("mase", SUMS["mase"], None) if cut is not None else None
        return _mase(data, n, sums)
    if measure.id.startswith("fva_"):
        return _fva(data, table(measure.id, SUMS[measure.id], None), measure.id[4:])
    rows = _pseudo_rows(data, cells.get("periods"))
    got = (tracking_signal_from_data if measure.id == "tracking_signal"
           else trigg_from_data)(rows)
    return got.assign(n_obs=n.astype(np.int64))


def _mase(data: MeasureData, n: np.ndarray, sums: pd.DataFrame | None) -> pd.DataFrame:
    """The tail of ``mase_from_data`` on the merged per-group sums."""
    zeros = np.zeros(data.n_groups)
    total = sums["total"].to_numpy(dtype=np.float64) if sums is not None else zeros
    used = sums["used"].to_numpy(dtype=np.float64) if sums is not None else zeros
    too_few = sums["too_few"].to_numpy(dtype=np.float64) if sums is not None else zeros
    zero = sums["zero"].to_numpy(dtype=np.float64) if sums is not None else zeros
    mean = np.full(data.n_groups, np.nan)
    np.divide(total, used, out=mean, where=used > 0)
    return scaled_result(
        data.n_groups, mean, n, used, too_few, zero,
        skipped_too_few_rows=too_few.astype(np.int64),
        skipped_zero_scale=zero.astype(np.int64),
        seasonal_period=np.full(data.n_groups, data.settings.seasonal_period, dtype=np.int64),
    )


def _fva(data: MeasureData, sums: pd.DataFrame, kind: str) -> pd.DataFrame:
    """``fva_from_data`` on two pseudo-rows per group carrying the merged sums exactly."""
    n = sums["n"].to_numpy(dtype=np.float64)
    has = np.flatnonzero(n > 0)
    sum_y = sums["sum_y"].to_numpy(dtype=np.float64)[has]
    sum_f = sums["sum_f"].to_numpy(dtype=np.float64)[has]
    sum_b = sums["sum_b"].to_numpy(dtype=np.float64)[has]
    y = np.concatenate([sum_y, np.zeros(has.size)])
    f = np.concatenate([sum_y, -sum_f])
    b = np.concatenate([sum_y, -sum_b])
    group = np.concatenate([has, has])
    rows = pd.DataFrame({F.ACTUAL: y, F.FORECAST: f})
    pseudo = MeasureData(rows, group, data.groups, np.zeros(group.size, dtype=np.int64), 1,
                         data.settings, baseline=lambda _kind: b)
    got = fva_from_data(pseudo, kind)
    return got.assign(n_obs=n.astype(np.int64),
                      n_without_baseline=sums["n_without"].to_numpy().astype(np.int64))


def _pseudo_rows(data: MeasureData, periods: pd.DataFrame | None) -> MeasureData:
    """One row per (group, period) with a usable row: ``actual`` = the summed error."""
    if periods is None or len(periods) == 0:
        rows = pd.DataFrame({F.ACTUAL: pd.Series(dtype=np.float64),
                             F.FORECAST: pd.Series(dtype=np.float64),
                             F.PERIOD: pd.Series(dtype="M8[ns]")})
        group = np.zeros(0, dtype=np.int64)
    else:
        rows = pd.DataFrame({F.ACTUAL: periods["error"].to_numpy(dtype=np.float64),
                             F.FORECAST: 0.0, F.PERIOD: periods["period"].to_numpy()})
        group = periods["group"].to_numpy(dtype=np.int64)
    return MeasureData(rows, group, data.groups, np.zeros(group.size, dtype=np.int64), 1,
                       data.settings)
