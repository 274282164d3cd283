"""accuracy-checks: gate forecast pipelines on coverage and accuracy, per segment.

The package root stays light: heavy modules (pandas engine, Prefect, Great Expectations) load
only when used.

>>> import accuracy_checks
>>> accuracy_checks.__version__
'0.1.0'
"""

from __future__ import annotations

from typing import TYPE_CHECKING, Any

from accuracy_checks.errors import (
    AccuracyChecksError,
    ConfigError,
    GateFailed,
    InputError,
    UsageError,
)
from accuracy_checks.results import CheckResult, RunReport
from accuracy_checks.version import __version__

__all__ = [
    "AccuracyChecksError",
    "CheckResult",
    "ConfigError",
    "GateFailed",
    "InputError",
    "Measure",
    "MeasureData",
    "RunReport",
    "UsageError",
    "__version__",
    "evaluation_frame",
    "load_config",
    "register_measure",
    "run_checks",
]

if TYPE_CHECKING:
    from accuracy_checks.api import evaluation_frame
    from accuracy_checks.engine import run_checks
    from accuracy_checks.measures import Measure, MeasureData, register_measure
    from accuracy_checks.measures.catalogue import load_config

_LAZY = {"load_config": "accuracy_checks.measures.catalogue",
         "run_checks": "accuracy_checks.engine", "evaluation_frame": "accuracy_checks.api",
         "Measure": "accuracy_checks.measures",
         "MeasureData": "accuracy_checks.measures",
         "register_measure": "accuracy_checks.measures"}


def __getattr__(name: str) -> Any:
    if name in _LAZY:
        import importlib

        return getattr(importlib.import_module(_LAZY[name]), name)
    raise AttributeError(f"module 'accuracy_checks' has no attribute {name!r}")
