"""Accuracy measures: reference functions, grouped statistics, the families and the registry.

- :mod:`~accuracy_checks.measures.functions`: readable reference implementations of every
  measure (docs/measures.md §1–15), one series or one pooled set of rows at a time.
- :mod:`~accuracy_checks.measures.stats`: :func:`error_stats`, :func:`merge_stats`,
  :func:`total_stats`, the mergeable per-group statistics of the core measures (the hot path).
- :mod:`~accuracy_checks.measures.data`: :class:`MeasureData`, what a measure computes on.
- families: :mod:`~accuracy_checks.measures.scaled` (sMAPE, MASE),
  :mod:`~accuracy_checks.measures.signals` (tracking signal, Trigg),
  :mod:`~accuracy_checks.measures.value_added` (FVA),
  :mod:`~accuracy_checks.measures.probabilistic` (coverage, pinball, MIS, MSIS),
  :mod:`~accuracy_checks.measures.cost` (cost of error).
- :mod:`~accuracy_checks.measures.registry`: :class:`Measure` definitions (id, unit, which way
  is better, wording, display order, inputs, formula); plugins join through the
  ``accuracy_checks.measures`` entry points (:mod:`~accuracy_checks.measures.plugins`, loaded
  by :mod:`~accuracy_checks.measures.entry_points`, the loader of every plugin group).
- :mod:`~accuracy_checks.measures.wording`: a figure and a measure's value in words.
- :mod:`~accuracy_checks.measures.selection`: which measures a config reports.

Sign convention: ``e = actual − forecast`` (positive = under-forecast). Percentages are in percent.
"""

from accuracy_checks.measures import (  # noqa: F401  (imported to register their measures)
    cost,
    plugins,  # and the loader of the plugin measures
    probabilistic,
    scaled,
    signals,
    value_added,
)
from accuracy_checks.measures.data import (
    CostTable,
    Interval,
    MeasureData,
    MeasureSettings,
    result_frame,
    stack_variants,
)
from accuracy_checks.measures.functions import (
    bias_pct,
    error_cost,
    forecast_value_added,
    interval_coverage,
    interval_score,
    mape,
    mape_nonzero,
    mase,
    mase_scale,
    mean_absolute_error,
    mean_error,
    msis,
    naive_baseline,
    pinball_loss,
    rmse,
    sde,
    seasonal_naive_baseline,
    smape,
    tracking_signal,
    trigg_signal,
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
    registered_measures,
)
from accuracy_checks.measures.stats import STAT_COLUMNS, error_stats, merge_stats, total_stats

__all__ = [
    "CORE_MEASURES",
    "MEASURES",
    "REASONS",
    "STAT_COLUMNS",
    "CostTable",
    "Direction",
    "Interval",
    "Measure",
    "MeasureData",
    "MeasureSettings",
    "bias_pct",
    "error_cost",
    "error_stats",
    "forecast_value_added",
    "get_measure",
    "interval_coverage",
    "interval_score",
    "mape",
    "mape_nonzero",
    "mase",
    "mase_scale",
    "mean_absolute_error",
    "mean_error",
    "merge_stats",
    "msis",
    "naive_baseline",
    "pinball_loss",
    "register_measure",
    "registered_measures",
    "result_frame",
    "rmse",
    "sde",
    "seasonal_naive_baseline",
    "smape",
    "stack_variants",
    "total_stats",
    "tracking_signal",
    "trigg_signal",
    "wape",
]
