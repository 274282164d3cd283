"""Checks of the forecast being published: its rows (:mod:`.output`) and its coverage of the
series, horizon and grid (:mod:`.coverage`). Both return lists of
:class:`~accuracy_checks.results.CheckResult`."""

from __future__ import annotations

from accuracy_checks.checks.coverage import COVERAGE_CHECKS, coverage_checks
from accuracy_checks.checks.output import OUTPUT_CHECKS, output_checks, output_schema

__all__ = ["COVERAGE_CHECKS", "OUTPUT_CHECKS", "coverage_checks", "output_checks", "output_schema"]
