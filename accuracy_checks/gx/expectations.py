"""GX expectations for forecast accuracy, coverage and the inputs, one result covering every
segment.

Each expectation is a :class:`~great_expectations.expectations.expectation.BatchExpectation`
(a pydantic v1 model, as GX requires; its fields are plain JSON values). Its metric runs the
CLI's own code on the batch (:mod:`accuracy_checks.gx.compute`), and results are judged by the
CLI's own rules with the expectation's levels: accuracy inside
:func:`~accuracy_checks.checks.accuracy.run_accuracy` (some measures turn levels into their own
bounds), coverage with :meth:`~accuracy_checks.checks.judge.Thresholds.judge`. The expectation
then gates on its ``severity``:

- ``severity="critical"`` (GX's default) fails when a segment is ``fail`` (beyond its fail
  level, or undefined with ``undefined_status: fail``) or could not be computed (``error``);
- ``severity="warning"`` (or ``"info"``) fails when a segment is ``warn`` or worse.

Levels are given the way the config gives them, for the expectation's measure only:
``thresholds={"warn": 25, "fail": 40}`` for every segment and ``"*"``, and
``segment_thresholds={"plants": {"warn": 40, "fail": 60}}`` per segment (a segment entry
replaces the default levels of that segment). Centred measures (``me``, ``bias_pct``,
``series_count_change_pct``) take a number (a bound on the absolute value) or an asymmetric
``[low, high]`` pair. A value strictly beyond a level breaks it.

The inputs: :class:`ExpectFiniteActuals` runs the CLI's
:func:`~accuracy_checks.checks.actuals.actuals_checks` on the actuals rows (``fail`` when an
actual is infinite), and :class:`ExpectUsableSnapshots` reports the results about the inputs
that the batch carries (the engine's ``archive.snapshot`` warnings), unchanged.

The validation result has ``observed_value`` = the value of every segment (accuracy:
``{segment: {lag: value}}``; coverage: ``{segment: value}``) and ``details`` =
``{"check", "measure", "level", "breaches": [...], "results": [...]}`` where ``results`` are
:meth:`~accuracy_checks.results.CheckResult.to_dict` dicts (the CLI's results, with messages
and examples) and ``breaches`` the ones that made the expectation fail.
"""

from __future__ import annotations

from abc import abstractmethod
from typing import Any, ClassVar, Literal

from great_expectations.compatibility import pydantic
from great_expectations.execution_engine import ExecutionEngine
from great_expectations.expectations.expectation import BatchExpectation
from great_expectations.expectations.registry import get_metric_kwargs
from great_expectations.validator.metric_configuration import MetricConfiguration
from great_expectations.validator.validator import ValidationDependencies

from accuracy_checks.checks.actuals import INVALID_ACTUALS
from accuracy_checks.checks.coverage import HORIZON, MISSING_SERIES, SERIES_COUNT, UNEXPECTED_SERIES
from accuracy_checks.engine import ARCHIVE_CHECK
from accuracy_checks.gx import compute
from accuracy_checks.gx.batch import ROW_KIND
from accuracy_checks.gx.metrics import (
    ACCURACY_METRIC,
    ACTUALS_METRIC,
    COVERAGE_METRIC,
    NOTES_METRIC,
    SEGMENT_NAMES_METRIC,
)
from accuracy_checks.measures import MEASURES
from accuracy_checks.results import ALL_SERIES, CheckResult

__all__ = [
    "COVERAGE_EXPECTATIONS",
    "EXPECTATION_CHECKS",
    "ExpectActiveSeriesForecast",
    "ExpectCompleteHorizon",
    "ExpectFiniteActuals",
    "ExpectNoUnexpectedSeries",
    "ExpectSegmentAccuracy",
    "ExpectStableSeriesCount",
    "ExpectThresholdSegmentsPresent",
    "ExpectUsableSnapshots",
    "gate_level",
]

UndefinedStatus = Literal["pass", "warn", "fail", "skipped"]

#: Which statuses break the gate of each level.
_BREAKING: dict[str, frozenset[str]] = {
    "fail": frozenset({"fail", "error"}),
    "warn": frozenset({"warn", "fail", "error"}),
}


def gate_level(severity: Any) -> Literal["warn", "fail"]:
    """The level an expectation of this GX ``severity`` gates on.

    >>> gate_level("critical"), gate_level("warning"), gate_level("info")
    ('fail', 'warn', 'warn')
    """
    value = getattr(severity, "value", severity)
    return "fail" if value == "critical" else "warn"


def _breach(r: CheckResult) -> dict[str, Any]:
    d = r.to_dict()
    return {k: d[k] for k in ("segment", "lag", "measure", "value", "status", "warn", "fail",
                              "message")}


class _ResultsExpectation(BatchExpectation):
    """Shared behaviour: turn the metric's results into a gated GX result."""

    domain_keys: ClassVar[tuple[str, ...]] = ("batch_id",)
    #: the check name of :class:`CheckResult` this expectation reports
    check: ClassVar[str]

    @abstractmethod
    def _results(self, metrics: dict[str, Any]) -> tuple[list[CheckResult], dict[str, Any]]:
        """The judged results and extra ``details`` keys."""

    def _observed(self, results: list[CheckResult]) -> dict[str, Any]:
        return {str(r.segment): compute.finite_or_none(r.value) for r in results}

    def _measure(self) -> str | None:
        return None

    def _validate(self, metrics: dict[str, Any],
                  runtime_configuration: dict[str, Any] | None = None,
                  execution_engine: ExecutionEngine | None = None) -> dict[str, Any]:
        results, extra = self._results(metrics)
        level = gate_level(self.severity)
        breaking = _BREAKING[level]
        breaches = [_breach(r) for r in results if r.status in breaking]
        return {
            "success": not breaches,
            "result": {
                "observed_value": self._observed(results),
                "details": {
                    "check": self.check,
                    "measure": self._measure(),
                    "level": level,
                    "breaches": breaches,
                    "results": [r.to_dict() for r in results],
                    **extra,
                },
            },
        }


def _check_levels(measure: str, values: dict[str, Any]) -> None:
    compute.threshold_book(measure, values.get("thresholds"), values.get("segment_thresholds"),
                           values.get("undefined_status") or "warn")


def _same_levels(given: dict[str, Any], expected: dict[str, Any]) -> bool:
    def norm(levels: Any) -> Any:
        if not levels:
            return None
        return {k: [float(x) for x in v] if isinstance(v, list | tuple) else float(v)
                for k, v in levels.items() if v is not None}

    return (norm(given.get("thresholds")) == norm(expected.get("thresholds"))
            and {s: norm(lv) for s, lv in (given.get("segment_thresholds") or {}).items()}
            == {s: norm(lv) for s, lv in (expected.get("segment_thresholds") or {}).items()})


#: settings an accuracy expectation takes from ``config`` when it names one
_SETTINGS = ("keys", "frequency", "quantiles", "lags", "window", "min_obs", "undefined_status")


class ExpectSegmentAccuracy(_ResultsExpectation):
    """Expect an accuracy measure of every segment (and of all series, ``"*"``) within its
    warn or fail level, at each lag.

    Batch: a stacked batch with ``earlier`` and ``actuals`` rows
    (:func:`~accuracy_checks.gx.batch_from_config` or :func:`~accuracy_checks.gx.stack_frames`);
    the earlier forecasts are joined with the actuals and measured exactly as
    ``accuracy-checks run`` does (:func:`accuracy_checks.checks.accuracy.run_accuracy`).

    Two ways to give the settings:

    - ``config``: the path of an accuracy-checks YAML file. Its evaluation settings (keys,
      frequency, lags, window, ``min_obs``, tracking and cost settings …) and its levels apply;
      every expectation naming the same file shares one computation. ``thresholds`` and
      ``segment_thresholds`` may repeat the file's levels of ``measure`` (as
      :func:`~accuracy_checks.gx.suite_from_config` does, so the suite shows them); if they
      no longer match the file, the expectation reports an ``error``.
    - otherwise ``keys`` and ``frequency`` (required), ``quantiles`` (levels τ of the columns
      ``q<τ>``), ``lags`` (default ``[1]``), ``window`` (4), ``min_obs`` (20),
      ``undefined_status`` (``"warn"``), and the levels of ``measure``: ``thresholds``
      ``{"warn": …, "fail": …}`` for every segment and ``segment_thresholds``
      ``{segment: {"warn": …, "fail": …}}`` (``"*"`` overrides all series together).
      Other settings keep the config defaults.

    ``measure`` is a measure id of the registry (``me``, ``bias_pct``, ``mae``, ``mape``,
    ``wape``, ``rmse``, ``sde``, ``mase``, ``tracking_signal`` …); percentages are in percent.
    """

    measure: str
    config: str | None = None
    keys: list[str] | None = None
    frequency: str | None = None
    quantiles: list[float] | None = None
    lags: list[int] | None = None
    window: int | None = None
    min_obs: int | None = None
    undefined_status: UndefinedStatus | None = None
    thresholds: dict[str, Any] | None = None
    segment_thresholds: dict[str, dict[str, Any]] | None = None
    row_kind_column: str = ROW_KIND

    check: ClassVar[str] = "accuracy"
    success_keys: ClassVar[tuple[str, ...]] = (
        "measure", "config", *_SETTINGS, "thresholds", "segment_thresholds", "row_kind_column",
    )

    @pydantic.root_validator(skip_on_failure=True)
    def _settings_are_valid(cls, values: dict[str, Any]) -> dict[str, Any]:
        measure = values.get("measure")
        if isinstance(measure, str) and measure not in MEASURES:
            raise ValueError(
                f"unknown measure {measure!r}; measures: {', '.join(sorted(MEASURES))}"
            )
        if values.get("config"):
            given = [k for k in _SETTINGS if values.get(k) is not None]
            if given:
                raise ValueError(
                    f"with config, the settings {given} come from the config file; leave them "
                    "out (or drop config and give keys and frequency)"
                )
            return values
        if not values.get("keys") or not values.get("frequency"):
            raise ValueError("give config (a path) or keys and frequency")
        compute.accuracy_config(cls._spec_of(values))
        return values

    @staticmethod
    def _spec_of(values: dict[str, Any]) -> dict[str, Any]:
        if values.get("config"):
            return {"config": str(values["config"])}
        return {"config": None, "measure": values.get("measure"),
                **{k: values.get(k) for k in (*_SETTINGS, "thresholds", "segment_thresholds")}}

    def get_validation_dependencies(self, execution_engine: ExecutionEngine | None = None,
                                    runtime_configuration: dict[str, Any] | None = None
                                    ) -> ValidationDependencies:
        """The accuracy metric, with ``spec`` = the config path (shared) or this
        expectation's settings."""
        deps = super().get_validation_dependencies(
            execution_engine=execution_engine, runtime_configuration=runtime_configuration)
        domain = get_metric_kwargs(ACCURACY_METRIC, configuration=self.configuration,
                                   runtime_configuration=runtime_configuration)
        values = {k: getattr(self, k) for k in ("measure", "config", *_SETTINGS, "thresholds",
                                                 "segment_thresholds")}
        deps.set_metric_configuration(ACCURACY_METRIC, MetricConfiguration(
            metric_name=ACCURACY_METRIC,
            metric_domain_kwargs=domain["metric_domain_kwargs"],
            metric_value_kwargs={"spec": self._spec_of(values),
                                 "row_kind_column": self.row_kind_column},
        ))
        return deps

    def _measure(self) -> str | None:
        return self.measure

    def _results(self, metrics: dict[str, Any]) -> tuple[list[CheckResult], dict[str, Any]]:
        payload = metrics[ACCURACY_METRIC]
        if self.measure not in payload["measures"]:
            return [self._error(
                f"The config does not report {self.measure}; name it in evaluation.measures "
                "or give it a threshold.")], {}
        expected = payload["levels"][self.measure]
        if self.config and (self.thresholds is not None or self.segment_thresholds):
            given = {"thresholds": self.thresholds,
                     "segment_thresholds": self.segment_thresholds}
            if not _same_levels(given, expected):
                return [self._error(
                    f"The levels of {self.measure} in this expectation ({given}) are not those "
                    f"of {self.config} ({expected}); rebuild the suite from the config.")], {}
        results = [compute.result_from_dict(r) for r in payload["results"]
                   if r["check"] == self.check and r.get("measure") == self.measure]
        return results, {"levels": expected}

    def _error(self, message: str) -> CheckResult:
        return CheckResult(self.check, "error", segment="*", measure=self.measure,
                           message=message)

    def _observed(self, results: list[CheckResult]) -> dict[str, Any]:
        out: dict[str, dict[str, float | None]] = {}
        for r in results:
            out.setdefault(str(r.segment), {})[str(r.lag)] = compute.finite_or_none(r.value)
        return out


class _CoverageExpectation(_ResultsExpectation):
    """A coverage check of the forecast rows, per segment and for all series (``"*"``).

    Every coverage expectation computes all coverage checks once (one metric, shared when
    ``keys``, ``frequency``, ``horizon``, ``active_periods`` and ``row_kind_column`` agree)
    and reports its own. Levels default to the built-in ones of the CLI.
    """

    keys: list[str]
    frequency: str
    horizon: int
    active_periods: int = 8
    thresholds: dict[str, Any] | None = None
    segment_thresholds: dict[str, dict[str, Any]] = pydantic.Field(default_factory=dict)
    undefined_status: UndefinedStatus = "warn"
    row_kind_column: str = ROW_KIND

    #: the threshold measure of the check
    coverage_measure: ClassVar[str]
    #: whether the check needs the ``actuals`` rows of a stacked batch
    needs_actuals: ClassVar[bool] = False

    metric_dependencies: ClassVar[tuple[str, ...]] = (COVERAGE_METRIC,)
    success_keys: ClassVar[tuple[str, ...]] = (
        "keys", "frequency", "horizon", "active_periods", "thresholds", "segment_thresholds",
        "undefined_status", "row_kind_column",
    )

    @pydantic.root_validator(skip_on_failure=True)
    def _levels_are_valid(cls, values: dict[str, Any]) -> dict[str, Any]:
        measure = getattr(cls, "coverage_measure", None)
        if measure:
            _check_levels(measure, values)
        return values

    def _measure(self) -> str | None:
        return self.coverage_measure

    def _results(self, metrics: dict[str, Any]) -> tuple[list[CheckResult], dict[str, Any]]:
        payload = metrics[COVERAGE_METRIC]
        extra = {"cycle": payload["cycle"]}
        if self.needs_actuals and not payload["has_actuals"]:
            return [CheckResult(
                self.check, "error", segment=ALL_SERIES, measure=self.coverage_measure,
                message=_no_actuals(self.row_kind_column, "the active series are unknown"),
            )], extra
        mine = [compute.result_from_dict(r) for r in payload["results"]
                if r["check"] == self.check]
        book = compute.threshold_book(self.coverage_measure, self.thresholds,
                                      self.segment_thresholds, self.undefined_status)
        return compute.rejudge(mine, book), extra


class ExpectActiveSeriesForecast(_CoverageExpectation):
    """Expect every active series to have a forecast, per segment (measure
    ``missing_series_pct``, in percent of the active series).

    Active series are those of the batch's ``actuals`` rows with a non-null actual in the
    last ``active_periods`` periods that hold one; the forecast rows are checked against them.
    Built-in levels: warn above 0 %, fail above 1 %.
    """

    check: ClassVar[str] = MISSING_SERIES
    coverage_measure: ClassVar[str] = "missing_series_pct"
    needs_actuals: ClassVar[bool] = True


class ExpectNoUnexpectedSeries(_CoverageExpectation):
    """Expect no forecast series unknown to the actuals and to the ``known`` rows (the
    mapping table), per segment (measure ``unexpected_series``, a count). Built-in level:
    warn above 0."""

    check: ClassVar[str] = UNEXPECTED_SERIES
    coverage_measure: ClassVar[str] = "unexpected_series"
    needs_actuals: ClassVar[bool] = True


class ExpectCompleteHorizon(_CoverageExpectation):
    """Expect every forecast series to have exactly ``horizon`` periods on the ``frequency``
    grid from the cycle's first period, per segment (measure ``incomplete_series``, a count of
    series with a gap, a row beyond the horizon or an off-grid date). Built-in level: fail
    above 0. Works on a plain forecast frame too."""

    check: ClassVar[str] = HORIZON
    coverage_measure: ClassVar[str] = "incomplete_series"


class ExpectStableSeriesCount(_CoverageExpectation):
    """Expect the number of forecast series to stay close to the previous cycle's (measure
    ``series_count_change_pct``, in percent, for all series). Needs ``previous`` rows in the
    batch; without them there is nothing to compare and the expectation passes with no
    result. Built-in level: warn beyond ±10 %."""

    check: ClassVar[str] = SERIES_COUNT
    coverage_measure: ClassVar[str] = "series_count_change_pct"


class ExpectThresholdSegmentsPresent(_ResultsExpectation):
    """Expect every segment named in ``segments`` (the config's ``thresholds.segments``) to
    occur in the data; each one that does not is a ``config.thresholds`` warning, worded as
    in the CLI. Segment names are read from every row except the ``known`` ones."""

    segments: list[str]
    row_kind_column: str = ROW_KIND

    check: ClassVar[str] = "config.thresholds"
    metric_dependencies: ClassVar[tuple[str, ...]] = (SEGMENT_NAMES_METRIC,)
    success_keys: ClassVar[tuple[str, ...]] = ("segments", "row_kind_column")

    def _results(self, metrics: dict[str, Any]) -> tuple[list[CheckResult], dict[str, Any]]:
        names = metrics[SEGMENT_NAMES_METRIC]
        return compute.threshold_segments_results(self.segments, names), {"segments": names}

    def _observed(self, results: list[CheckResult]) -> dict[str, Any]:
        return {"unmatched": [r.segment for r in results]}


def _no_actuals(row_kind_column: str, consequence: str) -> str:
    return (f"The batch has no actuals rows ({row_kind_column} == 'actuals'), so "
            f"{consequence}; validate a stacked batch (accuracy_checks.gx.stack_frames or "
            "batch_from_config).")


class ExpectFiniteActuals(_ResultsExpectation):
    """Expect every actual read to be a finite number (``actuals.invalid_values``, one result
    for all series, ``"*"``).

    Runs the CLI's :func:`~accuracy_checks.checks.actuals.actuals_checks` on the batch's
    ``actuals`` rows: an infinite actual is ``fail`` (the accuracy figures leave it out); a
    missing one is counted and named in ``examples`` but passes, as in the CLI. ``keys`` name
    the series in the examples; ``value_column``, the actuals' value column in the user's
    file, words the message. :func:`~accuracy_checks.gx.suite_from_config` adds it with
    ``severity="critical"`` (the check has no warn status).
    """

    keys: list[str]
    value_column: str | None = None
    row_kind_column: str = ROW_KIND

    check: ClassVar[str] = INVALID_ACTUALS
    metric_dependencies: ClassVar[tuple[str, ...]] = (ACTUALS_METRIC,)
    success_keys: ClassVar[tuple[str, ...]] = ("keys", "value_column", "row_kind_column")

    def _results(self, metrics: dict[str, Any]) -> tuple[list[CheckResult], dict[str, Any]]:
        payload = metrics[ACTUALS_METRIC]
        if not payload["has_actuals"]:
            return [CheckResult(self.check, "error", segment=ALL_SERIES, message=_no_actuals(
                self.row_kind_column, "there are no actual values to check"))], {}
        return [compute.result_from_dict(r) for r in payload["results"]], {}


class ExpectUsableSnapshots(_ResultsExpectation):
    """Expect every archived snapshot the run reads to be usable.

    Computes nothing: it reports the results about the inputs that
    :func:`~accuracy_checks.gx.batch_from_config` carried in the ``notes`` rows (the engine's
    ``load_inputs`` reads the archive): an ``archive.snapshot`` warning for each cycle whose
    last snapshot is missing, unreadable or unrecorded (that cycle is left out of the
    evaluation, never replaced by an older attempt), and, when it is the previous cycle, the
    skipped ``coverage.series_count`` that says the count is not compared with an older one.
    A batch without ``notes`` rows passes with no result.
    :func:`~accuracy_checks.gx.suite_from_config` adds it with ``severity="warning"``.
    ``observed_value`` is ``{"left_out": [<cycle>, ...]}``.
    """

    row_kind_column: str = ROW_KIND

    check: ClassVar[str] = ARCHIVE_CHECK
    metric_dependencies: ClassVar[tuple[str, ...]] = (NOTES_METRIC,)
    success_keys: ClassVar[tuple[str, ...]] = ("row_kind_column",)

    def _results(self, metrics: dict[str, Any]) -> tuple[list[CheckResult], dict[str, Any]]:
        return [compute.result_from_dict(r) for r in metrics[NOTES_METRIC]], {}

    def _observed(self, results: list[CheckResult]) -> dict[str, Any]:
        return {"left_out": [r.details.get("cycle") for r in results if r.check == self.check]}


#: The coverage expectations, in the order of the suite, each with its ``coverage_measure``.
COVERAGE_EXPECTATIONS: tuple[type[_CoverageExpectation], ...] = (
    ExpectActiveSeriesForecast, ExpectNoUnexpectedSeries, ExpectCompleteHorizon,
    ExpectStableSeriesCount)

#: Expectation type (GX snake-case name) → the check it reports.
_ALL: tuple[type[_ResultsExpectation], ...] = (
    ExpectSegmentAccuracy, *COVERAGE_EXPECTATIONS, ExpectThresholdSegmentsPresent,
    ExpectFiniteActuals, ExpectUsableSnapshots)
EXPECTATION_CHECKS: dict[str, str] = {cls.expectation_type: cls.check for cls in _ALL}
