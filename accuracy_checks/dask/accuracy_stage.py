"""The engine's side of the accuracy stage: the plan from the run's plan, the finish.

The mergeable accuracy stage (:mod:`accuracy_checks.dask.accuracy`: plan → partial per shard →
merge → finish) runs when it covers the config's measures. When it cannot yet (its plan
raises ``NotImplementedError``, or refuses a measure it does not compute), each shard hands
its evaluation rows — the earlier cycles' rows of the configured lags inside the span, and the
actuals read — to the client, which runs the pandas engine's
:func:`~accuracy_checks.checks.accuracy.run_accuracy` on them: the same results, but that
stage is then not distributed (the progress log says so).
"""

from __future__ import annotations

from typing import Any

import pandas as pd

from accuracy_checks.checks.judge import Thresholds
from accuracy_checks.config import Config
from accuracy_checks.dask.read import ORDER
from accuracy_checks.dask.shards import Plan
from accuracy_checks.errors import ConfigError
from accuracy_checks.results import CheckResult
from accuracy_checks.sources import frames as F
from accuracy_checks.sources.load import ArchivedCycles

__all__ = ["accuracy_plan_or_none", "finish_accuracy_stage"]


def _cycle_starts(plan: Plan, archived: ArchivedCycles) -> dict[pd.Timestamp, pd.Timestamp]:
    """Each earlier cycle's first period among the rows the evaluation uses."""
    parts = [plan.extra.get("earlier_starts")]
    parts += [f.groupby(F.ISSUED, sort=False)[F.PERIOD].min() for f in archived.frames
              if len(f)]
    found = [p for p in parts if isinstance(p, pd.Series) and len(p)]
    if not found:
        return {}
    starts = pd.concat(found).groupby(level=0).min()
    return {pd.Timestamp(k): pd.Timestamp(v) for k, v in starts.items()}


def accuracy_plan_or_none(config: Config, plan: Plan, archived: ArchivedCycles) -> Any:
    """The mergeable stage's plan, or ``None`` when the stage runs on the client."""
    from accuracy_checks.dask.accuracy import accuracy_plan

    periods = plan.extra.get("finite_periods", plan.span)
    try:
        return accuracy_plan(config, actual_periods=list(periods),  # type: ignore[call-overload]
                             cycle_starts=_cycle_starts(plan, archived))
    except (NotImplementedError, ConfigError):
        return None


def finish_accuracy_stage(config: Config, acc_plan: Any, merged: Any,
                          book: Thresholds) -> list[CheckResult]:
    """The accuracy results: the mergeable stage's finish, or ``run_accuracy`` on the rows
    the shards handed over (in reading order, one set of categories)."""
    if acc_plan is not None:
        from accuracy_checks.dask.accuracy import AccuracyPartial, finish_accuracy

        return finish_accuracy(acc_plan, merged.accuracy or AccuracyPartial(), book=book)
    from accuracy_checks.checks.accuracy import run_accuracy

    keys = list(config.forecast.keys)
    earlier = _stack([e for e, _ in merged.rows], keys)
    actuals = _stack([a for _, a in merged.rows], keys)
    return run_accuracy(config, earlier, actuals, book=book)


def _stack(frames: list[pd.DataFrame], keys: list[str]) -> pd.DataFrame:
    """Shards' frames as one, in reading order, key and segment columns as categoricals with
    one sorted set of categories."""
    from accuracy_checks.sources.segments import unify_categories

    frames = [f for f in frames if len(f)]
    if not frames:
        return pd.DataFrame()
    frames = unify_categories(frames, [*keys, F.SEGMENT, F.SOURCE])
    whole = pd.concat(frames, ignore_index=True)
    if ORDER in whole.columns:
        whole = whole.sort_values(ORDER, kind="stable").drop(columns=[ORDER])
    return whole.reset_index(drop=True)
