"""One loader for every entry-point group of plugins (measures and checks).

Other packages extend the tool through entry points: measures (``accuracy_checks.measures``,
:mod:`accuracy_checks.measures.plugins`) and checks (``accuracy_checks.checks``,
:mod:`accuracy_checks.checks.plugins`). A :class:`PluginGroup` loads one group once per
process: it imports each entry point, hands it to the group's ``accept`` function (which
validates it, and may register it, or raises :class:`PluginRejected` saying why) and keeps a
:class:`RejectedPlugin` for each one refused, named by entry point and package, so a bad
plugin never stops the others (docs/checks.md, "Plugins"). It lives with the measures, the
lowest layer that has plugins, so that both kinds import it without a cycle.
"""

from __future__ import annotations

import importlib.metadata
from collections.abc import Callable
from dataclasses import dataclass
from typing import Any, Generic, TypeVar

__all__ = ["EntryPoint", "PluginGroup", "PluginRejected", "RejectedPlugin"]

T = TypeVar("T")


class PluginRejected(Exception):
    """Raised by a group's ``accept`` function: the message says why (``it names a …``)."""


@dataclass(frozen=True)
class EntryPoint:
    """Where a plugin comes from: the entry point's name and value, and its package."""

    name: str
    value: str
    package: str | None

    @property
    def where(self) -> str:
        """``" from package 'x'"``, or nothing when the package is unknown."""
        return f" from package {self.package!r}" if self.package else ""


@dataclass(frozen=True)
class RejectedPlugin:
    """An entry point that was not registered, and why."""

    name: str
    value: str
    package: str | None
    reason: str
    #: ``measure`` or ``check``
    kind: str = "measure"
    #: what the user loses, e.g. ``Its measure is not available until the plugin is fixed.``
    consequence: str = "Its measure is not available until the plugin is fixed."

    @property
    def message(self) -> str:
        where = f" from package {self.package!r}" if self.package else ""
        return (f"The {self.kind} plugin {self.name!r} ({self.value}){where} was rejected: "
                f"{self.reason}. {self.consequence}")

    @property
    def details(self) -> dict[str, Any]:
        """The facts a result about the rejection carries."""
        return {"entry_point": self.name, "value": self.value, "package": self.package}


class PluginGroup(Generic[T]):
    """The plugins of one entry-point group, loaded once per process.

    ``accept(entry_point, loaded)`` returns what the group keeps of an imported plugin or
    raises :class:`PluginRejected`; ``forget(kept)`` undoes what accepting did (unregisters
    measures) when the group is reset.
    """

    def __init__(self, group: str, *, kind: str, consequence: str,
                 accept: Callable[[EntryPoint, Any], T],
                 forget: Callable[[list[T]], None] | None = None) -> None:
        self.group = group
        self._kind = kind
        self._consequence = consequence
        self._accept = accept
        self._forget = forget
        self._loaded = False
        self._kept: list[T] = []
        self._rejected: list[RejectedPlugin] = []

    def load(self, *, reload: bool = False) -> tuple[list[T], list[RejectedPlugin]]:
        """The accepted plugins and the rejected ones (loaded on the first call, or again
        with ``reload``)."""
        if self._loaded and not reload:
            return list(self._kept), list(self._rejected)
        self.reset()
        self._loaded = True  # set first: a plugin that consults the registry must not recurse
        for found in importlib.metadata.entry_points(group=self.group):
            dist = getattr(found, "dist", None)
            entry = EntryPoint(found.name, found.value,
                               getattr(dist, "name", None) if dist is not None else None)
            try:
                loaded = found.load()
            except Exception as exc:  # any import failure of third-party code
                self._reject(entry, f"it could not be imported ({type(exc).__name__}: {exc})")
                continue
            try:
                self._kept.append(self._accept(entry, loaded))
            except PluginRejected as exc:
                self._reject(entry, str(exc))
        return list(self._kept), list(self._rejected)

    @property
    def accepted(self) -> list[T]:
        """What the group kept so far (during a load: of the entry points before this one)."""
        return list(self._kept)

    def reset(self) -> None:
        """Forget the loaded plugins (tests; a changed environment)."""
        if self._forget is not None:
            self._forget(self._kept)
        self._loaded = False
        self._kept = []
        self._rejected = []

    def _reject(self, entry: EntryPoint, reason: str) -> None:
        self._rejected.append(RejectedPlugin(entry.name, entry.value, entry.package, reason,
                                             self._kind, self._consequence))
