"""The GX suite that expresses a config, and its JSON form.

:func:`suite_from_config` validates the stacked batch of :func:`batch_from_config`:

- output checks as GX built-in expectations on the ``forecast`` rows (row condition
  ``row_kind == "forecast"``), severity ``critical`` (these are rules, not levels):
  compound uniqueness of (keys, ``period``, ``issued``) → ``output.duplicate_rows``; not null
  and values between ±1.8e308 (so ±inf fails) for ``forecast`` and each quantile →
  ``output.invalid_values``; values ≥ 0 (except where ``forecast.allow_negative`` allows) →
  ``output.negative_values``; each quantile ≥ the one below → ``output.quantile_order``;
  exactly one non-null issue date → ``output.issue_dates``. Each carries
  ``meta={"accuracy_checks": {"check": <check>}}``.
- coverage and accuracy as this package's expectations, one per severity: a measure with a
  warn level anywhere gets a ``severity="warning"`` expectation, one with a fail level a
  ``"critical"`` one (both carry all its levels; an undefined value takes
  ``evaluation.undefined_status``, so that status adds its severity too); an accuracy measure
  without any level gets one ``"info"`` expectation, so its values are still reported. The
  accuracy expectations name the config file (its evaluation settings apply; the levels they
  show are checked against it at validation time), so all of them share one computation.
- ``config.thresholds``: segments named in ``thresholds.segments`` that are not in the data
  (``"warning"``).
- the inputs: ``actuals.invalid_values`` (:class:`ExpectFiniteActuals`, ``"critical"``: an
  infinite actual fails) and the ``archive.snapshot`` warnings the batch carries
  (:class:`ExpectUsableSnapshots`, ``"warning"``).

Not expressed: nothing is archived and nothing is written to the audit store; the previous
cycle for the series count comes from the archive as it stands (``batch_from_config``).
"""

from __future__ import annotations

import itertools
import json
import os
from typing import Any

import great_expectations as gx
from great_expectations.expectations.expectation import Expectation
from great_expectations.expectations.metadata_types import FailureSeverity
from great_expectations.expectations.row_conditions import (
    AndCondition,
    Column,
    ComparisonCondition,
)

from accuracy_checks.api import read_config
from accuracy_checks.checks.output_schema import (
    DUPLICATE_ROWS,
    INVALID_VALUES,
    ISSUE_DATES,
    NEGATIVE_VALUES,
    QUANTILE_ORDER,
)
from accuracy_checks.config import Config
from accuracy_checks.gx.batch import ROW_KIND
from accuracy_checks.gx.compute import measure_levels
from accuracy_checks.gx.expectations import (
    COVERAGE_EXPECTATIONS,
    ExpectFiniteActuals,
    ExpectSegmentAccuracy,
    ExpectThresholdSegmentsPresent,
    ExpectUsableSnapshots,
)
from accuracy_checks.measures.selection import measures_to_report
from accuracy_checks.sources import frames as F
from accuracy_checks.version import __version__

__all__ = ["FINITE_MAX", "suite_from_config", "suite_from_json", "suite_to_json"]

#: The largest finite float64: ``values between ±FINITE_MAX`` rejects ±inf.
FINITE_MAX = 1.7976931348623157e308


def _tag(check: str, **more: Any) -> dict[str, Any]:
    return {"accuracy_checks": {"check": check, **more}}


def _severities(levels: dict[str, Any], undefined_status: str) -> list[FailureSeverity]:
    """The severities a measure of these levels (:func:`measure_levels`) needs: ``warning``
    for warn levels, ``critical`` for fail levels; an undefined value under a level takes
    ``undefined_status``, so that status needs its severity too."""
    given = [lv for lv in (levels["thresholds"], *levels["segment_thresholds"].values())
             if lv is not None]
    out = []
    if any("warn" in lv for lv in given) or (given and undefined_status == "warn"):
        out.append(FailureSeverity.WARNING)
    if any("fail" in lv for lv in given) or (given and undefined_status == "fail"):
        out.append(FailureSeverity.CRITICAL)
    return out


def _output_expectations(config: Config, rows: ComparisonCondition) -> list[Expectation]:
    keys = list(config.forecast.keys)
    values = [F.FORECAST, *(F.quantile_column(t) for t in config.forecast.quantiles)]
    out: list[Expectation] = [gx.expectations.ExpectCompoundColumnsToBeUnique(
        column_list=[*keys, F.PERIOD, F.ISSUED], row_condition=rows,
        meta=_tag(DUPLICATE_ROWS))]
    for column in values:
        out.append(gx.expectations.ExpectColumnValuesToNotBeNull(
            column=column, row_condition=rows, meta=_tag(INVALID_VALUES)))
        out.append(gx.expectations.ExpectColumnValuesToBeBetween(
            column=column, min_value=-FINITE_MAX, max_value=FINITE_MAX, row_condition=rows,
            meta=_tag(INVALID_VALUES)))
    allow = config.forecast.allow_negative
    if allow is not True:
        where: ComparisonCondition | AndCondition = (
            rows & Column(F.SEGMENT).is_not_in(list(allow)) if allow else rows)
        out += [gx.expectations.ExpectColumnValuesToBeBetween(
            column=column, min_value=0, row_condition=where, meta=_tag(NEGATIVE_VALUES))
            for column in values]
    out += [gx.expectations.ExpectColumnPairValuesAToBeGreaterThanB(
        column_A=high, column_B=low, or_equal=True, ignore_row_if="either_value_is_missing",
        row_condition=rows, meta=_tag(QUANTILE_ORDER))
        for low, high in itertools.pairwise(values[1:])]
    out.append(gx.expectations.ExpectColumnValuesToNotBeNull(
        column=F.ISSUED, row_condition=rows, meta=_tag(ISSUE_DATES)))
    out.append(gx.expectations.ExpectColumnUniqueValueCountToBeBetween(
        column=F.ISSUED, min_value=1, max_value=1, row_condition=rows, meta=_tag(ISSUE_DATES)))
    return out


def suite_from_config(config: str | os.PathLike[str] | Config, *, name: str | None = None,
                      row_kind_column: str = ROW_KIND) -> gx.ExpectationSuite:
    """The suite that expresses ``config`` on the batch of
    :func:`~accuracy_checks.gx.batch_from_config`: warn levels as ``severity="warning"``,
    fail levels as ``"critical"``. Not yet added to any context (``context.suites.add``).

    The suite's ``meta["accuracy_checks"]`` names the config file and this package's version.
    """
    cfg = read_config(config)
    source = cfg.source
    if source is None:
        raise ValueError("suite_from_config needs a config read from a file (load_config): "
                         "its accuracy expectations name that file")
    keys = list(cfg.forecast.keys)
    rows = Column(row_kind_column) == "forecast"
    expectations = _output_expectations(cfg, rows)
    expectations.append(ExpectFiniteActuals(
        keys=keys, value_column=cfg.actuals.value, row_kind_column=row_kind_column,
        severity=FailureSeverity.CRITICAL, meta=_tag(ExpectFiniteActuals.check)))
    expectations.append(ExpectUsableSnapshots(
        row_kind_column=row_kind_column, severity=FailureSeverity.WARNING,
        meta=_tag(ExpectUsableSnapshots.check)))

    for cls in COVERAGE_EXPECTATIONS:
        measure = cls.coverage_measure
        levels = measure_levels(cfg, measure)
        for severity in _severities(levels, cfg.evaluation.undefined_status):
            expectations.append(cls(
                keys=keys, frequency=cfg.frequency, horizon=cfg.horizon,
                active_periods=cfg.coverage.active_periods,
                thresholds=levels["thresholds"],
                segment_thresholds=levels["segment_thresholds"],
                undefined_status=cfg.evaluation.undefined_status,
                row_kind_column=row_kind_column, severity=severity,
                meta=_tag(cls.check, measure=measure)))

    for measure in measures_to_report(cfg):
        levels = measure_levels(cfg, measure)
        for severity in (_severities(levels, cfg.evaluation.undefined_status)
                         or [FailureSeverity.INFO]):
            expectations.append(ExpectSegmentAccuracy(
                measure=measure, config=str(source),
                thresholds=levels["thresholds"],
                segment_thresholds=levels["segment_thresholds"] or None,
                row_kind_column=row_kind_column, severity=severity,
                meta=_tag("accuracy", measure=measure)))

    if cfg.thresholds.segments:
        expectations.append(ExpectThresholdSegmentsPresent(
            segments=list(cfg.thresholds.segments), row_kind_column=row_kind_column,
            severity=FailureSeverity.WARNING, meta=_tag("config.thresholds")))

    suite_name = name or f"accuracy-checks:{source.stem if source else 'config'}"
    return gx.ExpectationSuite(
        name=suite_name, expectations=expectations,
        meta={"accuracy_checks": {"config": str(source) if source else None,
                                  "version": __version__,
                                  "row_kind_column": row_kind_column}})


def suite_to_json(suite: gx.ExpectationSuite) -> str:
    """The suite as JSON text (GX's own serialisation, ``suite.to_json_dict()``)."""
    return json.dumps(suite.to_json_dict(), indent=2, sort_keys=True)


def suite_from_json(text: str | bytes) -> gx.ExpectationSuite:
    """The suite that :func:`suite_to_json` wrote.

    The ids of the suite and of its expectations are dropped, so the suite can be added to
    any context. Raises ``ValueError`` if GX cannot rebuild every expectation (GX itself
    would only log and drop it).
    """
    data = json.loads(text)
    data.pop("id", None)
    expectations = [{k: v for k, v in e.items() if k != "id"} for e in data.get("expectations", [])]
    data["expectations"] = expectations
    suite = gx.ExpectationSuite(**data)
    if len(suite.expectations) != len(expectations):
        kept = {e.expectation_type for e in suite.expectations}
        lost = sorted({e.get("type", "?") for e in expectations} - kept) or ["(one of a type)"]
        raise ValueError(
            f"GX could not rebuild {len(expectations) - len(suite.expectations)} expectation(s) "
            f"of the suite {data.get('name')!r}: {', '.join(lost)}. Import accuracy_checks.gx "
            "before loading a suite that uses its expectations."
        )
    return suite
