"""The evaluation frame: earlier cycles' forecasts joined with the actuals that arrived since.

Lag (PRODUCT.md): where a target period sits in its cycle's horizon, counted on the period
grid. Lag 1 is the first period the cycle forecasts for any series, lag k the (k−1)-th grid
period after it:  ``lag = position(period) − position(first period of the cycle) + 1``.

Window: the ``window`` most recent periods that have at least one actual. Rows kept: those of
a configured lag whose target period lies in the window. Rows whose actual has not arrived (or
is NaN) stay in the frame with ``actual`` NaN; the measures count them as dropped.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from accuracy_checks import frames as F
from accuracy_checks.archive import cycle_label
from accuracy_checks.grid import grid_positions


@dataclass
class Evaluation:
    frame: pd.DataFrame
    window: list[pd.Timestamp]
    cycles: list[dict[str, object]] = field(default_factory=list)


def window_periods(actuals: pd.DataFrame, window: int) -> list[pd.Timestamp]:
    """The ``window`` most recent periods that have at least one non-missing actual."""
    present = actuals.loc[actuals[F.ACTUAL].notna(), F.PERIOD]
    periods = np.sort(present.unique())
    return [pd.Timestamp(p) for p in periods[-window:]]


def evaluation_frame(earlier: pd.DataFrame, actuals: pd.DataFrame, *, keys: list[str],
                     frequency: str, lags: list[int], window: int) -> Evaluation:
    """Join earlier forecasts (configured lags, target in the window) with actuals.

    Returns the frame with key columns, ``period``, ``issued``, ``lag``, ``segment``,
    ``forecast``, quantile columns, ``actual`` (NaN where not arrived), plus the window and
    the cycles used (with their attempts and sources).
    """
    periods = window_periods(actuals, window)
    if len(earlier) == 0 or not periods:
        cols = [*keys, F.PERIOD, F.ISSUED, F.LAG, F.SEGMENT, F.FORECAST, F.ACTUAL]
        return Evaluation(pd.DataFrame(columns=cols), periods)
    rows = earlier.loc[earlier[F.PERIOD].isin(periods)]
    rows = add_lags_for_subset(earlier, rows, frequency)
    rows = rows.loc[rows[F.LAG].isin(lags)]
    # a non-finite earlier forecast cannot be scored: count it as dropped, like a missing one
    rows = rows.assign(**{F.FORECAST: rows[F.FORECAST].where(np.isfinite(rows[F.FORECAST]))})
    joined = rows.merge(
        actuals[[*keys, F.PERIOD, F.ACTUAL]], on=[*keys, F.PERIOD], how="left", validate="m:1"
    )
    cycles = _cycles_used(joined)
    return Evaluation(joined.reset_index(drop=True), periods, cycles)


def add_lags_for_subset(earlier: pd.DataFrame, rows: pd.DataFrame,
                        frequency: str) -> pd.DataFrame:
    """Lags of ``rows`` (a subset of ``earlier``) measured from each cycle's first period in
    ``earlier`` as a whole (the subset may not hold a cycle's first period)."""
    if len(rows) == 0:
        return rows.assign(**{F.LAG: pd.Series(dtype="int64")})
    firsts = earlier.groupby(F.ISSUED, sort=False)[F.PERIOD].min()
    first_pos, _ = grid_positions(pd.Series(firsts.to_numpy()), frequency)
    first_of = pd.Series(first_pos, index=firsts.index)
    pos, _ = grid_positions(rows[F.PERIOD], frequency)
    return rows.assign(**{F.LAG: pos - first_of.reindex(rows[F.ISSUED]).to_numpy() + 1})


def _cycles_used(joined: pd.DataFrame) -> list[dict[str, object]]:
    if len(joined) == 0:
        return []
    cols = [F.ISSUED] + [c for c in (F.ATTEMPT, F.SOURCE) if c in joined.columns]
    used = joined.loc[joined[F.ACTUAL].notna(), cols].drop_duplicates().sort_values(F.ISSUED)
    out: list[dict[str, object]] = []
    for rec in used.to_dict("records"):
        attempt = rec.get(F.ATTEMPT)
        out.append({
            "cycle": cycle_label(pd.Timestamp(rec[F.ISSUED])),
            "attempt": None if attempt is None or pd.isna(attempt) else int(attempt),
            "source": rec.get(F.SOURCE, "history"),
        })
    return out
