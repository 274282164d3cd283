"""The readers of the forecast and the actuals: configured columns → canonical frames.

Both return the frames of :mod:`accuracy_checks.sources.frames` (canonical column names, key
columns as categoricals of text) or raise :class:`~accuracy_checks.errors.InputError`. The
segment mapping is read by :func:`accuracy_checks.sources.segments.read_mapping`.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence

import pandas as pd

from accuracy_checks.config import Config, Place
from accuracy_checks.errors import InputError
from accuracy_checks.sources import frames as F
from accuracy_checks.sources.codes import duplicated_rows
from accuracy_checks.sources.columns import SHOWN, Column
from accuracy_checks.sources.files import columns_of, read_columns

__all__ = ["forecast_columns", "issued_since", "read_actuals", "read_forecast"]


def issued_since(config: Config, periods: Sequence[pd.Timestamp] | None) -> pd.Timestamp | None:
    """The earliest issue date of an earlier cycle that can hold a row the evaluation uses (a
    configured lag, a target in ``periods``): the span's first period less the largest lag
    plus the horizon, in periods of the frequency (a cycle's first period lies within its
    horizon after its issue date). Datasets never open the partitions of cycles issued
    before it. ``None``: no bound (no periods given)."""
    if not periods:
        return None
    from pandas.tseries.frequencies import to_offset

    back = max(config.evaluation.lags) + config.horizon
    return pd.Timestamp(min(periods)) - back * to_offset(config.frequency)


def forecast_columns(config: Config) -> list[Column]:
    """The forecast's configured columns: keys, period, issue date, value, quantiles."""
    fc = config.forecast
    cols = [Column(k, "key", "forecast.keys") for k in fc.keys]
    cols += [
        Column(fc.period, "date", "forecast.period", F.PERIOD, fc.date_formats.get(fc.period)),
        Column(fc.issued, "date", "forecast.issued", F.ISSUED, fc.date_formats.get(fc.issued)),
        Column(fc.value, "number", "forecast.value", F.FORECAST),
    ]
    cols += [
        Column(name, "number", f"forecast.quantiles.{tau:g}", F.quantile_column(tau))
        for tau, name in fc.quantiles.items()
    ]
    return cols


def read_forecast(config: Config, path: Place | None = None, *, role: str = "forecast",
                  key: str = "forecast.path", segment_columns: Sequence[str] = (),
                  allow_empty: bool = False,
                  periods: Sequence[pd.Timestamp] | None = None,
                  cycles: Mapping[pd.Timestamp, Sequence[pd.Timestamp]] | None = None
                  ) -> pd.DataFrame:
    """The forecast (or an earlier-cycles file with the same columns), canonical names.

    ``path`` is a file or folder, or a table or query (default: the forecast's place).
    ``segment_columns`` present in the file are read too (as text); with ``periods``, Parquet
    files whose period column is a timestamp keep only the rows of those periods (a table:
    ``period IN (…)`` in the WHERE clause; a dataset: the partitions of those periods and, for
    ``role="history"``, of the cycles issued since :func:`issued_since`). ``cycles`` (issue
    date → periods, :func:`~accuracy_checks.evaluation.join.cycle_targets`) narrows a Parquet
    file of naive timestamps further to those (issue date, period) pairs, so its row groups
    of other cycles or periods are skipped by their statistics; other places ignore it."""
    path = path or config.forecast.place
    cols = forecast_columns(config)
    names = {c.name for c in cols}
    present = columns_of(path, role, key)
    cols += [Column(s, "text", "segments.columns") for s in segment_columns
             if s in present and s not in names]
    row_filter = (config.forecast.period, periods) if periods is not None else None
    since = issued_since(config, periods) if role == "history" else None
    return read_columns(path, cols, role=role, key=key, allow_empty=allow_empty,
                        row_filter=row_filter,
                        since=(config.forecast.issued, since) if since is not None else None,
                        pairs=(config.forecast.issued, cycles) if cycles is not None else None)


def actual_columns(config: Config) -> list[Column]:
    """The actuals' configured columns: keys (``actuals.keys`` or the forecast's), period,
    value."""
    ac = config.actuals
    cols = [Column(k, "key", "actuals.keys" if ac.keys else "forecast.keys")
            for k in config.actual_keys]
    cols += [
        Column(ac.period, "date", "actuals.period", F.PERIOD, ac.date_formats.get(ac.period)),
        Column(ac.value, "number", "actuals.value", F.ACTUAL),
    ]
    return cols


def read_actuals(config: Config, path: Place | None = None,
                 periods: Sequence[pd.Timestamp] | None = None) -> pd.DataFrame:
    """The actuals (all rows, or with ``periods`` only those periods: filtered while reading
    Parquet or in a table's WHERE clause, after reading CSV), key columns named as the
    forecast's. Refuses a series with two actuals in one period."""
    ac = config.actuals
    path = path or ac.place
    frame = read_columns(path, actual_columns(config), role="actuals", key="actuals.path",
                         row_filter=(ac.period, periods) if periods is not None else None)
    if periods is not None:
        kept = frame[F.PERIOD].isin(periods).to_numpy()
        if not kept.all():
            frame = frame.loc[kept].reset_index(drop=True)
    if ac.keys and list(ac.keys) != list(config.forecast.keys):
        frame = frame.rename(columns=dict(zip(ac.keys, config.forecast.keys, strict=False)))
    refuse_repeated_actuals(frame, list(config.forecast.keys), path)
    return frame


def refuse_repeated_actuals(frame: pd.DataFrame, keys: list[str], path: Place) -> None:
    """Raise when rows of ``frame`` repeat a series and period, naming the first ones."""
    dup = duplicated_rows(frame, [*keys, F.PERIOD])
    if not dup.any():
        return
    raise repeated_actuals_error(int(dup.sum()), frame.loc[dup, [*keys, F.PERIOD]].head(SHOWN),
                                 path)


def repeated_actuals_error(count: int, sample: pd.DataFrame, path: Place) -> InputError:
    """The refusal of ``count`` actuals rows that repeat a series and period, naming the
    ``sample`` rows (keys and period, the first ones)."""
    shown = "; ".join(
        ", ".join(f"{k}={v}" for k, v in row.items() if k != F.PERIOD)
        + f", {row[F.PERIOD]:%Y-%m-%d}"
        for row in sample.head(SHOWN).to_dict("records")
    )
    return InputError(
        f"The actuals {path} hold {count} rows that repeat a series and period "
        f"(e.g. {shown}). Each series needs one actual per period: aggregate them first."
    )
