"""The cost of forecast errors in money, from per-segment unit costs (config ``costs``).

Each unit under-forecast (``e > 0``: demand not covered) costs ``c_under``, each unit
over-forecast (``e < 0``: stock left over) costs ``c_over``:

    cost = Σ c_under·max(e, 0) + c_over·max(−e, 0)

pooled over the group's rows, in money (``costs.currency``). Since
``c_under·max(u, 0) + c_over·max(−u, 0) = (c_under + c_over)·ρ_τ(u)`` with the pinball loss
``ρ_τ`` at ``τ* = c_under / (c_under + c_over)`` (METRICS.md 14), the cost is a pinball loss
at the cost-optimal quantile, scaled to money: the forecast that minimises the expected cost is
the τ* quantile of demand (the newsvendor's critical fractile). The details report τ* and that
pinball loss in data units. Segment ``"*"`` adds the money of every segment, each at its own
unit costs.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from accuracy_checks import frames as F
from accuracy_checks.measures.data import MeasureData, result_frame
from accuracy_checks.measures.registry import Measure, register_measure

__all__ = ["error_cost_from_data"]


def error_cost_from_data(data: MeasureData) -> pd.DataFrame:
    """Money lost to errors per group; ``not_configured`` if a usable row's segment has no
    unit costs (and ``costs.default`` is not set)."""
    costs = data.settings.costs
    codes, segments = pd.factorize(data.rows[F.SEGMENT], sort=False)
    table = [costs.of(str(s)) if costs is not None else None for s in segments]
    under_of = np.array([np.nan if c is None else c[0] for c in table] + [np.nan])
    over_of = np.array([np.nan if c is None else c[1] for c in table] + [np.nan])
    c_under = under_of[codes]
    c_over = over_of[codes]
    e = data.error
    has = data.usable & ~np.isnan(c_under)
    under = np.where(has, np.maximum(e, 0.0), 0.0)
    over = np.where(has, np.maximum(-e, 0.0), 0.0)
    with np.errstate(invalid="ignore"):
        under_cost = data.gsum(np.where(has, c_under * under, 0.0), has)
        over_cost = data.gsum(np.where(has, c_over * over, 0.0), has)
        tau = np.where(has, c_under / (c_under + c_over), 0.0)
        pinball = np.where(has, (c_under * under + c_over * over) / (c_under + c_over), 0.0)
    n = data.gsum(mask=has)
    lacking = data.gsum(mask=data.usable & np.isnan(c_under))
    total = under_cost + over_cost
    per_forecast = np.full(data.n_groups, np.nan)
    np.divide(total, n, out=per_forecast, where=n > 0)
    mean_tau = np.full(data.n_groups, np.nan)
    np.divide(data.gsum(tau, has), n, out=mean_tau, where=n > 0)
    # the segments present in each group, and whether they share one τ*
    width = len(segments) + 1
    present = np.bincount(data.group[has] * width + codes[has],
                          minlength=data.n_groups * width).reshape(data.n_groups, width) > 0
    with np.errstate(invalid="ignore"):
        tau_of = under_of / (under_of + over_of)
    low = np.where(present, tau_of, np.inf).min(axis=1)
    high = np.where(present, tau_of, -np.inf).max(axis=1)
    one_tau = (n > 0) & np.isclose(low, high, rtol=0.0, atol=1e-12)
    pinball_mean = np.full(data.n_groups, np.nan)
    np.divide(data.gsum(pinball, has), n, out=pinball_mean, where=one_tau)
    unit = costs.currency if costs is not None else "money"
    return result_frame(
        data.n_groups, total,
        [(data.gsum(mask=data.usable) == 0, "no_data"), (lacking > 0, "not_configured")],
        n_obs=data.gsum(mask=data.usable).astype(np.int64), under_cost=under_cost,
        over_cost=over_cost,
        cost_per_forecast=per_forecast, under_units=data.gsum(under, has),
        over_units=data.gsum(over, has), tau_star=np.where(one_tau, mean_tau, np.nan),
        pinball_at_tau_star=pinball_mean, n_without_costs=lacking.astype(np.int64),
        unit=np.full(data.n_groups, unit, dtype=object),
    )


register_measure(Measure(
    id="error_cost",
    label="Cost of error",
    unit="money",
    direction="lower",
    compute=error_cost_from_data,
    needs=frozenset({"costs"}),
    description="Σ c_under·max(e, 0) + c_over·max(−e, 0) in money (costs.currency), pooled; "
    "= (c_under + c_over) × the pinball loss at τ* = c_under/(c_under + c_over). Segment * "
    "adds every segment's money at its own unit costs (project choice; pinball: METRICS.md 14).",
))
