"""The checks of a run; each returns a list of :class:`~accuracy_checks.results.CheckResult`.

- the forecast file's rows: :mod:`.output` (results) on :mod:`.output_schema` (row masks and
  the pandera schema);
- coverage of series and horizon: :mod:`.coverage` (entry point, missing and unexpected series,
  series count) with :mod:`.horizon`, both on :mod:`.series_index` (series ids, per segment);
- the actuals' values: :mod:`.actuals`;
- accuracy: :mod:`.accuracy` with its worst offenders (:mod:`.offenders`), judged by
  :mod:`.judge`; check plugins: :mod:`.plugins`;
- across cycles: :mod:`.drift` (the checks, the trail through the store's queries) on the pure
  rules of :mod:`.drift_rules`.

:mod:`.examples` holds what every result says the same way: example values, counted words.
"""

from __future__ import annotations

from accuracy_checks.checks.coverage import COVERAGE_CHECKS, coverage_checks
from accuracy_checks.checks.output import OUTPUT_CHECKS, output_checks, output_schema

__all__ = ["COVERAGE_CHECKS", "OUTPUT_CHECKS", "coverage_checks", "output_checks", "output_schema"]
