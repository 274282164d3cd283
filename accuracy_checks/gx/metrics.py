"""GX metric providers: table-level metrics whose value is a JSON-ready payload of results.

GX 1.x has no per-group aggregate metrics; each provider here is a
:class:`~great_expectations.expectations.metrics.table_metric_provider.TableMetricProvider`
whose pandas implementation calls one function of :mod:`accuracy_checks.gx.compute` (and
through it the CLI's own core functions) on the whole batch, with the metric's value keyword
arguments. GX caches a metric by its name and arguments, so every accuracy expectation that
names the same config file shares one computation (of every measure), and every coverage
expectation with the same keys, frequency, horizon and active periods shares one.
"""

from __future__ import annotations

from collections.abc import Callable
from typing import Any, ClassVar

from great_expectations.core.metric_domain_types import MetricDomainTypes
from great_expectations.execution_engine import PandasExecutionEngine
from great_expectations.expectations.metrics.metric_provider import metric_value
from great_expectations.expectations.metrics.table_metric_provider import TableMetricProvider

from accuracy_checks.gx import compute

__all__ = [
    "ACCURACY_METRIC",
    "ACTUALS_METRIC",
    "COVERAGE_METRIC",
    "NOTES_METRIC",
    "SEGMENT_NAMES_METRIC",
    "ActualsResults",
    "CoverageResults",
    "InputNotes",
    "SegmentAccuracy",
    "SegmentNames",
]

ACCURACY_METRIC = "accuracy_checks.segment_accuracy"
COVERAGE_METRIC = "accuracy_checks.coverage"
SEGMENT_NAMES_METRIC = "accuracy_checks.segment_names"
ACTUALS_METRIC = "accuracy_checks.actuals"
NOTES_METRIC = "accuracy_checks.notes"


class _PayloadMetric(TableMetricProvider):
    """A table metric whose value is ``payload(<the batch frame>, **<value kwargs>)``.

    A subclass names the metric (``metric_name``), its value keys and the
    :mod:`~accuracy_checks.gx.compute` function; GX registers it when the class is defined
    (this base, without a ``metric_name``, registers nothing).
    """

    payload: ClassVar[Callable[..., Any]]

    @metric_value(engine=PandasExecutionEngine)
    def _pandas(cls, execution_engine: PandasExecutionEngine,
                metric_domain_kwargs: dict[str, Any], metric_value_kwargs: dict[str, Any],
                metrics: dict[str, Any], runtime_configuration: dict[str, Any]) -> Any:
        frame, _, _ = execution_engine.get_compute_domain(
            domain_kwargs=metric_domain_kwargs, domain_type=MetricDomainTypes.TABLE
        )
        return cls.payload(frame, **metric_value_kwargs)


class SegmentAccuracy(_PayloadMetric):
    """Every accuracy result of a run: :func:`compute.accuracy_payload`. ``spec`` is
    ``{"config": <path>}`` (shared by every accuracy expectation of one config) or the
    settings of one expectation (see :func:`compute.accuracy_config`)."""

    metric_name = ACCURACY_METRIC
    value_keys = ("spec", "row_kind_column")
    payload = staticmethod(compute.accuracy_payload)


class CoverageResults(_PayloadMetric):
    """Every coverage check, judged by the built-in levels: :func:`compute.coverage_payload`."""

    metric_name = COVERAGE_METRIC
    value_keys = ("keys", "frequency", "horizon", "active_periods", "row_kind_column")
    payload = staticmethod(compute.coverage_payload)


class SegmentNames(_PayloadMetric):
    """The segment names in the data: :func:`compute.segment_names`."""

    metric_name = SEGMENT_NAMES_METRIC
    value_keys = ("row_kind_column",)
    payload = staticmethod(compute.segment_names)


class ActualsResults(_PayloadMetric):
    """The actuals checks (``actuals.invalid_values``): :func:`compute.actuals_payload`."""

    metric_name = ACTUALS_METRIC
    value_keys = ("keys", "value_column", "row_kind_column")
    payload = staticmethod(compute.actuals_payload)


class InputNotes(_PayloadMetric):
    """The results about the inputs carried in the ``notes`` rows:
    :func:`compute.notes_payload`."""

    metric_name = NOTES_METRIC
    value_keys = ("row_kind_column",)
    payload = staticmethod(compute.notes_payload)
