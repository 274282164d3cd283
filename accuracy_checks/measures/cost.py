"""The cost of forecast errors in money, from per-segment unit costs (config ``costs``).

Each unit under-forecast (``e > 0``: demand not covered) costs ``c_under``, each unit
over-forecast (``e < 0``: stock left over) costs ``c_over``:

    cost = Σ c_under·max(e, 0) + c_over·max(−e, 0)

pooled over the group's rows, in money (``costs.currency``). Since
``c_under·max(u, 0) + c_over·max(−u, 0) = (c_under + c_over)·ρ_τ(u)`` with the pinball loss
``ρ_τ`` at ``τ* = c_under / (c_under + c_over)`` (docs/measures.md §14), the cost is a pinball loss
at the cost-optimal quantile, scaled to money: the forecast that minimises the expected cost is
the τ* quantile of demand (the newsvendor's critical fractile). The details report τ* and that
pinball loss in data units. Segment ``"*"`` adds the money of every segment, each at its own
unit costs.
"""

from __future__ import annotations

from collections.abc import Mapping
from typing import Any

import numpy as np
import pandas as pd

from accuracy_checks.measures.data import MeasureData, result_frame
from accuracy_checks.measures.registry import declare
from accuracy_checks.measures.wording import format_number
from accuracy_checks.sources import frames as F

__all__ = ["error_cost_from_data"]


def error_cost_from_data(data: MeasureData) -> pd.DataFrame:
    """Money lost to errors per group; ``not_configured`` if a usable row's segment has no
    unit costs (and ``costs.default`` is not set).

    One pass over the rows: units under- and over-forecast summed per (group, segment) cell
    with ``np.bincount``; the unit costs then apply per cell.
    """
    costs = data.settings.costs
    codes, segments = pd.factorize(data.rows[F.SEGMENT], sort=False)
    width = max(len(segments), 1)
    # unpriced padding for the one empty cell when the window has no row (so the per-cell
    # arrays below keep their (group, cell) shape)
    table = [costs.of(str(s)) if costs is not None else None for s in segments] or [None]
    under_of = np.array([np.nan if c is None else c[0] for c in table])
    over_of = np.array([np.nan if c is None else c[1] for c in table])
    usable = data.usable & (codes >= 0)
    cell = data.group[usable] * width + codes[usable]
    e = data.error[usable]
    shape = (data.n_groups, width)
    size = data.n_groups * width
    under = np.bincount(cell, weights=np.maximum(e, 0.0), minlength=size).reshape(shape)
    over = np.bincount(cell, weights=np.maximum(-e, 0.0), minlength=size).reshape(shape)
    rows = np.bincount(cell, minlength=size).reshape(shape)
    priced = ~np.isnan(under_of)  # per segment
    rows_priced = np.where(priced, rows, 0)
    under_cost = np.where(priced, under * np.nan_to_num(under_of), 0.0).sum(axis=1)
    over_cost = np.where(priced, over * np.nan_to_num(over_of), 0.0).sum(axis=1)
    total = under_cost + over_cost
    n = rows_priced.sum(axis=1)
    n_all = rows.sum(axis=1)
    lacking = n_all - n
    per_forecast = np.full(data.n_groups, np.nan)
    np.divide(total, n, out=per_forecast, where=n > 0)
    # τ* and the pinball loss at τ*, when every priced row of the group shares one τ*
    with np.errstate(invalid="ignore"):
        tau_of = under_of / (under_of + over_of)
        pinball_cells = np.where(priced, (under * np.nan_to_num(under_of)
                                          + over * np.nan_to_num(over_of))
                                 / np.where(priced, under_of + over_of, 1.0), 0.0)
    present = rows_priced > 0
    low = np.where(present, tau_of, np.inf).min(axis=1)
    high = np.where(present, tau_of, -np.inf).max(axis=1)
    one_tau = (n > 0) & np.isclose(low, high, rtol=0.0, atol=1e-12)
    pinball_mean = np.full(data.n_groups, np.nan)
    np.divide(pinball_cells.sum(axis=1), n, out=pinball_mean, where=one_tau)
    unit = costs.currency if costs is not None else "money"
    return result_frame(
        data.n_groups, total, [(n_all == 0, "no_data"), (lacking > 0, "not_configured")],
        n_obs=n_all.astype(np.int64), under_cost=under_cost, over_cost=over_cost,
        cost_per_forecast=per_forecast,
        under_units=np.where(priced, under, 0.0).sum(axis=1),
        over_units=np.where(priced, over, 0.0).sum(axis=1),
        tau_star=np.where(one_tau, low, np.nan), pinball_at_tau_star=pinball_mean,
        n_without_costs=lacking.astype(np.int64),
        unit=np.full(data.n_groups, unit, dtype=object),
    )


def _cost_facts(details: Mapping[str, Any], unit: str | None) -> str:
    """The money of each side, and τ* when the group's rows share one."""
    if details.get("under_cost") is None:
        return ""
    unit = unit or "money"
    text = (f"Under-forecasting cost {format_number(details['under_cost'])} {unit}, "
            f"over-forecasting {format_number(details['over_cost'])} {unit}")
    if details.get("tau_star") is not None:
        text += f"; cost-optimal quantile τ* = {format_number(details['tau_star'])}"
    return text + "."


declare(
    [dict(id="error_cost", label="Cost of error", unit="money", direction="lower",
          compute=error_cost_from_data, needs=frozenset({"costs"}), facts=_cost_facts)],
    {"error_cost": "Σ c_under·max(e, 0) + c_over·max(−e, 0) in money (costs.currency), pooled; "
     "= (c_under + c_over) × the pinball loss at τ* = c_under/(c_under + c_over). Segment * "
     "adds every segment's money at its own unit costs (project choice; pinball: "
     "docs/measures.md §14)."},
)
