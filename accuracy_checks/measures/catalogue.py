"""The measure catalogue a config is checked against, and the loaders that hand it in.

The config layer (:mod:`accuracy_checks.config`) knows no measure: it checks a config's
measure names, level directions, measure inputs and frequency against a
:class:`~accuracy_checks.config.Catalogue` handed in. This module builds that catalogue from
the registry (plugins included) and the coverage figures, with the period grid's frequency
parser, and offers the loaders every command and integration uses: :func:`load_config` (also
``accuracy_checks.load_config``), :func:`parse_config` and :func:`json_schema`.
"""

from __future__ import annotations

from pathlib import Path
from typing import Any

from accuracy_checks import config as cfg
from accuracy_checks.config import Catalogue, Config, Direction, MeasureInfo
from accuracy_checks.evaluation.grid import offset_of
from accuracy_checks.measures.registry import registered_measures

__all__ = [
    "CHECK_MEASURES",
    "json_schema",
    "load_config",
    "measure_catalogue",
    "measure_directions",
    "parse_config",
]

#: Figures of the coverage checks that a threshold may name besides the measures.
CHECK_MEASURES: dict[str, MeasureInfo] = {
    "missing_series_pct": MeasureInfo("lower", "%", "coverage check figure"),
    "unexpected_series": MeasureInfo("lower", "count", "coverage check figure"),
    "incomplete_series": MeasureInfo("lower", "count", "coverage check figure"),
    "series_count_change_pct": MeasureInfo("centered", "%", "coverage check figure"),
}


def measure_catalogue() -> Catalogue:
    """Every measure a threshold may name (the registry at call time, plugins included, and
    :data:`CHECK_MEASURES`) and the grid's frequency parser."""
    measures = {
        m.id: MeasureInfo(m.direction, m.unit, m.label, frozenset(m.needs))
        for m in registered_measures().values()
    }
    measures.update(CHECK_MEASURES)
    return Catalogue(measures, frequency=offset_of)


def measure_directions() -> dict[str, tuple[Direction, str]]:
    """Every measure id a threshold may name → (direction, unit).

    >>> measure_directions()["wape"], measure_directions()["unexpected_series"]
    (('lower', '%'), ('lower', 'count'))
    """
    return measure_catalogue().directions()


def load_config(path: str | Path, **overrides: Any) -> Config:
    """:func:`accuracy_checks.config.load_config` checked against :func:`measure_catalogue`."""
    return cfg.load_config(path, catalogue=measure_catalogue, **overrides)


def parse_config(text: str, *, source: Path | None = None, **overrides: Any) -> Config:
    """:func:`accuracy_checks.config.parse_config` checked against :func:`measure_catalogue`."""
    return cfg.parse_config(text, source=source, catalogue=measure_catalogue, **overrides)


def json_schema() -> dict[str, Any]:
    """The config's JSON Schema with the measure names of :func:`measure_catalogue`."""
    return cfg.json_schema(measure_catalogue())
