"""Inputs the workers cannot read, read on the client by the pandas readers, then sharded.

A query (``sql:``), a table :mod:`.sql_parts` cannot order (a view, another database), a
``memory://`` URL (a memory file system lives in one process), an ``https://`` file
(downloaded by the reader) or frames given in memory are read by
:func:`~accuracy_checks.sources.load.load_inputs` exactly as the pandas engine reads them
(same rules, same messages), on the client; the canonical frames are then split into the
shards by the same hash of the series keys and checked on the workers like pieces read there.
Reading is then not distributed (the memory of the client bounds the run); the checks are.
"""

from __future__ import annotations

from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd

from accuracy_checks.config import Config
from accuracy_checks.config.places import Url
from accuracy_checks.dask.merge import Job
from accuracy_checks.dask.read import ORDER, SHARD, shard_of
from accuracy_checks.dask.shards import Plan
from accuracy_checks.evaluation.join import window_periods
from accuracy_checks.evaluation.spans import evaluation_span
from accuracy_checks.sources import frames as F
from accuracy_checks.sources.load import ArchivedCycles, ArchiveReader, Progress, load_inputs
from accuracy_checks.sources.memory import GivenFrames

__all__ = ["from_client"]

#: rows per shard when the inputs were read on the client
_ROWS = 1_000_000


def _plan(config: Config, forecast: pd.DataFrame, actuals: pd.DataFrame,
          mapping: pd.DataFrame | None, older: bool) -> Plan:
    counts = forecast[F.ISSUED].value_counts(dropna=False, sort=False)
    counts = counts.sort_index(na_position="last")
    periods = forecast[F.PERIOD].dropna()
    values = actuals[F.ACTUAL].to_numpy(dtype=np.float64, na_value=np.nan)
    dates = actuals[F.PERIOD].to_numpy(dtype="datetime64[ns]")
    recent = np.sort(pd.unique(dates[~np.isnan(values) & ~np.isnat(dates)]))
    recent = recent[-config.coverage.active_periods:]
    finite = window_periods(actuals, 10**9)
    span = window_periods(actuals, evaluation_span(config))
    issued = forecast[F.ISSUED].max()
    return Plan(issued=pd.Timestamp(issued), first_period=(pd.Timestamp(periods.min())
                                                           if len(periods) else None),
                issue_counts=counts, actual_periods=None, span=tuple(span),
                window_start=recent[0] if len(recent) else None, mapping=mapping,
                cut_actuals=older, extra={"finite_periods": tuple(finite)})


def _sharded(frame: pd.DataFrame | None, keys: list[str], n_shards: int, base: int) -> Any:
    """``frame`` with keys as text, ``__order`` and ``__shard``, as a dask dataframe."""
    import dask.dataframe as dd

    if frame is None or not len(frame):
        return None
    text = {c: frame[c].astype(object).astype("str") for c in [*keys, F.SEGMENT, F.SOURCE]
            if c in frame.columns}
    frame = frame.assign(**text)
    frame[ORDER] = (np.int64(base) << 40) + np.arange(len(frame), dtype=np.int64)
    frame[SHARD] = shard_of(frame, keys, n_shards)
    return dd.from_pandas(frame, npartitions=max(1, min(n_shards, len(frame) // 200_000 + 1)))


def from_client(config: Config, client: Any, *, forecast_path: Path | Url | None,
                actuals_path: Path | Url | None, progress: Progress,
                archive: ArchiveReader | None, frames: GivenFrames | None,
                n_workers: int) -> Job:
    """Plan and shards of inputs read on the client (module doc)."""
    del client
    inputs = load_inputs(config, forecast_path=forecast_path, actuals_path=actuals_path,
                         progress=progress, archive=archive, frames=frames)
    keys = list(config.forecast.keys)
    n_rows = len(inputs.forecast) + len(inputs.actuals) + len(inputs.earlier)
    n_shards = max(2 * n_workers, -(-n_rows // _ROWS))
    plan = _plan(config, inputs.forecast, inputs.actuals, inputs.mapping,
                 inputs.older_series is not None)
    archived = ArchivedCycles(previous=inputs.previous, previous_label=inputs.previous_label,
                              notes=list(inputs.notes))
    info = dict(inputs.info)
    return Job(plan=plan, n_shards=n_shards,
               forecast=_sharded(inputs.forecast, keys, n_shards, 0),
               actuals=_sharded(inputs.actuals, keys, n_shards, 0),
               history=_sharded(inputs.earlier, keys, n_shards, 0),
               archived=archived, ordinal_base=1,
               info={"prepared": True, "forecast_rows": len(inputs.forecast),
                     "places": {k: {n: v for n, v in val.items() if n != "rows"}
                                if isinstance(val, dict) else val
                                for k, val in info.items() if k != "earlier"},
                     "older": _sharded(inputs.older_series, keys, n_shards, 0)})
