"""The YAML config: pydantic v2 models, safe loading and messages a user can act on.

Declarations and structure only: this package imports neither pandas nor the measures. What
depends on the measures (the ids a threshold may name, which way a level must point, the inputs
a measure needs) and the frequency's calendar are checked against a catalogue the caller hands
in (:mod:`~accuracy_checks.config.catalogue`); :func:`accuracy_checks.load_config` hands in
the registered measures.

- :mod:`~accuracy_checks.config.models`: the models (:class:`Config` and its sections).
- :mod:`~accuracy_checks.config.levels`: warn/fail levels and the rules they keep.
- :mod:`~accuracy_checks.config.catalogue`: the catalogue a config is checked against.
- :mod:`~accuracy_checks.config.loading`: YAML → :class:`Config`; the error messages.
- :mod:`~accuracy_checks.config.schema`: the JSON Schema for editors.
- :mod:`~accuracy_checks.config.places`: where an input is: a path, a URL, or a table or
  query.
- :mod:`~accuracy_checks.config.urls`: ``${NAME}`` in URLs, passwords masked.

Every problem is raised as :class:`~accuracy_checks.errors.ConfigError` naming the file, the
key path and, for a misspelt key, the closest valid key.
"""

from accuracy_checks.config.catalogue import Catalogue, MeasureInfo, did_you_mean
from accuracy_checks.config.levels import Bound, Direction, check_level
from accuracy_checks.config.loading import load_config, parse_config, validate
from accuracy_checks.config.models import (
    MAX_HORIZON,
    RESERVED_COLUMNS,
    ActualsSource,
    Config,
    Costs,
    Coverage,
    Drift,
    Evaluation,
    ForecastSource,
    Level,
    Place,
    Segments,
    SqlPlace,
    SqlSource,
    Thresholds,
    UnitCosts,
    Url,
)
from accuracy_checks.config.schema import json_schema

__all__ = [
    "MAX_HORIZON",
    "RESERVED_COLUMNS",
    "ActualsSource",
    "Bound",
    "Catalogue",
    "Config",
    "Costs",
    "Coverage",
    "Direction",
    "Drift",
    "Evaluation",
    "ForecastSource",
    "Level",
    "MeasureInfo",
    "Place",
    "Segments",
    "SqlPlace",
    "SqlSource",
    "Thresholds",
    "UnitCosts",
    "Url",
    "check_level",
    "did_you_mean",
    "json_schema",
    "load_config",
    "parse_config",
    "validate",
]
