"""How many of the most recent periods with actuals a run reads.

The evaluation reads the window (``evaluation.window``), or the tracking window when a
tracking measure is reported and it is longer; coverage reads ``coverage.active_periods``.
A measure that needs the whole actuals history (MASE's scale, the value-added baselines) or
comes from a plugin makes the run read every period (docs/checks.md); a run then keeps only
the :func:`rows_span` most recent periods as rows and reduces the older ones to the actuals
index while reading, where it can (:mod:`accuracy_checks.sources.history`).
"""

from __future__ import annotations

from accuracy_checks.config import Config
from accuracy_checks.measures.registry import get_measure
from accuracy_checks.measures.selection import measures_to_report

__all__ = ["actuals_span", "evaluation_span", "rows_span"]


def evaluation_span(config: Config) -> int:
    """How many of the most recent periods with actuals the evaluation reads: the window, or
    the tracking window when a tracking measure is reported and it is longer."""
    measures = measures_to_report(config)
    tracking = any(get_measure(m).window == "tracking" for m in measures)
    window = config.evaluation.window
    return max(window, config.evaluation.tracking_window) if tracking else window


def actuals_span(config: Config) -> int | None:
    """How many of the most recent periods with actuals a run needs (the coverage window and
    the evaluation span), or ``None`` when a reported measure needs the whole history (MASE's
    scale, the value-added baselines) or comes from a plugin."""
    for m in measures_to_report(config):
        measure = get_measure(m)
        if "history" in measure.needs or measure.origin != "built-in":
            return None
    return rows_span(config)


def rows_span(config: Config) -> int:
    """How many of the most recent periods with actuals the checks use as rows (the coverage
    window and the evaluation span); the older periods serve only the long-history measures,
    through the actuals index (:mod:`accuracy_checks.sources.history`)."""
    return max(config.coverage.active_periods, evaluation_span(config))
