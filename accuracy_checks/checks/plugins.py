"""Checks from other packages, through the ``accuracy_checks.checks`` entry-point group.

A package adds a check by naming a function in its packaging metadata::

    [project.entry-points."accuracy_checks.checks"]
    promo_calendar = "my_package.checks:promo_calendar"

The function is called once per run, after the built-in checks, as
``check(inputs, config, book) -> list[CheckResult]``: ``inputs`` are the run's canonical frames
(:class:`~accuracy_checks.engine.Inputs`: forecast, actuals, earlier forecasts, mapping),
``config`` the validated config and ``book`` the :class:`~accuracy_checks.checks.judge.
Thresholds` to judge figures with. Its results join the run like any other: they are
waivable, recorded in the audit trail and shown in every output. Their ``check`` names must
start with the entry point's name (``promo_calendar`` or ``promo_calendar.<anything>``), so a
plugin cannot pass itself off as a built-in check.

A plugin is **rejected**, with a warning result (check ``checks.plugins``) naming the entry
point and its package, when it cannot be imported, is not callable, cannot be called with
those three arguments, or its name clashes with a built-in check family or another plugin.
A plugin that raises, or returns something other than a list of ``CheckResult`` with its own
check names, gives one result with status ``error`` and the plugin's message (an ``error``
fails the gate: a check that could not run cannot pass); the other checks still run.
"""

from __future__ import annotations

import inspect
from collections.abc import Callable
from dataclasses import dataclass
from typing import Any

from accuracy_checks.measures.entry_points import EntryPoint, PluginGroup, PluginRejected
from accuracy_checks.results import CheckResult, Status

__all__ = ["GROUP", "CheckPlugin", "load_check_plugins", "reset_check_plugins",
           "run_check_plugins"]

#: The entry-point group through which other packages add checks.
GROUP = "accuracy_checks.checks"
#: Check families of the tool itself; a plugin may not take these names.
BUILT_IN_FAMILIES = frozenset(
    {"output", "coverage", "accuracy", "drift", "config", "checks", "gate"}
)
REJECTED_CHECK = "checks.plugins"


@dataclass(frozen=True)
class CheckPlugin:
    """A loaded check plugin: its entry point and the function."""

    name: str
    value: str
    package: str | None
    check: Callable[..., Any]

    def owns(self, check_name: str) -> bool:
        return check_name == self.name or check_name.startswith(f"{self.name}.")


def _accept(entry: EntryPoint, loaded: Any) -> CheckPlugin:
    if not callable(loaded):
        raise PluginRejected(f"it names a {type(loaded).__name__}, not a function")
    try:
        inspect.signature(loaded).bind(None, None, None)
    except TypeError:
        raise PluginRejected("it cannot be called as check(inputs, config, book)") from None
    except ValueError:  # a builtin without a signature: trust it
        pass
    family = entry.name.split(".")[0]
    if family in BUILT_IN_FAMILIES or any(p.name == entry.name for p in _GROUP.accepted):
        raise PluginRejected(
            f"its name {entry.name!r} clashes with "
            + ("a built-in check family" if family in BUILT_IN_FAMILIES
               else "another check plugin") + "; pick another name")
    return CheckPlugin(entry.name, entry.value, entry.package, loaded)


_GROUP: PluginGroup[CheckPlugin] = PluginGroup(
    GROUP, kind="check", accept=_accept,
    consequence="Its check does not run until the plugin is fixed.")


def reset_check_plugins() -> None:
    """Forget loaded check plugins (tests; a changed environment)."""
    _GROUP.reset()


def load_check_plugins() -> tuple[list[CheckPlugin], list[CheckResult]]:
    """The usable check plugins, and a warning result for each rejected one (once per
    process)."""
    plugins, rejected = _GROUP.load()
    return plugins, [CheckResult(REJECTED_CHECK, Status.WARN, segment=None, message=r.message,
                                 details=r.details) for r in rejected]


def run_check_plugins(inputs: Any, config: Any, book: Any) -> list[CheckResult]:
    """Every plugin's results (or its ``error`` result), then the rejection warnings."""
    plugins, rejected = load_check_plugins()
    out: list[CheckResult] = []
    for plugin in plugins:
        try:
            results = plugin.check(inputs, config, book)
        except Exception as exc:  # third-party code: report it, run the rest
            out.append(_error(plugin, f"raised {type(exc).__name__}: {exc}"))
            continue
        if not isinstance(results, list) or not all(
                isinstance(r, CheckResult) for r in results):
            out.append(_error(plugin, f"returned {type(results).__name__}, not a list of "
                                      "CheckResult"))
            continue
        foreign = [r.check for r in results if not plugin.owns(r.check)]
        if foreign:
            out.append(_error(plugin, f"returned results of checks it does not own "
                                      f"({', '.join(sorted(set(foreign)))}); name them "
                                      f"{plugin.name!r} or '{plugin.name}.<name>'"))
            continue
        out.extend(results)
    return out + rejected


def _error(plugin: CheckPlugin, what: str) -> CheckResult:
    return CheckResult(
        plugin.name, Status.ERROR,
        message=f"The check plugin {plugin.name!r} ({plugin.value}) {what}.",
        details={"entry_point": plugin.name, "value": plugin.value, "package": plugin.package})
