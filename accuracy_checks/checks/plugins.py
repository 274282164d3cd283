"""Checks from other packages, through the ``accuracy_checks.checks`` entry-point group.

A package adds a check by naming a function in its packaging metadata::

    [project.entry-points."accuracy_checks.checks"]
    promo_calendar = "my_package.checks:promo_calendar"

The function is called once per run, after the built-in checks, as
``check(inputs, config, book) -> list[CheckResult]``: ``inputs`` are the run's canonical frames
(:class:`~accuracy_checks.engine.Inputs`: forecast, actuals, earlier forecasts, mapping),
``config`` the validated config and ``book`` the :class:`~accuracy_checks.checks.judge.
ThresholdBook` to judge figures with. Its results join the run like any other: they are
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

import importlib.metadata
import inspect
from collections.abc import Callable
from dataclasses import dataclass
from typing import Any

from accuracy_checks.results import CheckResult

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


_state: dict[str, Any] = {"loaded": False, "plugins": [], "rejected": []}


def reset_check_plugins() -> None:
    """Forget loaded check plugins (tests; a changed environment)."""
    _state.update(loaded=False, plugins=[], rejected=[])


def load_check_plugins() -> tuple[list[CheckPlugin], list[CheckResult]]:
    """The usable check plugins, and a warning result for each rejected one (once per
    process)."""
    if _state["loaded"]:
        return list(_state["plugins"]), list(_state["rejected"])
    plugins: list[CheckPlugin] = []
    rejected: list[CheckResult] = []
    taken: set[str] = set()
    for entry_point in importlib.metadata.entry_points(group=GROUP):
        name, value = entry_point.name, entry_point.value
        dist = getattr(entry_point, "dist", None)
        package = getattr(dist, "name", None) if dist is not None else None
        where = f" from package {package!r}" if package else ""

        def reject(reason: str, name: str = name, value: str = value,
                   where: str = where, package: str | None = package) -> None:
            rejected.append(CheckResult(
                REJECTED_CHECK, "warn", segment=None,
                message=(f"The check plugin {name!r} ({value}){where} was rejected: {reason}. "
                         "Its check does not run until the plugin is fixed."),
                details={"entry_point": name, "value": value, "package": package}))

        try:
            loaded = entry_point.load()
        except Exception as exc:  # any import failure of third-party code
            reject(f"it could not be imported ({type(exc).__name__}: {exc})")
            continue
        if not callable(loaded):
            reject(f"it names a {type(loaded).__name__}, not a function")
            continue
        try:
            inspect.signature(loaded).bind(None, None, None)
        except TypeError:
            reject("it cannot be called as check(inputs, config, book)")
            continue
        except ValueError:  # a builtin without a signature: trust it
            pass
        if name.split(".")[0] in BUILT_IN_FAMILIES or name in taken:
            reject(f"its name {name!r} clashes with "
                   + ("a built-in check family" if name.split(".")[0] in BUILT_IN_FAMILIES
                      else "another check plugin") + "; pick another name")
            continue
        taken.add(name)
        plugins.append(CheckPlugin(name, value, package, loaded))
    _state.update(loaded=True, plugins=plugins, rejected=rejected)
    return list(plugins), list(rejected)


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
        plugin.name, "error",
        message=f"The check plugin {plugin.name!r} ({plugin.value}) {what}.",
        details={"entry_point": plugin.name, "value": plugin.value, "package": plugin.package})
