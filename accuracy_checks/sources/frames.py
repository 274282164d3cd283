"""The canonical frames every check and measure works on (produced by :mod:`sources`).

Column names below are fixed; key columns keep the names the config gives them (never one of
:data:`~accuracy_checks.config.RESERVED_COLUMNS`).

forecast (the cycle being checked) and earlier (forecasts of earlier cycles)
    ``<keys…>`` (string dtype), ``period`` (datetime64), ``issued`` (datetime64, the cycle),
    ``forecast`` (float64; may hold NaN/inf — the output checks report them), one float64
    column per configured quantile named by :func:`quantile_column` (``q0.1``, ``q0.9``),
    ``segment`` (string; ``"*"`` for every series when no segments are configured).
    ``earlier`` also has ``attempt`` (Int64, archive attempt or <NA>) and ``source``
    (``"history"`` or ``"archive"``).
actuals
    ``<keys…>``, ``period``, ``actual`` (float64, NaN where missing), ``segment``
    (``"unassigned"`` for series whose segment is unknown).
"""

from __future__ import annotations

from typing import TYPE_CHECKING

if TYPE_CHECKING:  # pandas loads only where frames are built
    import pandas as pd

PERIOD = "period"
ISSUED = "issued"
FORECAST = "forecast"
ACTUAL = "actual"
SEGMENT = "segment"
LAG = "lag"
ATTEMPT = "attempt"
SOURCE = "source"
UNASSIGNED = "unassigned"


def quantile_column(tau: float) -> str:
    """Canonical name of the column holding the ``tau`` quantile.

    >>> quantile_column(0.1), quantile_column(0.975)
    ('q0.1', 'q0.975')
    """
    return f"q{tau:g}"


def cycle_label(issued: pd.Timestamp) -> str:
    """The label of a cycle: its issue date (with the time only when it is not midnight).

    >>> import pandas as pd
    >>> cycle_label(pd.Timestamp("2026-03-02")), cycle_label(pd.Timestamp("2026-03-02 06:30"))
    ('2026-03-02', '2026-03-02T06-30-00')
    """
    if issued == issued.normalize():
        return issued.strftime("%Y-%m-%d")
    return issued.strftime("%Y-%m-%dT%H-%M-%S")
