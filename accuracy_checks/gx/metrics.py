"""GX metric providers: table-level metrics whose value is a JSON-ready payload of results.

GX 1.x has no per-group aggregate metrics; each provider here is a
:class:`~great_expectations.expectations.metrics.table_metric_provider.TableMetricProvider`
whose pandas implementation calls a function of :mod:`accuracy_checks.gx.compute` (and through
it the CLI's own core functions) on the whole batch. GX caches a metric by its name and
arguments, so every accuracy expectation that names the same config file shares one
computation (of every measure), and every coverage expectation with the same keys, frequency,
horizon and active periods shares one.
"""

from __future__ import annotations

from typing import Any

from great_expectations.core.metric_domain_types import MetricDomainTypes
from great_expectations.execution_engine import PandasExecutionEngine
from great_expectations.expectations.metrics.metric_provider import metric_value
from great_expectations.expectations.metrics.table_metric_provider import TableMetricProvider

from accuracy_checks.gx import compute

__all__ = [
    "ACCURACY_METRIC",
    "COVERAGE_METRIC",
    "SEGMENT_NAMES_METRIC",
    "CoverageResults",
    "SegmentAccuracy",
    "SegmentNames",
]

ACCURACY_METRIC = "accuracy_checks.segment_accuracy"
COVERAGE_METRIC = "accuracy_checks.coverage"
SEGMENT_NAMES_METRIC = "accuracy_checks.segment_names"


def _table(execution_engine: PandasExecutionEngine, metric_domain_kwargs: dict[str, Any]) -> Any:
    frame, _, _ = execution_engine.get_compute_domain(
        domain_kwargs=metric_domain_kwargs, domain_type=MetricDomainTypes.TABLE
    )
    return frame


class SegmentAccuracy(TableMetricProvider):
    """Every accuracy result of a run: :func:`compute.accuracy_payload`. ``spec`` is
    ``{"config": <path>}`` (shared by every accuracy expectation of one config) or the
    settings of one expectation (see :func:`compute.accuracy_config`)."""

    metric_name = ACCURACY_METRIC
    value_keys = ("spec", "row_kind_column")

    @metric_value(engine=PandasExecutionEngine)
    def _pandas(cls, execution_engine: PandasExecutionEngine,
                metric_domain_kwargs: dict[str, Any], metric_value_kwargs: dict[str, Any],
                metrics: dict[str, Any], runtime_configuration: dict[str, Any]) -> Any:
        return compute.accuracy_payload(
            _table(execution_engine, metric_domain_kwargs),
            spec=dict(metric_value_kwargs["spec"]),
            row_kind_column=metric_value_kwargs["row_kind_column"],
        )


class CoverageResults(TableMetricProvider):
    """Every coverage check, judged by the built-in levels: :func:`compute.coverage_payload`."""

    metric_name = COVERAGE_METRIC
    value_keys = ("keys", "frequency", "horizon", "active_periods", "row_kind_column")

    @metric_value(engine=PandasExecutionEngine)
    def _pandas(cls, execution_engine: PandasExecutionEngine,
                metric_domain_kwargs: dict[str, Any], metric_value_kwargs: dict[str, Any],
                metrics: dict[str, Any], runtime_configuration: dict[str, Any]) -> Any:
        kw = metric_value_kwargs
        return compute.coverage_payload(
            _table(execution_engine, metric_domain_kwargs),
            keys=kw["keys"], frequency=kw["frequency"], horizon=kw["horizon"],
            active_periods=kw["active_periods"], row_kind_column=kw["row_kind_column"],
        )


class SegmentNames(TableMetricProvider):
    """The segment names in the data: :func:`compute.segment_names`."""

    metric_name = SEGMENT_NAMES_METRIC
    value_keys = ("row_kind_column",)

    @metric_value(engine=PandasExecutionEngine)
    def _pandas(cls, execution_engine: PandasExecutionEngine,
                metric_domain_kwargs: dict[str, Any], metric_value_kwargs: dict[str, Any],
                metrics: dict[str, Any], runtime_configuration: dict[str, Any]) -> Any:
        return compute.segment_names(_table(execution_engine, metric_domain_kwargs),
                                     row_kind_column=metric_value_kwargs["row_kind_column"])
