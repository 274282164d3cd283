"""The period grid: where each date sits on the config's ``frequency``.

Positions are integers on one fixed origin, so they compare across frames (forecast,
actuals, earlier cycles): the lag of a forecast row is
``position(period) − position(first period of its cycle) + 1``.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
from pandas.tseries.frequencies import to_offset
from pandas.tseries.offsets import BaseOffset, Tick, Week

_ORIGIN = pd.Timestamp("2000-01-03")  # a Monday; only its being fixed matters


def offset_of(frequency: str) -> BaseOffset:
    return to_offset(frequency)


def grid_positions(dates: pd.Series | pd.DatetimeIndex,
                   frequency: str) -> tuple[np.ndarray, np.ndarray]:
    """Integer grid position of each date and whether the date lies exactly on the grid.

    An off-grid date gets the position of the next grid point. Vectorised: fixed steps
    (days, hours, weeks) by integer arithmetic, calendar offsets (months, quarters, years,
    business days) through the grid of the distinct dates only.

    >>> d = pd.Series(pd.to_datetime(["2026-01-05", "2026-01-12", "2026-01-14"]))
    >>> pos, on = grid_positions(d, "W-MON")
    >>> (pos - pos[0]).tolist(), on.tolist()
    ([0, 1, 2], [True, True, False])
    """
    offset = to_offset(frequency)
    values = pd.DatetimeIndex(dates).as_unit("ns")
    if len(values) == 0:
        return np.zeros(0, dtype=np.int64), np.zeros(0, dtype=bool)
    if isinstance(offset, Tick) or (isinstance(offset, Week) and offset.weekday is not None
                                    and offset.n == 1):
        step = (
            pd.Timedelta(offset).value if isinstance(offset, Tick) else pd.Timedelta(days=7).value
        )
        origin = offset.rollback(_ORIGIN) if isinstance(offset, Week) else _ORIGIN
        delta = values.asi8 - pd.Timestamp(origin).as_unit("ns").value
        pos = -((-delta) // step)  # ceil: an off-grid date maps to the next grid point
        return pos.astype(np.int64), (delta % step == 0)
    codes, uniques = pd.factorize(values, sort=True)
    first = offset.rollback(uniques[0])
    last = offset.rollforward(uniques[-1])
    grid = pd.date_range(first, last, freq=offset).as_unit("ns")
    idx = grid.searchsorted(uniques)
    on_grid = grid[np.minimum(idx, len(grid) - 1)] == uniques
    # shift to the fixed origin so positions compare across calls
    origin = offset.rollback(_ORIGIN)
    if first >= origin:
        base = len(pd.date_range(origin, first, freq=offset)) - 1
    else:
        base = -(len(pd.date_range(first, origin, freq=offset)) - 1)
    upos = idx.astype(np.int64) + base
    return upos[codes], np.asarray(on_grid)[codes]


def grid_dates(start: pd.Timestamp, periods: int, frequency: str) -> pd.DatetimeIndex:
    """``periods`` consecutive grid dates from ``start`` (rolled forward onto the grid)."""
    return pd.date_range(to_offset(frequency).rollforward(start), periods=periods, freq=frequency)
