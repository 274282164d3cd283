"""Worst offenders: the series a planner opens first when a segment breaches a threshold.

For each breached group (lag × segment), the series are ranked by their contribution to the
group's absolute error ``Σ|e|`` — or, for bias-type measures (mean error, bias %, tracking
signals), to its bias: ``Σe`` in the direction of the group's net error. Each example gives
the series' keys (and segment, for ``"*"``), its rows, ``error`` (Σe: positive =
under-forecast), ``abs_error`` (Σ|e|) and its shares of the group's totals in percent. A share
of the bias can exceed 100 % when other series offset part of it. A sum beyond the float64 range
is ``None`` (and so is every share of an overflowed total); such series rank first.

One pass for all breached groups: per-series sums with ``np.bincount`` over the rows of those
groups, one sort of the series by (group, contribution), and the first ``limit`` of each group.
"""

from __future__ import annotations

from typing import Any

import numpy as np
import pandas as pd

from accuracy_checks.measures.data import MeasureData, dense_codes
from accuracy_checks.results import ALL_SERIES, json_value
from accuracy_checks.sources import frames as F

__all__ = ["worst_offenders"]


def worst_offenders(data: MeasureData, keys: list[str], breached: dict[int, bool],
                    limit: int) -> dict[int, list[dict[str, Any]]]:
    """Examples for each breached group: ``{group: [example, …]}`` (at most ``limit`` each).

    ``breached`` maps a group code to whether its measure is bias-type (rank by the share of
    the bias, else of the absolute error).
    """
    if limit <= 0 or not breached:
        return {}
    wanted = np.zeros(data.n_groups, dtype=bool)
    wanted[list(breached)] = True
    rows = np.flatnonzero(data.usable & wanted[data.group])
    if rows.size == 0:
        return {}
    group = data.group[rows]
    error = data.error[rows]
    width = max(data.n_series, 1)
    unit, original = dense_codes(group * width + data.series[rows], data.n_groups * width)
    unit_group = original // width
    n_units = original.size
    sum_e = np.bincount(unit, weights=error, minlength=n_units)
    sum_abs = np.bincount(unit, weights=np.abs(error), minlength=n_units)
    count = np.bincount(unit, minlength=n_units)
    total_e = np.bincount(unit_group, weights=sum_e, minlength=data.n_groups)
    total_abs = np.bincount(unit_group, weights=sum_abs, minlength=data.n_groups)
    # the first row of each unit, to read its keys
    first = pd.Series(unit).drop_duplicates().index.to_numpy()
    first_of = np.empty(n_units, dtype=np.int64)
    first_of[unit[first]] = rows[first]

    bias_group = np.array([breached.get(g, False) for g in range(data.n_groups)], dtype=bool)
    with np.errstate(invalid="ignore"):
        direction = np.sign(total_e)
        score = np.where(bias_group[unit_group] & np.isfinite(direction[unit_group]),
                         sum_e * direction[unit_group], sum_abs)
    # sums beyond the float64 range: the largest errors first, never an undefined rank
    score = np.nan_to_num(score, nan=np.inf)
    order = np.lexsort((-score, unit_group))
    sorted_groups = unit_group[order]
    starts = np.searchsorted(sorted_groups, np.arange(data.n_groups), side="left")
    stops = np.searchsorted(sorted_groups, np.arange(data.n_groups), side="right")

    out: dict[int, list[dict[str, Any]]] = {}
    for g in breached:  # a loop over breached groups, not over series
        chosen = order[starts[g]:min(stops[g], starts[g] + limit)]
        if chosen.size == 0:
            continue
        columns = [*keys, F.SEGMENT] if data.groups[F.SEGMENT].iat[g] == ALL_SERIES else keys
        labels = data.rows[columns].iloc[first_of[chosen]].astype(object)
        examples = []
        for i, record in zip(chosen, labels.to_dict("records"), strict=True):
            example: dict[str, Any] = {k: json_value(v) for k, v in record.items()}
            example.update({
                "n_obs": int(count[i]),
                "error": finite_or_none(sum_e[i]),
                "abs_error": finite_or_none(sum_abs[i]),
                "share_of_abs_error_pct": share_pct(sum_abs[i], total_abs[g]),
                "share_of_bias_pct": share_pct(sum_e[i], total_e[g]),
            })
            examples.append(example)
        out[g] = examples
    return out


def finite_or_none(value: float) -> float | None:
    """A sum as a float, ``None`` when it exceeds the float64 range."""
    return float(value) if np.isfinite(value) else None


def share_pct(part: float, whole: float) -> float | None:
    """``part`` in percent of ``whole``; ``None`` when undefined (a zero or overflowed total, or
    a share itself beyond the float64 range)."""
    if whole == 0 or not (np.isfinite(part) and np.isfinite(whole)):
        return None
    with np.errstate(over="ignore"):
        share = 100.0 * part / whole
        if not np.isfinite(share):  # 100·part overflowed: divide first
            share = 100.0 * (part / whole)
    return float(share) if np.isfinite(share) else None
