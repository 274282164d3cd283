"""Great Expectations (GX Core 1.x) expectations for forecast coverage and accuracy per segment.

Install with ``pip install "accuracy-checks[gx]"``. Importing this package imports GX (3–5 s);
``import accuracy_checks`` never does.

- :func:`batch_from_config` stacks the frames the gate reads (current forecast, actuals,
  earlier cycles, the mapping's key columns, the previous cycle) into one batch frame, each
  row tagged in the column ``row_kind``; :func:`suite_from_config` gives the
  :class:`great_expectations.ExpectationSuite` that expresses a config on that batch.
- Expectations (batch-level, one result covering every segment):
  :class:`ExpectSegmentAccuracy` (any registry measure, default and per-segment warn/fail
  levels, asymmetric ``[low, high]`` bias bounds), :class:`ExpectActiveSeriesForecast`
  (missing series against the active series of the actuals rows),
  :class:`ExpectCompleteHorizon`, :class:`ExpectNoUnexpectedSeries`,
  :class:`ExpectStableSeriesCount`, :class:`ExpectThresholdSegmentsPresent`,
  :class:`ExpectFiniteActuals` (``actuals.invalid_values``), :class:`ExpectUsableSnapshots`
  (the ``archive.snapshot`` warnings of the inputs, carried in the batch). Their metric
  providers call the CLI's own functions
  (:func:`~accuracy_checks.checks.accuracy.run_accuracy`,
  :func:`~accuracy_checks.checks.coverage.coverage_checks`,
  :func:`~accuracy_checks.checks.actuals.actuals_checks`), so values are identical.
- Severity: an expectation with ``severity="critical"`` fails on ``fail`` results,
  ``"warning"`` (and ``"info"``) on ``warn`` or worse. :func:`verdict` turns a validation
  result into ``pass``/``warn``/``fail``; :func:`to_run_report` turns it into a
  :class:`~accuracy_checks.results.RunReport` for the outputs and the audit store.
"""

from __future__ import annotations

import warnings

with warnings.catch_warnings():
    # GX 1.24 imports the stdlib modules ``sre_constants``/``sre_parse``, deprecated since
    # Python 3.11; the warnings are GX's own and harmless (pytest runs with
    # filterwarnings=error). GX is imported here first, so its later imports are silent too.
    warnings.filterwarnings(
        "ignore", message=r"module 'sre_\w+' is deprecated", category=DeprecationWarning
    )
    try:
        import great_expectations
    except ImportError as exc:  # pragma: no cover - depends on the environment
        raise ImportError('accuracy_checks.gx needs Great Expectations 1.x: '
                          'pip install "accuracy-checks[gx]"') from exc

from accuracy_checks.gx import expectations
from accuracy_checks.gx.batch import ROW_KIND, RowKind, batch_from_config, stack_frames
from accuracy_checks.gx.convert import to_run_report, verdict
from accuracy_checks.gx.expectations import *  # noqa: F403 - the expectations, listed once there
from accuracy_checks.gx.suite import suite_from_config, suite_from_json, suite_to_json

__all__ = [
    "ROW_KIND",
    "RowKind",
    "batch_from_config",
    "great_expectations",
    "stack_frames",
    "suite_from_config",
    "suite_from_json",
    "suite_to_json",
    "to_run_report",
    "verdict",
]
__all__ += expectations.__all__
