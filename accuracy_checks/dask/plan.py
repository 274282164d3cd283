"""The run's global facts, from small reductions of every piece before the shards are formed.

Each function here reads a piece's date and value columns only (:func:`~accuracy_checks.dask.
read.read_piece`) and returns a per-period or per-cycle reduction; the client combines them
into the :class:`~accuracy_checks.dask.shards.Plan`:

- the forecast's rows per issue date (the run's cycle is the latest) and its earliest period
  (:func:`forecast_summary`);
- the periods of the actuals read that hold a value (the coverage window) and a finite value
  (the evaluation span) (:func:`actuals_summary`);
- each history place's cycles' first periods (:func:`history_starts`) and, once the span is
  known, the first period of each cycle among the rows the evaluation uses
  (:func:`pruned_starts`, for the accuracy stage).
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd

from accuracy_checks.config import Config
from accuracy_checks.dask.read import Piece, PieceReader, piece_frame, read_piece
from accuracy_checks.dask.stores import read_dataset_piece
from accuracy_checks.errors import InputError
from accuracy_checks.evaluation.spans import evaluation_span
from accuracy_checks.sources import frames as F
from accuracy_checks.sources.columns import Column
from accuracy_checks.sources.readers import actual_columns, forecast_columns

__all__ = ["ActualsSummary", "ForecastSummary", "actual_periods_piece", "actuals_summary",
           "combine_forecast", "combine_periods", "forecast_summary", "history_pieces",
           "history_starts", "min_starts", "pruned_starts"]


def _dates(config: Config, role: str) -> list[Column]:
    wanted = ((config.forecast.issued, config.forecast.period) if role != "actuals"
              else (config.actuals.period, config.actuals.value))
    cols = forecast_columns(config) if role != "actuals" else actual_columns(config)
    return [c for c in cols if c.name in wanted]


def _every(config: Config, role: str) -> list[Column]:
    """Every configured column of the role's input, in the readers' order."""
    return forecast_columns(config) if role != "actuals" else actual_columns(config)


@dataclass
class ForecastSummary:
    """Rows per issue date (``NaT`` for a missing one), the earliest period, rows read."""

    issue_counts: pd.Series
    first_period: pd.Timestamp | None
    rows: int


def forecast_summary(piece: Piece, config: Config) -> ForecastSummary:
    """One forecast piece's issue dates and earliest period."""
    frame = read_piece(piece, _dates(config, "forecast"), every=_every(config, "forecast"))
    counts = frame[F.ISSUED].value_counts(dropna=False, sort=False)
    periods = frame[F.PERIOD].dropna()
    first = pd.Timestamp(periods.min()) if len(periods) else None
    return ForecastSummary(counts, first, len(frame))


def combine_forecast(parts: Sequence[ForecastSummary]) -> ForecastSummary:
    """The whole forecast's summary: counts in date order, a missing date last."""
    counts = pd.concat([p.issue_counts for p in parts])
    counts = counts.groupby(level=0, dropna=False, sort=False).sum()
    counts = counts.sort_index(na_position="last")
    firsts = [p.first_period for p in parts if p.first_period is not None]
    return ForecastSummary(counts, min(firsts) if firsts else None,
                           sum(p.rows for p in parts))


@dataclass
class ActualsSummary:
    """Distinct periods of the actuals read holding a value (not NaN; ±inf counts) and
    holding a finite value; rows read."""

    with_value: np.ndarray
    finite: np.ndarray
    rows: int


def actuals_summary(piece: Piece, config: Config,
                    periods: Sequence[pd.Timestamp] | None) -> ActualsSummary:
    """One actuals piece's periods (only the rows of ``periods`` when the run cuts them)."""
    frame = read_piece(piece, _dates(config, "actuals"), every=_every(config, "actuals"))
    if periods is not None:
        frame = frame.loc[frame[F.PERIOD].isin(list(periods))]
    values = frame[F.ACTUAL].to_numpy(dtype=np.float64, na_value=np.nan)
    dates = frame[F.PERIOD].to_numpy(dtype="datetime64[ns]")
    has_value = ~np.isnan(values) & ~np.isnat(dates)
    return ActualsSummary(pd.unique(dates[has_value]),
                          pd.unique(dates[np.isfinite(values) & ~np.isnat(dates)]), len(frame))


def history_starts(piece: Piece, since: pd.Timestamp | None = None, *,
                   config: Config) -> pd.Series:
    """One history piece's cycles: issue date → first period (with ``since``, only the cycles
    issued since then, as the pandas engine's pre-read of a dataset keeps them)."""
    frame = read_piece(piece, _dates(config, "history"), every=_every(config, "history"))
    if since is not None:
        frame = frame.loc[frame[F.ISSUED] >= since]
    return frame.groupby(F.ISSUED, sort=False)[F.PERIOD].min()


def min_starts(parts: Sequence[pd.Series]) -> pd.Series:
    """Issue date → first period over several pieces (as the readers' ``cycle_starts``)."""
    parts = [p for p in parts if len(p)]
    if not parts:
        return pd.Series(dtype="datetime64[ns]", index=pd.DatetimeIndex([], name=F.ISSUED))
    out = pd.concat(parts).groupby(level=0).min()
    out.index = pd.DatetimeIndex(out.index).as_unit("ns")
    out.index.name = F.ISSUED
    return out.astype("datetime64[ns]")


def pruned_starts(piece: Piece, place: int, *, config: Config, plan: object) -> pd.Series:
    """One history piece's first period of each cycle among the rows the evaluation uses."""
    from accuracy_checks.dask.shards import Plan, prune_history_piece

    assert isinstance(plan, Plan)
    read = read_piece(piece, _dates(config, "history"), every=_every(config, "history"))
    frame = prune_history_piece(read, config, plan, place)
    return frame.groupby(F.ISSUED, sort=False)[F.PERIOD].min()


def history_pieces(client: Any, config: Config, plan: object, used: Sequence[tuple[int, Any]],
                   columns: Sequence[Column], keys: Sequence[str], n_shards: int,
                   text: Sequence[str]) -> tuple[Any, list[pd.Series]]:
    """The history pieces used (``(history entry, piece)`` pairs in reading order; ``used``
    not empty) as one dask dataframe of the rows the evaluation uses, and each piece's first
    period of each cycle among them (:func:`pruned_starts`, computed on the workers)."""
    from accuracy_checks.dask.shards import HistoryPrune, Plan

    assert isinstance(plan, Plan)
    frame = piece_frame(PieceReader(tuple(columns), tuple(keys), n_shards, text=tuple(text),
                                    after=HistoryPrune(config, plan)), list(used))
    starts = client.gather(client.map(pruned_starts, [p for _, p in used], [i for i, _ in used],
                                      config=config, plan=plan, pure=False))
    return frame, starts


def actual_periods_piece(piece: Piece, config: Config) -> np.ndarray | None:
    """The distinct periods holding a (non-null) actual in one Parquet piece, read from its
    period and value columns only, as :func:`~accuracy_checks.sources.prereads.
    actual_periods` reads them (``None``: a CSV file, or a period column that is not a
    timestamp: then the run reads every row, as the pandas engine does)."""
    import pyarrow.compute as pc
    import pyarrow.parquet as pq

    from accuracy_checks.sources.files import is_timestamp

    ac = config.actuals
    if piece.store is not None:
        return _dataset_periods(piece, config)
    if piece.row_groups is None:
        return None
    handle = pq.ParquetFile(piece.path)
    schema = handle.schema_arrow
    if (not is_timestamp(schema, ac.period)
            or len(schema.get_all_field_indices(ac.value)) != 1):
        return None
    table = handle.read_row_groups(list(piece.row_groups), columns=[ac.period, ac.value])
    present = pc.unique(pc.filter(table[ac.period], pc.is_valid(table[ac.value])))
    return np.asarray(present.to_pandas())


def _dataset_periods(piece: Piece, config: Config) -> np.ndarray:
    """The distinct periods holding an actual in one dataset piece (the dataset reader's
    pre-read: a value that is neither missing nor NaN; never ``None``, as that pre-read
    reads CSV datasets too). A refusal: the pandas engine's pre-read over the dataset, for
    its message."""
    from accuracy_checks.sources.columns import convert
    from accuracy_checks.sources.prereads import actual_periods

    assert piece.store is not None
    cols = {c.name: c for c in actual_columns(config)}
    period, value = cols[config.actuals.period], cols[config.actuals.value]
    raw = read_dataset_piece(piece.store, piece.dataset_files(), piece.row_groups,
                             [period, value])
    try:
        values = raw[value.name]
        if not pd.api.types.is_numeric_dtype(values.dtype):
            values = convert(values, Path(piece.store.shown), value, "actuals", 1)
        present = values.notna().to_numpy()
        dates = convert(raw[period.name], Path(piece.store.shown), period, "actuals", 1)
    except InputError:
        actual_periods(config, piece.store.read.place)  # raises the pandas engine's message
        raise
    found = dates[present].dropna()
    return np.asarray(pd.unique(found.to_numpy(dtype="datetime64[ns]")))


def combine_periods(parts: Sequence[np.ndarray | None]) -> pd.DatetimeIndex | None:
    """The sorted distinct periods of every piece (``None`` if any piece cannot tell)."""
    if any(p is None for p in parts):
        return None
    found = [pd.Series(p) for p in parts if p is not None and len(p)]
    if not found:
        return pd.DatetimeIndex([]).as_unit("ns")
    periods = pd.DatetimeIndex(pd.concat(found, ignore_index=True).unique()).sort_values()
    periods = periods.tz_localize(None) if periods.tz is not None else periods
    return periods.as_unit("ns")


@dataclass(frozen=True)
class Windows:
    """The run's windows from the plan's reductions: the issue date checked (the forecast's
    latest), the periods holding a finite actual (sorted), the evaluation span (the last of
    them) and the coverage window's first period (``None``: no actual)."""

    issued: pd.Timestamp
    finite: tuple[pd.Timestamp, ...]
    span: tuple[pd.Timestamp, ...]
    window_start: Any


def windows(config: Config, forecast: ForecastSummary,
            actuals: Sequence[ActualsSummary]) -> Windows:
    """:class:`Windows` of the run from the forecast's and the actuals' pieces' summaries."""

    def distinct(name: str) -> list[Any]:
        if not actuals:
            return []
        return sorted(pd.unique(pd.concat([pd.Series(getattr(s, name))
                                           for s in actuals]).to_numpy()))

    recent = distinct("with_value")[-config.coverage.active_periods:]
    finite = [pd.Timestamp(p) for p in distinct("finite")]
    n = evaluation_span(config)
    counts = forecast.issue_counts.index
    return Windows(issued=pd.Timestamp(counts.dropna().max()) if counts.notna().any()
                   else pd.NaT,
                   finite=tuple(finite), span=tuple(finite[-n:]) if n > 0 else (),
                   window_start=recent[0] if recent else None)
