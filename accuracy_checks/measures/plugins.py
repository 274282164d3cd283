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
from typing import Any

from accuracy_checks.measures.entry_points import (
    EntryPoint,
    PluginGroup,
    PluginRejected,
    RejectedPlugin,
)
from accuracy_checks.measures.registry import MEASURES, Measure, add_loader, check_measure

__all__ = ["GROUP", "RejectedPlugin", "load_plugins", "rejected_plugins", "reset_plugins"]

#: The entry-point group through which other packages add measures.
GROUP = "accuracy_checks.measures"


def _accept(entry: EntryPoint, loaded: Any) -> str:
    """Register the plugin's measure (its id is kept, to unregister it on reset)."""
    if not isinstance(loaded, Measure):
        raise PluginRejected(
            f"it names a {type(loaded).__name__}, not an accuracy_checks.measures.Measure")
    origin = f"plugin {entry.name} = {entry.value}" + (
        f" ({entry.package})" if entry.package else "")
    measure = dataclasses.replace(loaded, origin=origin)
    try:
        check_measure(measure)
    except ValueError as exc:
        raise PluginRejected(str(exc)) from None
    if measure.id in MEASURES:
        other = MEASURES[measure.id]
        raise PluginRejected(f"its measure id {measure.id!r} clashes with the measure "
                             f"{other.label!r} ({other.origin}); pick another id")
    MEASURES[measure.id] = measure
    return measure.id


def _forget(ids: list[str]) -> None:
    for measure_id in ids:
        MEASURES.pop(measure_id, None)


_GROUP: PluginGroup[str] = PluginGroup(
    GROUP, kind="measure", accept=_accept, forget=_forget,
    consequence="Its measure is not available until the plugin is fixed.")


def load_plugins(*, reload: bool = False) -> list[RejectedPlugin]:
    """Register the measures of the ``accuracy_checks.measures`` entry points (once per
    process unless ``reload``); return the rejected ones."""
    return _GROUP.load(reload=reload)[1]


def rejected_plugins() -> list[RejectedPlugin]:
    """The plugins rejected by the last :func:`load_plugins`."""
    return load_plugins()


def reset_plugins() -> None:
    """Forget loaded plugins and unregister their measures (tests; a changed environment)."""
    _GROUP.reset()


add_loader(load_plugins)
