"""The cost of error as mergeable per-cell sums (formula: :mod:`accuracy_checks.measures.cost`).

``error_cost_from_data`` sums, per (group, segment of the row) cell, the units under- and
over-forecast and the usable rows, then prices each cell with its segment's unit costs. A shard
keeps those cells (:func:`cost_cells`); merged, the registry formula runs on two pseudo-rows
per cell that carry its sums exactly (``e = Σmax(e, 0)`` as ``y − 0``, ``e = −Σmax(−e, 0)``
as ``0 − f``) and one row without an actual (no figure counts it); the figures that divide by
the rows (cost per forecast, pinball loss at τ*) and the row counts are then rescaled from the
pseudo-rows' count to the merged one.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from accuracy_checks.measures.cost import error_cost_from_data
from accuracy_checks.measures.data import MeasureData
from accuracy_checks.sources import frames as F

__all__ = ["COST_SUMS", "cost_cells", "cost_figures"]

COST_SUMS = ["under", "over", "rows"]


def cost_cells(data: MeasureData, labels: pd.DataFrame) -> pd.DataFrame:
    """Per (group, row segment) with a usable row: units under- and over-forecast, rows."""
    codes, segments = pd.factorize(data.rows[F.SEGMENT].astype(str), sort=True)
    width = max(len(segments), 1)
    usable = data.usable & (codes >= 0)
    cell = data.group[usable] * width + codes[usable]
    e = data.error[usable]
    size = data.n_groups * width
    under = np.bincount(cell, weights=np.maximum(e, 0.0), minlength=size)
    over = np.bincount(cell, weights=np.maximum(-e, 0.0), minlength=size)
    rows = np.bincount(cell, minlength=size)
    present = np.flatnonzero(rows)
    out = labels.iloc[present // width].reset_index(drop=True)
    return out.assign(row_segment=np.asarray(segments, dtype=object)[present % width]
                      if len(segments) else np.zeros(0, dtype=object),
                      under=under[present], over=over[present],
                      rows=rows[present].astype(np.float64))


def cost_figures(data: MeasureData, cells: pd.DataFrame | None) -> pd.DataFrame:
    """``error_cost_from_data``'s frame from the merged cells (``group`` column: the group
    number in ``data``'s order)."""
    if cells is None or len(cells) == 0:
        cells = pd.DataFrame({"group": np.zeros(0, dtype=np.int64), "row_segment": [],
                              "under": np.zeros(0), "over": np.zeros(0), "rows": np.zeros(0)})
    group = cells["group"].to_numpy(dtype=np.int64)
    under = cells["under"].to_numpy(dtype=np.float64)
    over = cells["over"].to_numpy(dtype=np.float64)
    segment = cells["row_segment"].astype(str).to_numpy(dtype=object)
    # and one unusable row (no actual), so the formula always sees a segment column, as it
    # does on rows that are all unusable
    first = segment[:1] if segment.size else np.array([str(data.groups[F.SEGMENT].iat[0])],
                                                      dtype=object)
    rows = pd.DataFrame({
        F.ACTUAL: np.concatenate([under, np.zeros(under.size), [np.nan]]),
        F.FORECAST: np.concatenate([np.zeros(under.size), over, [0.0]]),
        F.SEGMENT: np.concatenate([segment, segment, first]),
    })
    pseudo = MeasureData(rows, np.concatenate([group, group, [0]]), data.groups,
                         np.zeros(2 * group.size + 1, dtype=np.int64), 1, data.settings)
    got = error_cost_from_data(pseudo)
    real = np.bincount(group, weights=cells["rows"].to_numpy(dtype=np.float64),
                       minlength=data.n_groups)
    priced = _priced_rows(cells, data)
    pseudo_priced = (got["n_obs"].to_numpy(dtype=np.float64)
                     - got["n_without_costs"].to_numpy(dtype=np.float64))
    total = (got["under_cost"].to_numpy(dtype=np.float64)
             + got["over_cost"].to_numpy(dtype=np.float64))
    per_forecast = np.full(data.n_groups, np.nan)
    np.divide(total, priced, out=per_forecast, where=priced > 0)
    pinball = np.full(data.n_groups, np.nan)
    np.divide(got["pinball_at_tau_star"].to_numpy(dtype=np.float64) * pseudo_priced, priced,
              out=pinball, where=priced > 0)
    return got.assign(n_obs=real.astype(np.int64), cost_per_forecast=per_forecast,
                      pinball_at_tau_star=pinball,
                      n_without_costs=(real - priced).astype(np.int64))


def _priced_rows(cells: pd.DataFrame, data: MeasureData) -> np.ndarray:
    """Per group: the rows of the cells whose segment has unit costs."""
    costs = data.settings.costs
    priced = np.array([costs is not None and costs.of(str(s)) is not None
                       for s in cells["row_segment"]], dtype=bool)
    return np.bincount(cells["group"].to_numpy(dtype=np.int64),
                       weights=np.where(priced, cells["rows"].to_numpy(dtype=np.float64), 0.0),
                       minlength=data.n_groups)
