"""The period grid: where each date sits on the config's ``frequency``.

Positions are integers on one fixed origin, so they compare across frames (forecast,
actuals, earlier cycles): the lag of a forecast row is
``position(period) − position(first period of its cycle) + 1``.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
from pandas.errors import OutOfBoundsDatetime, OutOfBoundsTimedelta
from pandas.tseries.frequencies import to_offset
from pandas.tseries.offsets import BaseOffset, Tick, Week

from accuracy_checks.errors import InputError

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
        # ceil(delta / step) as floor((delta + step − 1) / step), in place: an off-grid date
        # maps to the next grid point (the calendar's last day lies far below 2**63 − step)
        pos = delta + (step - 1)
        np.floor_divide(pos, step, out=pos)
        return pos.astype(np.int64, copy=False), np.multiply(pos, step) == delta
    codes, uniques = pd.factorize(values, sort=True)
    try:
        first = pd.Timestamp(offset.rollback(uniques[0])).as_unit("ns")
        last = pd.Timestamp(offset.rollforward(uniques[-1])).as_unit("ns")
        grid = pd.date_range(first, last, freq=offset).as_unit("ns")
    except (OutOfBoundsDatetime, OutOfBoundsTimedelta, OverflowError):
        raise _past_the_calendar(uniques[0], uniques[-1], frequency) from None
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
    """``periods`` consecutive grid dates from ``start`` (rolled forward onto the grid).

    Raises :class:`InputError` when they would run past the calendar (year 2262).
    """
    try:
        # nanosecond timestamps: the calendar every frame uses ends in 2262
        first = to_offset(frequency).rollforward(pd.Timestamp(start).as_unit("ns"))
        return pd.date_range(pd.Timestamp(first).as_unit("ns"), periods=periods,
                             freq=frequency).as_unit("ns")
    except (OutOfBoundsDatetime, OutOfBoundsTimedelta, OverflowError):
        raise _past_the_calendar(start, None, frequency, periods) from None


def _past_the_calendar(first: pd.Timestamp, last: pd.Timestamp | None, frequency: str,
                       periods: int | None = None) -> InputError:
    span = (f"{periods} periods of `frequency` {frequency!r} from {first:%Y-%m-%d}"
            if periods is not None else
            f"the grid of `frequency` {frequency!r} around the dates {first:%Y-%m-%d} to "
            f"{pd.Timestamp(last):%Y-%m-%d}")
    return InputError(
        f"The dates run past the calendar the tool computes on ({span} reach beyond "
        f"{pd.Timestamp.max:%Y-%m-%d}). Check the dates in the forecast and actuals, and the "
        "config's `horizon` and `frequency`."
    )
