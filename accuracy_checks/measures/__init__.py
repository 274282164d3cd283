"""Accuracy measures: reference functions, grouped sufficient statistics and the registry.

- :mod:`~accuracy_checks.measures.functions`: readable ``f(actual, forecast) -> float``
  reference implementations (``METRICS.md`` 1–8).
- :mod:`~accuracy_checks.measures.stats`: :func:`error_stats`, :func:`merge_stats`,
  :func:`total_stats`, the mergeable per-group statistics the engine computes (the hot path).
- :mod:`~accuracy_checks.measures.registry`: :class:`Measure` definitions that turn those
  statistics into values with reasons, and which way each measure is better.

Sign convention: ``e = actual − forecast`` (positive = under-forecast). Percentages are in percent.
"""

from accuracy_checks.measures.functions import (
    bias_pct,
    mape,
    mape_nonzero,
    mean_absolute_error,
    mean_error,
    rmse,
    sde,
    wape,
)
from accuracy_checks.measures.registry import (
    CORE_MEASURES,
    MEASURES,
    REASONS,
    Direction,
    Measure,
    get_measure,
    register_measure,
)
from accuracy_checks.measures.stats import STAT_COLUMNS, error_stats, merge_stats, total_stats

__all__ = [
    "CORE_MEASURES",
    "MEASURES",
    "REASONS",
    "STAT_COLUMNS",
    "Direction",
    "Measure",
    "bias_pct",
    "error_stats",
    "get_measure",
    "mape",
    "mape_nonzero",
    "mean_absolute_error",
    "mean_error",
    "merge_stats",
    "register_measure",
    "rmse",
    "sde",
    "total_stats",
    "wape",
]
