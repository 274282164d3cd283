"""Measures from other packages, through the ``accuracy_checks.measures`` entry-point group.

A package adds a measure by naming a :class:`~accuracy_checks.measures.registry.Measure` object
in its packaging metadata::

    [project.entry-points."accuracy_checks.measures"]
    stockout_rate = "my_package.measures:STOCKOUT_RATE"

The measure then joins the registry the built-ins use: thresholds, ``evaluation.measures`` and
every output accept its id. Plugins are loaded once per process, the first time the registry
is consulted (:func:`~accuracy_checks.measures.registry.registered_measures`). A plugin is
**rejected**, with a message naming the entry point and its package, when it cannot be
imported, is not a ``Measure``, its ``compute``/``from_stats`` does not take exactly one
positional argument, its id clashes with a registered measure, or its direction is not one of
``lower``/``centered``/``higher``; the rest still load, and every run reports the rejection as
a warning (check ``accuracy.plugins``). A plugin measure that raises while computing gives
its results the status ``error`` with the plugin's message; the other measures still run.
"""

from __future__ import annotations

import dataclasses
import importlib.metadata
from dataclasses import dataclass
from typing import Any

from accuracy_checks.measures.registry import MEASURES, Measure, check_measure

__all__ = ["GROUP", "RejectedPlugin", "load_plugins", "rejected_plugins", "reset_plugins"]

#: The entry-point group through which other packages add measures.
GROUP = "accuracy_checks.measures"


@dataclass(frozen=True)
class RejectedPlugin:
    """An entry point that was not registered, and why."""

    name: str
    value: str
    package: str | None
    reason: str

    @property
    def message(self) -> str:
        where = f" from package {self.package!r}" if self.package else ""
        return (f"The measure plugin {self.name!r} ({self.value}){where} was rejected: "
                f"{self.reason}. Its measure is not available until the plugin is fixed.")


_state: dict[str, Any] = {"loaded": False, "rejected": [], "ids": []}


def _package(entry_point: Any) -> str | None:
    dist = getattr(entry_point, "dist", None)
    return getattr(dist, "name", None) if dist is not None else None


def load_plugins(*, reload: bool = False) -> list[RejectedPlugin]:
    """Register the measures of the ``accuracy_checks.measures`` entry points (once per
    process unless ``reload``); return the rejected ones."""
    if _state["loaded"] and not reload:
        return list(_state["rejected"])
    if reload:
        reset_plugins()
    _state["loaded"] = True  # set first: a plugin that consults the registry must not recurse
    rejected: list[RejectedPlugin] = []
    for entry_point in importlib.metadata.entry_points(group=GROUP):
        name, value, package = entry_point.name, entry_point.value, _package(entry_point)

        def reject(reason: str, name: str = name, value: str = value,
                   package: str | None = package) -> None:
            rejected.append(RejectedPlugin(name, value, package, reason))

        try:
            loaded = entry_point.load()
        except Exception as exc:  # any import failure of third-party code
            reject(f"it could not be imported ({type(exc).__name__}: {exc})")
            continue
        if not isinstance(loaded, Measure):
            reject(f"it names a {type(loaded).__name__}, not an accuracy_checks.measures.Measure")
            continue
        origin = f"plugin {name} = {value}" + (f" ({package})" if package else "")
        measure = dataclasses.replace(loaded, origin=origin)
        try:
            check_measure(measure)
        except ValueError as exc:
            reject(str(exc))
            continue
        if measure.id in MEASURES:
            other = MEASURES[measure.id]
            reject(f"its measure id {measure.id!r} clashes with the measure {other.label!r} "
                   f"({other.origin}); pick another id")
            continue
        MEASURES[measure.id] = measure
        _state["ids"].append(measure.id)
    _state["rejected"] = rejected
    return list(rejected)


def rejected_plugins() -> list[RejectedPlugin]:
    """The plugins rejected by the last :func:`load_plugins`."""
    load_plugins()
    return list(_state["rejected"])


def reset_plugins() -> None:
    """Forget loaded plugins and unregister their measures (tests; a changed environment)."""
    for measure_id in _state["ids"]:
        MEASURES.pop(measure_id, None)
    _state.update(loaded=False, rejected=[], ids=[])
