"""Pre-reads of Parquet inputs and tables: what a run needs to know before reading the rows it
uses.

Each reads a few columns of Parquet files only (Arrow does the grouping; for a table or query,
a ``GROUP BY``/``DISTINCT`` query in the database: :mod:`accuracy_checks.sources.sql`) and
gives up — returns ``None`` — on anything unusual (a CSV file, dates that are not timestamps,
a column named twice, dates beyond the calendar): the full read then reports the problem with its
proper message. So a run reads only the recent actuals and the earlier forecasts it uses:

- :func:`cycle_starts`: the first period of every cycle of an earlier-forecasts file (lags
  stay right after the rows are cut to the evaluation span);
- :func:`actual_periods`: the periods that hold at least one actual;
- :func:`actual_series`: the series the actuals know, without loading their rows.
"""

from __future__ import annotations

from pathlib import Path
from typing import Any

import pandas as pd
from pandas.errors import OutOfBoundsDatetime

from accuracy_checks.config import Config, Place, SqlSource
from accuracy_checks.sources import datasets, sql
from accuracy_checks.sources import frames as F
from accuracy_checks.sources.columns import Column, to_key
from accuracy_checks.sources.files import PARQUET, is_timestamp, list_files, read_columns
from accuracy_checks.sources.readers import actual_columns, issued_since

__all__ = ["actual_periods", "actual_series", "cycle_starts"]


def cycle_starts(path: Place, config: Config, *, role: str = "history",
                 key: str = "history",
                 periods: list[pd.Timestamp] | None = None) -> pd.Series | None:
    """The first period of every cycle in a Parquet file or folder (or a table, or a dataset),
    read from its two date columns only (``None`` when a file is CSV or its dates are not
    timestamps). A dataset given the span's ``periods`` reads only the cycles issued since
    :func:`~accuracy_checks.sources.readers.issued_since` (older partitions never opened)."""
    import pyarrow.parquet as pq

    issued, period = config.forecast.issued, config.forecast.period
    if datasets.is_dataset(path):
        fc = config.forecast
        cols = [Column(issued, "date", "forecast.issued", F.ISSUED, fc.date_formats.get(issued)),
                Column(period, "date", "forecast.period", F.PERIOD, fc.date_formats.get(period))]
        since = issued_since(config, periods)
        frame = read_columns(path, cols, role=role, key=key, allow_empty=True,
                             since=(issued, since) if since is not None else None)
        if since is not None:
            frame = frame.loc[frame[F.ISSUED].isna() | (frame[F.ISSUED] >= since)]
        return frame.groupby(F.ISSUED)[F.PERIOD].min().astype("datetime64[ns]")
    if isinstance(path, SqlSource):
        return sql.cycle_starts(path, issued, period, role=role, key=f"{key}.sql")
    parts = []
    for f in list_files(path, role, key):
        if f.suffix.lower() not in PARQUET:
            return None
        try:
            schema = pq.read_schema(f)
            if not all(is_timestamp(schema, n) for n in (issued, period)):
                return None
            table = pq.read_table(f, columns=[issued, period])
        except (OSError, ValueError):
            return None  # the full read reports the problem with its proper message
        parts.append(table.group_by(issued).aggregate([(period, "min")]).to_pandas())
    if not parts:
        return None
    starts = pd.concat(parts, ignore_index=True)
    starts = starts.rename(columns={issued: F.ISSUED, f"{period}_min": F.PERIOD})
    out = starts.groupby(F.ISSUED)[F.PERIOD].min()
    try:
        out.index = pd.DatetimeIndex(out.index).tz_localize(None).as_unit("ns")
        return out.astype("datetime64[ns]") if len(out) else out
    except (OutOfBoundsDatetime, OverflowError):
        return None  # dates beyond the calendar: the full read names them


def actual_periods(config: Config, path: Place | None = None) -> pd.DatetimeIndex | None:
    """The sorted distinct periods that hold at least one actual, read from the period and
    value columns of Parquet files (or a table) only (``None`` when a file is CSV or its period
    column is not a timestamp: such inputs are read whole)."""
    import pyarrow.compute as pc
    import pyarrow.parquet as pq

    ac = config.actuals
    place = path or ac.place
    if isinstance(place, SqlSource):
        return sql.actual_periods(place, ac.period, ac.value)
    if datasets.is_dataset(place):
        cols = [c for c in actual_columns(config) if c.name in (ac.period, ac.value)]
        frame = read_columns(place, cols, role="actuals", key="actuals.path")
        present = frame.loc[frame[F.ACTUAL].notna(), F.PERIOD]
        return pd.DatetimeIndex(present.dropna().unique()).sort_values().as_unit("ns")
    found = []
    for f in list_files(place, "actuals", "actuals.path"):
        if f.suffix.lower() not in PARQUET:
            return None
        try:
            schema = pq.read_schema(f)
            if (not is_timestamp(schema, ac.period)
                    or len(schema.get_all_field_indices(ac.value)) != 1):
                return None
            table = pq.read_table(f, columns=[ac.period, ac.value])
        except (OSError, ValueError):
            return None  # the full read reports the problem with its proper message
        present = pc.filter(table[ac.period], pc.is_valid(table[ac.value]))
        found.append(pc.unique(present).to_pandas())
    periods = pd.DatetimeIndex(pd.concat(found, ignore_index=True).unique()).sort_values()
    periods = periods.tz_localize(None) if periods.tz is not None else periods
    try:
        return periods.as_unit("ns")
    except (OutOfBoundsDatetime, OverflowError):
        return None  # dates beyond the calendar: the full read names them


def actual_series(config: Config, path: Place | None = None) -> pd.DataFrame:
    """The distinct series (key columns) over every row of Parquet actuals (grouped in Arrow)
    or of a table (``SELECT DISTINCT``): the series the actuals know, without loading their
    rows."""
    import pyarrow.parquet as pq

    ac = config.actuals
    src = list(config.actual_keys)
    place = path or ac.place
    if isinstance(place, SqlSource):
        table = sql.distinct_rows(place, src, role="actuals", key="actuals.sql")
    elif datasets.is_dataset(place):
        cols = [c for c in actual_columns(config) if c.kind == "key"]
        found = read_columns(place, cols, role="actuals", key="actuals.path")
        return found.rename(columns=dict(zip(src, config.forecast.keys, strict=False))
                            ).drop_duplicates()
    else:
        parts = []
        for f in list_files(place, "actuals", "actuals.path"):
            parts.append(pq.read_table(f, columns=src).group_by(src).aggregate([]).to_pandas())
        table = pd.concat(parts, ignore_index=True)
    table = table.rename(columns=dict(zip(src, config.forecast.keys, strict=False)))
    column = Column("", "key", "actuals.keys")
    shown: Any = place if isinstance(place, SqlSource) else Path(str(place))
    out = {k: to_key(table[k], shown, column, "actuals", 1,
                      allow_missing=True) for k in config.forecast.keys}
    return pd.DataFrame(out).drop_duplicates()

