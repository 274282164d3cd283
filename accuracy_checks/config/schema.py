"""The config's JSON Schema, for editors (yaml-language-server, VS Code): ``accuracy-checks
schema``.

The models give the structure; the measure names come from the catalogue handed in, so the
schema rejects what :func:`~accuracy_checks.config.loading.parse_config` rejects for a name.
"""

from __future__ import annotations

from typing import Any

from accuracy_checks.config.catalogue import Catalogue, MeasureInfo
from accuracy_checks.config.models import Config

__all__ = ["json_schema"]


def json_schema(catalogue: Catalogue | None = None) -> dict[str, Any]:
    """The config's JSON Schema (for editors: yaml-language-server, VS Code).

    With a ``catalogue`` (built at call time by :func:`accuracy_checks.measures.catalogue.
    json_schema`, so plugin measures are included) it rejects what ``parse_config`` rejects for
    a name: an unknown key anywhere, an unknown measure as a threshold key
    (``thresholds.default.<measure>``, ``thresholds.segments.<segment>.<measure>``) or in
    ``evaluation.measures`` / ``drift.measures`` (which also take ``all``); and it lists the
    valid measures for completion (one property per measure, with its label, unit and
    direction). Without one, measure names are left open.
    """
    schema = Config.model_json_schema()
    schema["$schema"] = "https://json-schema.org/draft/2020-12/schema"
    schema["title"] = "accuracy-checks config"
    if catalogue is not None:
        _add_measure_names(schema, catalogue)
    return schema


def _measure_description(info: MeasureInfo) -> str:
    """One line for an editor's completion list: label, unit, which way is better."""
    better = {
        "lower": "lower is better",
        "higher": "higher is better",
        "centered": "levels bound its distance from its target",
    }[info.direction]
    return f"{info.label} ({info.unit}; {better})" if info.unit else f"{info.label} ({better})"


def _add_measure_names(schema: dict[str, Any], catalogue: Catalogue) -> None:
    """Constrain the measure names of ``schema`` (from :meth:`Config.model_json_schema`) in
    place: ``$defs/MeasureLevels`` (one property per measure, no other key) for the threshold
    maps, ``$defs/MeasureName`` (an enum with ``all``) for the measure lists."""
    known = sorted(catalogue.measures)
    defs = schema["$defs"]
    defs["MeasureLevels"] = {
        "title": "Levels by measure",
        "description": "warn and fail levels keyed by measure id",
        "type": "object",
        "properties": {
            m: {"$ref": "#/$defs/Level",
                "description": _measure_description(catalogue.measures[m])} for m in known
        },
        "additionalProperties": False,
    }
    defs["MeasureName"] = {
        "title": "Measure",
        "description": "a measure id, or `all` for every measure whose inputs the config has",
        "enum": ["all", *known],
    }
    thresholds = defs["Thresholds"]["properties"]
    thresholds["default"] = {"$ref": "#/$defs/MeasureLevels"}
    thresholds["segments"] = {
        "title": "Levels by segment",
        "type": "object",
        "additionalProperties": {"$ref": "#/$defs/MeasureLevels"},
    }
    for model in ("Evaluation", "Drift"):
        defs[model]["properties"]["measures"]["items"] = {"$ref": "#/$defs/MeasureName"}
