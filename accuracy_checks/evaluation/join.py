"""The evaluation frame: earlier cycles' forecasts joined with the actuals that arrived since.

Lag (docs/measures.md): where a target period sits in its cycle's horizon, counted on the period
grid. Lag 1 is the first period the cycle forecasts for any series, lag k the (k−1)-th grid
period after it:  ``lag = position(period) − position(first period of the cycle) + 1``.

Window: the ``window`` most recent periods that have at least one actual. The tracking signals
use a longer trailing window (``tracking_window`` periods, same rule), so the frame covers the
longer of the two and flags each row: ``__in_window`` (the evaluation window) and
``__in_tracking`` (the tracking window). Rows kept: those of a configured lag whose target
period lies in either window. Rows whose actual has not arrived (or is NaN) stay in the frame
with ``actual`` NaN; the measures count them as dropped.

Non-finite values are never scored: an infinite actual is read as no actual (the
``actuals.invalid_values`` check of :mod:`accuracy_checks.checks.actuals` fails and names its
rows), an infinite earlier forecast as no forecast; both rows count as dropped. So every value
that reaches the measures is finite, and a non-finite sum in the measures can only be an
overflow (see :func:`accuracy_checks.measures.stats.overflowed`).

The join runs on integer codes: the actuals are indexed once by (series, grid position)
(:class:`~accuracy_checks.evaluation.baselines.ActualsIndex`), which also serves the baselines and
the MASE scales; ``__series`` holds each row's series code in that index (−1: no actuals).
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from accuracy_checks.evaluation.baselines import ActualsIndex
from accuracy_checks.evaluation.grid import grid_positions
from accuracy_checks.sources import frames as F
from accuracy_checks.sources.frames import cycle_label

#: evaluation-frame columns of the engine's own (key columns may not start with ``__``)
CYCLE_START = "__cycle_start"
IN_WINDOW = "__in_window"
IN_TRACKING = "__in_tracking"
SERIES = "__series"


@dataclass
class Evaluation:
    frame: pd.DataFrame
    window: list[pd.Timestamp]
    cycles: list[dict[str, object]] = field(default_factory=list)
    #: the periods of the tracking window (empty when no tracking measure is wanted)
    tracking: list[pd.Timestamp] = field(default_factory=list)
    #: the actuals by (series, grid position); ``None`` when nothing is evaluated
    history: ActualsIndex | None = None


def window_periods(actuals: pd.DataFrame, window: int) -> list[pd.Timestamp]:
    """The ``window`` most recent periods that have at least one finite actual."""
    values = actuals[F.ACTUAL].to_numpy(dtype=np.float64, na_value=np.nan)
    present = actuals.loc[np.isfinite(values), F.PERIOD]
    periods = np.sort(present.unique())
    return [pd.Timestamp(p) for p in periods[-window:]] if window > 0 else []


def evaluation_frame(earlier: pd.DataFrame, actuals: pd.DataFrame, *, keys: list[str],
                     frequency: str, lags: list[int], window: int,
                     tracking_window: int = 0, history: ActualsIndex | None = None
                     ) -> Evaluation:
    """Join earlier forecasts (configured lags, target in a window) with actuals.

    Returns the frame with key columns, ``period``, ``issued``, ``lag``, ``segment``,
    ``forecast``, quantile columns, ``actual`` (NaN where not arrived) and the flags
    ``__in_window``/``__in_tracking`` and codes ``__series``; plus the window, the tracking
    window, the cycles used (with their attempts and sources) and the actuals index
    (``history`` when given: every actual, when ``actuals`` holds only the recent periods).
    """
    actuals = finite_actuals(actuals)
    periods = window_periods(actuals, max(window, tracking_window))
    main = periods[-window:]
    tracking = periods[-tracking_window:] if tracking_window > 0 else []
    if len(earlier) == 0 or not periods:
        cols = [*keys, F.PERIOD, F.ISSUED, F.LAG, F.SEGMENT, F.FORECAST, F.ACTUAL]
        return Evaluation(pd.DataFrame(columns=cols), main, tracking=tracking)
    rows = earlier.loc[earlier[F.PERIOD].isin(periods)]
    rows = add_lags_for_subset(earlier, rows, frequency)
    rows = rows.loc[rows[F.LAG].isin(lags)]
    # a non-finite earlier forecast cannot be scored: count it as dropped, like a missing one
    rows = rows.assign(**{F.FORECAST: rows[F.FORECAST].where(np.isfinite(rows[F.FORECAST]))})
    if history is None:
        history = ActualsIndex(actuals, keys, frequency)
    series = history.codes_of(rows)
    position = history.positions(rows[F.PERIOD])
    actual = history.values_at(series, position)
    off_grid = position < history.p0 - (1 << 40)
    if off_grid.any():  # an off-grid date matches only an actual of exactly that date
        actual[off_grid] = exact_join(rows.loc[off_grid], actuals, keys)
    period = rows[F.PERIOD]
    joined = rows.assign(**{
        F.ACTUAL: actual,
        SERIES: series,
        IN_WINDOW: period.isin(main).to_numpy(),
        IN_TRACKING: period.isin(tracking).to_numpy() if tracking else False,
    }).reset_index(drop=True)
    cycles = cycles_used(joined.loc[joined[IN_WINDOW]])
    return Evaluation(joined, main, cycles, tracking=tracking, history=history)


def finite_actuals(actuals: pd.DataFrame) -> pd.DataFrame:
    """``actuals`` with every infinite actual read as missing (NaN); the frame itself when
    none is infinite (one pass over the column, no copy)."""
    if len(actuals) == 0 or F.ACTUAL not in actuals.columns:
        return actuals
    values = actuals[F.ACTUAL].to_numpy(dtype=np.float64, na_value=np.nan)
    infinite = np.isinf(values)
    if not infinite.any():
        return actuals
    return actuals.assign(**{F.ACTUAL: np.where(infinite, np.nan, values)})


def exact_join(rows: pd.DataFrame, actuals: pd.DataFrame, keys: list[str]) -> np.ndarray:
    """The actual of each row with the same keys and exactly the same period (NaN if none)."""
    found = rows[[*keys, F.PERIOD]].merge(
        actuals[[*keys, F.PERIOD, F.ACTUAL]], on=[*keys, F.PERIOD], how="left", validate="m:1"
    )
    return found[F.ACTUAL].to_numpy(dtype=np.float64, na_value=np.nan)


def prune_earlier(earlier: pd.DataFrame, *, periods: list[pd.Timestamp], lags: list[int],
                  frequency: str, starts: pd.Series | None = None) -> pd.DataFrame:
    """Keep only the earlier-forecast rows the evaluation can use (a configured lag, a target
    period in ``periods``), with ``__cycle_start`` (each cycle's first period, from
    ``starts`` — issue date → first period — or from ``earlier`` itself) kept beside them so
    lags stay right after the cut. Done right after reading: most earlier rows are never used.
    """
    if len(earlier) == 0:
        return earlier
    if starts is None:
        starts = earlier.groupby(F.ISSUED, sort=False)[F.PERIOD].min()
    starts = starts.sort_index()
    issued = earlier[F.ISSUED].to_numpy(dtype="datetime64[ns]")
    cycle = np.minimum(starts.index.searchsorted(issued), max(len(starts) - 1, 0))
    if len(starts) and (starts.index.to_numpy(dtype="datetime64[ns]")[cycle] == issued).all():
        # every row's cycle is known: lags from the few cycles' grid positions, one cut
        first = starts.to_numpy()
        first_pos, _ = grid_positions(pd.Series(first), frequency)
        pos, _ = grid_positions(earlier[F.PERIOD], frequency)
        lag = pos - first_pos[cycle] + 1
        kept = earlier[F.PERIOD].isin(periods).to_numpy() & np.isin(lag, lags)
        return earlier.loc[kept].assign(**{CYCLE_START: first[cycle[kept]],
                                            F.LAG: lag[kept]}).reset_index(drop=True)
    rows = earlier.loc[earlier[F.PERIOD].isin(periods)]
    first = starts.reindex(pd.DatetimeIndex(rows[F.ISSUED])).to_numpy()
    rows = rows.assign(**{CYCLE_START: first})
    rows = add_lags_for_subset(earlier, rows, frequency)
    return rows.loc[rows[F.LAG].isin(lags)].reset_index(drop=True)


def cycle_targets(starts: pd.Series, *, periods: list[pd.Timestamp], lags: list[int],
                  frequency: str) -> dict[pd.Timestamp, list[pd.Timestamp]]:
    """For each cycle (``starts``: issue date → first period), the periods of ``periods`` it
    forecasts at a configured lag: the only rows of that cycle :func:`prune_earlier` keeps
    (cycles with none are left out). Readers filter on these (issue date, period) pairs while
    reading, so the rows of other periods and of unused cycles are never converted; the
    pairs are few (cycles × the span), computed on the grid like the lags themselves."""
    if len(starts) == 0 or not periods:
        return {}
    period_pos, _ = grid_positions(pd.DatetimeIndex(periods), frequency)
    start_pos, _ = grid_positions(pd.DatetimeIndex(starts.to_numpy()), frequency)
    lag = period_pos[None, :] - start_pos[:, None] + 1  # cycles × periods
    kept = np.isin(lag, lags)
    return {pd.Timestamp(issued): [periods[j] for j in np.flatnonzero(row)]
            for issued, row in zip(starts.index, kept, strict=True) if row.any()}


def add_lags_for_subset(earlier: pd.DataFrame, rows: pd.DataFrame,
                        frequency: str) -> pd.DataFrame:
    """Lags of ``rows`` (a subset of ``earlier``) measured from each cycle's first period:
    ``rows.__cycle_start`` where present, else the first period in ``earlier`` as a whole
    (the subset may not hold a cycle's first period)."""
    if len(rows) == 0:
        return rows.assign(**{F.LAG: pd.Series(dtype="int64")})
    if CYCLE_START in rows.columns:
        start_pos, _ = grid_positions(rows[CYCLE_START], frequency)
        pos, _ = grid_positions(rows[F.PERIOD], frequency)
        return rows.assign(**{F.LAG: pos - start_pos + 1})
    firsts = earlier.groupby(F.ISSUED, sort=False)[F.PERIOD].min()
    first_pos, _ = grid_positions(pd.Series(firsts.to_numpy()), frequency)
    first_of = pd.Series(first_pos, index=firsts.index)
    pos, _ = grid_positions(rows[F.PERIOD], frequency)
    return rows.assign(**{F.LAG: pos - first_of.reindex(rows[F.ISSUED]).to_numpy() + 1})


def cycles_used(joined: pd.DataFrame) -> list[dict[str, object]]:
    """The cycles (issue date, with attempt and source when present) whose rows in ``joined``
    met an actual, oldest first, as JSON-ready records."""
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
