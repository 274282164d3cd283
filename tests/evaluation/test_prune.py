"""Pruning earlier forecasts to the rows the evaluation uses
(:func:`accuracy_checks.evaluation.join.prune_earlier`): the lags from each cycle's first
period, as a row-by-row computation gives them, for on-grid and off-grid dates, cycles given
in any order, and calendar frequencies."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from accuracy_checks.evaluation.grid import grid_positions
from accuracy_checks.evaluation.join import CYCLE_START, prune_earlier
from accuracy_checks.sources import frames as F


def earlier_frame(frequency: str, seed: int) -> pd.DataFrame:
    rng = np.random.default_rng(seed)
    issues = pd.date_range("2026-01-05", periods=6, freq=frequency)
    rows = []
    for i, issued in enumerate(issues):
        weeks = pd.date_range(issued, periods=5, freq=frequency)[1 if i == 2 else 0:]
        for s in range(3):
            for w in weeks:
                rows.append((f"S{s}", w, issued, float(rng.normal())))
    rows.append(("S9", issues[3] + pd.Timedelta(days=2), issues[3], 1.0))  # off the grid
    frame = pd.DataFrame(rows, columns=["store", F.PERIOD, F.ISSUED, F.FORECAST])
    return frame.sample(frac=1.0, random_state=seed).reset_index(drop=True)


def row_by_row(earlier: pd.DataFrame, periods: list[pd.Timestamp], lags: list[int],
               frequency: str) -> pd.DataFrame:
    starts = earlier.groupby(F.ISSUED)[F.PERIOD].min()
    rows = earlier.loc[earlier[F.PERIOD].isin(periods)]
    first = starts.reindex(pd.DatetimeIndex(rows[F.ISSUED])).to_numpy()
    pos, _ = grid_positions(rows[F.PERIOD], frequency)
    first_pos, _ = grid_positions(pd.Series(first), frequency)
    rows = rows.assign(**{CYCLE_START: first, F.LAG: pos - first_pos + 1})
    return rows.loc[rows[F.LAG].isin(lags)].reset_index(drop=True)


@pytest.mark.parametrize("frequency", ["W-MON", "MS", "D"])
@pytest.mark.parametrize("lags", [[1], [1, 3], [2, 5]])
def test_prune_earlier_equals_the_row_by_row_lags(frequency: str, lags: list[int]) -> None:
    earlier = earlier_frame(frequency, seed=len(lags))
    periods = sorted(earlier[F.PERIOD].unique())[3:8]
    want = row_by_row(earlier, periods, lags, frequency)
    unsorted_starts = earlier.groupby(F.ISSUED, sort=False)[F.PERIOD].min()
    for starts in (None, unsorted_starts):
        got = prune_earlier(earlier, periods=periods, lags=lags, frequency=frequency,
                            starts=starts)
        pd.testing.assert_frame_equal(got, want)
    assert len(want) > 0
