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

import json
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd
from pandas.errors import OutOfBoundsDatetime

from accuracy_checks.config import Config, Place, SqlSource
from accuracy_checks.errors import InputError
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
        after = ([datasets.DateFilter(issued, since=since, fmt=fc.date_formats.get(issued))]
                 if since is not None else [])
        try:  # the distinct (issue date, period) rows, grouped while scanning
            frame = datasets.read_dataset_columns(path, cols, role=role, key=key,
                                                  allow_empty=True, filters=after, distinct=True)
        except InputError:  # the full read names the rows as it always has
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
            parts.append(_file_starts(pq.ParquetFile(f), issued, period))
        except (OSError, ValueError):
            return None  # the full read reports the problem with its proper message
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


#: Parquet's timestamp units → numpy's
_UNITS = {"milliseconds": "ms", "microseconds": "us", "nanoseconds": "ns"}


def _file_starts(file: Any, issued: str, period: str) -> pd.DataFrame:
    """The first period of every cycle in one Parquet file (columns ``issued`` and
    ``<period>_min``), from the row groups' statistics where they tell it without reading a
    row: a row group whose issue dates are all one date (min = max, no missing one) adds
    (that date, its smallest period). Only the other row groups — those that straddle two
    cycles, lack statistics or hold missing dates — are read, and only their two date
    columns. A file sorted or partitioned by issue date (docs/inputs.md) is thus never read
    here; any other file costs at most the old full read of the two columns."""
    names = [file.schema.column(i).path for i in range(len(file.schema))]
    at = [names.index(n) if names.count(n) == 1 else -1 for n in (issued, period)]
    units = {_naive_unit(file.schema.column(i)) if i >= 0 else None for i in at}
    meta = file.metadata
    known: list[tuple[int, int]] = []
    unread: list[int] = []
    for r in range(meta.num_row_groups):
        group = meta.row_group(r)
        if group.num_rows == 0:
            continue
        day, first = (group.column(i).statistics if i >= 0 else None for i in at)
        if (len(units) == 1 and None not in units and day is not None and first is not None
                and day.has_min_max and day.has_null_count and first.has_min_max
                and day.null_count == 0 and day.min_raw == day.max_raw):
            known.append((day.min_raw, first.min_raw))
        else:
            unread.append(r)
    parts = []
    if known:
        unit = next(iter(units))
        raw = np.array(known, dtype=np.int64)
        parts.append(pd.DataFrame({issued: raw[:, 0].astype(f"datetime64[{unit}]"),
                                   f"{period}_min": raw[:, 1].astype(f"datetime64[{unit}]")}))
    if unread or not parts:
        table = file.read_row_groups(unread, columns=[issued, period])
        parts.append(table.group_by(issued).aggregate([(period, "min")]).to_pandas())
    return pd.concat(parts, ignore_index=True) if len(parts) > 1 else parts[0]


def _naive_unit(column: Any) -> str | None:
    """The numpy unit of a Parquet column of naive timestamps stored as INT64 (its
    statistics are then exact wall-clock values), else ``None``."""
    if column.physical_type != "INT64":
        return None
    logical = json.loads(column.logical_type.to_json())
    if logical.get("Type") != "Timestamp" or logical.get("isAdjustedToUTC", True):
        return None
    return _UNITS.get(str(logical.get("timeUnit")))


def actual_periods(config: Config, path: Place | None = None) -> pd.DatetimeIndex | None:
    """The sorted distinct periods that hold at least one actual, read from the period and
    value columns of Parquet files (or a table) only (``None`` when a file is CSV or its period
    column is not a timestamp: such inputs are read whole)."""
    import pyarrow.parquet as pq

    ac = config.actuals
    place = path or ac.place
    if isinstance(place, SqlSource):
        return sql.actual_periods(place, ac.period, ac.value)
    if datasets.is_dataset(place):
        cols = {c.name: c for c in actual_columns(config) if c.name in (ac.period, ac.value)}
        present = datasets.read_dataset_columns(
            place, [cols[ac.period]], role="actuals", key="actuals.path", distinct=True,
            present=cols[ac.value])[F.PERIOD]
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
            found.append(_file_periods(pq.ParquetFile(f), ac.period, ac.value))
        except (OSError, ValueError):
            return None  # the full read reports the problem with its proper message
    periods = pd.DatetimeIndex(pd.concat(found, ignore_index=True).unique()).sort_values()
    periods = periods.tz_localize(None) if periods.tz is not None else periods
    try:
        return periods.as_unit("ns")
    except (OutOfBoundsDatetime, OverflowError):
        return None  # dates beyond the calendar: the full read names them


def _file_periods(file: Any, period: str, value: str) -> pd.Series:
    """The distinct periods of one Parquet file that hold a value (not null), from the row
    groups' statistics where they tell it without reading a row: a row group of one period
    (min = max, none missing) holds a value unless its value column is null on every row.
    Only the other row groups are read, and only their period and value columns."""
    import pyarrow.compute as pc

    names = [file.schema.column(i).path for i in range(len(file.schema))]
    at_period, at_value = (names.index(n) if names.count(n) == 1 else -1 for n in (period, value))
    unit = _naive_unit(file.schema.column(at_period)) if at_period >= 0 else None
    meta = file.metadata
    known: list[int] = []
    unread: list[int] = []
    for r in range(meta.num_row_groups):
        group = meta.row_group(r)
        if group.num_rows == 0:
            continue
        days = group.column(at_period).statistics if at_period >= 0 else None
        values = group.column(at_value).statistics if at_value >= 0 else None
        if (unit is not None and days is not None and values is not None
                and days.has_min_max and days.has_null_count and days.null_count == 0
                and days.min_raw == days.max_raw and values.has_null_count):
            if values.null_count < group.num_rows:
                known.append(days.min_raw)
        else:
            unread.append(r)
    parts = []
    if known:
        parts.append(pd.Series(np.array(known, dtype=np.int64).astype(f"datetime64[{unit}]")))
    if unread or not parts:
        table = file.read_row_groups(unread, columns=[period, value])
        present = pc.filter(table[period], pc.is_valid(table[value]))
        parts.append(pc.unique(present).to_pandas())
    return pd.concat(parts, ignore_index=True) if len(parts) > 1 else parts[0]


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
        found = datasets.read_dataset_columns(place, cols, role="actuals", key="actuals.path",
                                              distinct=True)
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

