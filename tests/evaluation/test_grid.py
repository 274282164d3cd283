"""The period grid (:mod:`accuracy_checks.evaluation.grid`): dates → integer positions, and the
calendar's bounds as an input error."""

from __future__ import annotations

import pandas as pd
import pytest

from accuracy_checks.errors import InputError
from accuracy_checks.evaluation.grid import grid_dates, grid_positions


def test_grid_beyond_the_calendar_is_an_input_error() -> None:
    with pytest.raises(InputError, match="2262-04-11") as info:
        grid_dates(pd.Timestamp("2262-04-05"), 13, "D")
    assert "`horizon`" in str(info.value) and "'D'" in str(info.value)
    with pytest.raises(InputError, match="run past the calendar"):
        grid_positions(pd.Series(pd.to_datetime(["2262-04-02", "2262-04-11"])), "MS")
    assert len(grid_dates(pd.Timestamp("2262-04-01"), 11, "D")) == 11


def test_positions_count_grid_periods_and_flag_dates_off_the_grid() -> None:
    dates = pd.Series(pd.to_datetime(["2026-01-05", "2026-01-19", "2026-01-20"]))
    pos, on_grid = grid_positions(dates, "W-MON")
    assert int(pos[1] - pos[0]) == 2
    assert list(on_grid) == [True, True, False]
    assert list(grid_dates(pd.Timestamp("2026-01-05"), 3, "W-MON")) == list(
        pd.date_range("2026-01-05", periods=3, freq="W-MON"))
