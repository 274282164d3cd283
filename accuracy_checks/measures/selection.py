"""Which measures a config reports, and the settings they are computed with.

The core measures always; every measure a threshold names; those of ``evaluation.measures``
(``all``: every registered measure the config can feed). A measure the config cannot feed
(no quantiles, no costs, no actuals history) is still reported, as ``skipped``
(``not_configured``, docs/results.md).
"""

from __future__ import annotations

from typing import Any

from accuracy_checks.config import Config
from accuracy_checks.evaluation.baselines import default_seasonal_period
from accuracy_checks.measures.data import CostTable, MeasureSettings
from accuracy_checks.measures.registry import CORE_MEASURES, Measure, registered_measures

__all__ = ["FED_HISTORY", "measure_settings", "measures_to_report", "unmet_needs"]

#: stands for "an actuals history will be there" when choosing the measures to report
FED_HISTORY: Any = object()


def unmet_needs(measure: Measure, settings: MeasureSettings, history: object | None) -> list[str]:
    """The inputs ``measure`` needs (``measure.needs``) that ``settings`` and ``history`` (the
    actuals index, or ``None``) do not give, sorted."""
    have = {
        "history": history is not None,
        "quantiles": bool(settings.quantiles),
        "intervals": bool(settings.intervals),
        "costs": settings.costs is not None,
    }
    return [need for need in sorted(measure.needs) if not have.get(need, True)]


def measure_settings(config: Config) -> MeasureSettings:
    """The measure settings of a config (``evaluation`` and ``costs`` sections)."""
    ev = config.evaluation
    costs = None
    if config.costs is not None:
        c = config.costs
        costs = CostTable(
            currency=c.currency,
            default=(c.default.under, c.default.over) if c.default is not None else None,
            segments={name: (u.under, u.over) for name, u in c.segments.items()},
        )
    return MeasureSettings(
        seasonal_period=ev.seasonal_period or default_seasonal_period(config.frequency),
        tracking_window=ev.tracking_window,
        tracking_limit=ev.tracking_limit,
        trigg_alpha=ev.trigg_alpha,
        quantiles=tuple(config.forecast.quantiles),
        coverage_test_level=ev.coverage_test_level,
        costs=costs,
    )


def measures_to_report(config: Config) -> list[str]:
    """The core measures, every measure a threshold names, and those of
    ``evaluation.measures`` (``all``: every registered measure the config can feed)."""
    registry = registered_measures()
    named = set(config.thresholds.default)
    for levels in config.thresholds.segments.values():
        named |= set(levels)
    asked = set(config.evaluation.measures)
    settings = measure_settings(config)
    if "all" in asked:
        fed = {m.id for m in registry.values()
               if not unmet_needs(m, settings, FED_HISTORY)}
        asked |= fed
    extra = [m for m in registry if (m in named or m in asked) and m not in CORE_MEASURES]
    return [*CORE_MEASURES, *extra]
