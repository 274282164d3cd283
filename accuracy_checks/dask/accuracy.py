"""The accuracy stage as mergeable partials: plan → partial per shard → merge → finish.

The dask engine splits the run's series into shards (every row of a series in one shard) and
computes the accuracy results without gathering rows in one process:

- :func:`accuracy_plan` (client): the global facts every shard needs, from per-period
  reductions the engine computes first over all rows: the distinct periods that have a finite
  actual (they fix the evaluation and tracking windows) and each earlier cycle's first period
  (lags count from it);
- :func:`accuracy_partial` (a worker, per shard): the shard's reductions only: per (window,
  grouping, lag, segment) sufficient statistics and counts, per-series reductions where a
  measure aggregates per-series values, and the top-k worst-offender candidates of each group
  with the pandas engine's ordering key; picklable, never rows;
- :func:`merge_partials` (a tree reduction): associative and order-free;
- :func:`finish_accuracy` (client): the same :class:`~accuracy_checks.results.CheckResult` list
  as :func:`accuracy_checks.checks.accuracy.run_accuracy` on the union of the shards, through the
  same registry, judge, wording and offender examples.

Shard frames: ``earlier``/``actuals`` exactly as :class:`~accuracy_checks.sources.load.Inputs`
holds them (canonical columns, rows in the files' order), restricted to the shard's series.
Key and segment columns are categoricals with the SAME categories in every shard (as
``Inputs`` holds them: one set of categories per column across frames): the pandas engine
numbers series by their key category codes, and that number breaks ties between offenders.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from dataclasses import dataclass

import pandas as pd

from accuracy_checks.checks.judge import Thresholds
from accuracy_checks.config import Config
from accuracy_checks.results import CheckResult

__all__ = ["AccuracyPartial", "AccuracyPlan", "accuracy_partial", "accuracy_plan",
           "finish_accuracy", "merge_partials"]


@dataclass(frozen=True)
class AccuracyPlan:
    """The global facts of a run's accuracy stage (small, picklable)."""


@dataclass
class AccuracyPartial:
    """One or several shards' mergeable reductions (small, picklable)."""


def accuracy_plan(config: Config, *, actual_periods: Sequence[pd.Timestamp],
                  cycle_starts: Mapping[pd.Timestamp, pd.Timestamp]) -> AccuracyPlan:
    """The global facts every shard needs.

    ``actual_periods``: the distinct periods with at least one finite actual, over all series
    (``actuals.period[isfinite(actuals.actual)].unique()``); they fix the evaluation and
    tracking windows. ``cycle_starts``: each earlier cycle's first period over all series
    (``earlier.groupby("issued").period.min()`` as a mapping issue date → period); lags are
    counted from it (rows carrying ``__cycle_start`` use their own). Raises
    :class:`~accuracy_checks.errors.ConfigError` for a measure the dask engine cannot compute
    yet (the message says to use ``engine: pandas``).
    """
    raise NotImplementedError


def accuracy_partial(plan: AccuracyPlan, earlier: pd.DataFrame,
                     actuals: pd.DataFrame) -> AccuracyPartial:
    """One shard's mergeable reduction.

    ``earlier``/``actuals``: the canonical frames exactly as ``Inputs.earlier`` /
    ``Inputs.actuals`` hold them (sources/load.py), restricted to the series of this shard:
    every row of each of those series, and no other series (rows in the files' order; key and
    segment categoricals with the run's categories). Returns only per-(lag, segment),
    per-(lag, segment, period) or per-series reductions and top-k candidates (never rows);
    picklable.
    """
    raise NotImplementedError


def merge_partials(parts: Sequence[AccuracyPartial]) -> AccuracyPartial:
    """The partial of the union of the parts' shards (associative, order-free)."""
    raise NotImplementedError


def finish_accuracy(plan: AccuracyPlan, partial: AccuracyPartial, *,
                    book: Thresholds) -> list[CheckResult]:
    """Exactly what ``checks.accuracy.run_accuracy(config, earlier, actuals, book=book)``
    returns on the union of the shards: same checks, statuses, counts, examples, messages,
    values to 1e-9 relative."""
    raise NotImplementedError
