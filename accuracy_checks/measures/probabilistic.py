"""Measures of quantile and interval forecasts (docs/measures.md §13–15).

Quantile forecasts come from ``forecast.quantiles``; every pair of levels ``τ`` and ``1 − τ``
forms a central interval of nominal coverage ``1 − 2τ`` (``α = 2τ``). Each measure gives one
figure per group and quantile (``pinball``) or per group and interval (the others), told apart
by the result's ``details["variant"]`` (``"q0.1"``, ``"80%"``).

- ``interval_coverage``: ``100·mean(1{L ≤ y ≤ U})`` in percent (bounds inclusive), pooled, with
  the binomial test of the observed count against the nominal level: the p-value of a
  shortfall (or excess) at least this large by chance, P(X ≤ k) (P(X ≥ k) for an excess)
  with X ~ Binomial(n, 1 − α): the one-sided ``scipy.stats.binomtest(k, n, 1 − α).pvalue``,
  computed for all groups at once with ``scipy.special.bdtr``/``bdtrc``. Thresholds bound
  the distance from the nominal level in percentage points, and a breach counts only when
  that p-value is below ``evaluation.coverage_test_level``: a few rows cannot fail the gate
  by bad luck.
- ``pinball``: mean pinball loss of each quantile forecast, pooled, in data units.
- ``mis``: mean interval score (Gneiting & Raftery), pooled, in data units.
- ``msis``: MIS / s per series (s as for MASE), then the unweighted mean (M4).

Rows with ``L > U`` (crossed quantiles: the output check reports them when they are current)
are left out of the interval measures and counted in ``n_crossed``.
"""

from __future__ import annotations

from collections.abc import Mapping
from typing import Any

import numpy as np
import pandas as pd

from accuracy_checks.measures.data import (
    SCALE_OK,
    SCALE_TOO_FEW_ROWS,
    Interval,
    MeasureData,
    MeasureSettings,
    result_frame,
    scaled_result,
    stack_variants,
)
from accuracy_checks.measures.registry import Levels, declare
from accuracy_checks.measures.wording import format_number, skipped_series_facts

__all__ = [
    "coverage_from_data",
    "mis_from_data",
    "msis_from_data",
    "pinball_from_data",
]


def interval_rows(data: MeasureData, interval: Interval
                  ) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    """(lower, upper, usable rows, crossed rows) of one interval."""
    lower = data.quantile(interval.lower)
    upper = data.quantile(interval.upper)
    present = ~(np.isnan(data.actual) | np.isnan(lower) | np.isnan(upper))
    with np.errstate(invalid="ignore"):
        crossed = present & (lower > upper)
    return lower, upper, present & ~crossed, crossed


def coverage_from_data(data: MeasureData) -> pd.DataFrame:
    """Coverage in percent per group and central interval, with the binomial p-value."""
    from scipy.special import bdtr, bdtrc  # the binomial tails (scipy.stats.binom uses them)

    y = data.actual
    frames: dict[str, pd.DataFrame] = {}
    extra: dict[str, dict[str, object]] = {}
    for interval in data.settings.intervals:
        lower, upper, use, crossed = interval_rows(data, interval)
        with np.errstate(invalid="ignore"):
            inside = use & (lower <= y) & (y <= upper)
        n = data.gsum(mask=use)
        k = data.gsum(mask=inside)
        coverage = np.full(data.n_groups, np.nan)
        np.divide(100.0 * k, n, out=coverage, where=n > 0)
        nominal = interval.nominal
        short = coverage < 100.0 * nominal
        k_int, n_int = k.astype(np.int64), n.astype(np.int64)
        p_short = bdtr(k_int, n_int, nominal)  # P(X ≤ k), X ~ Binomial(n, nominal)
        p_excess = bdtrc(k_int - 1, n_int, nominal)  # P(X ≥ k)
        p_value = np.where(n > 0, np.where(short, p_short, p_excess), np.nan)
        frames[interval.label] = result_frame(
            data.n_groups, coverage, [(n == 0, "no_data")],
            n_obs=n.astype(np.int64), n_inside=k.astype(np.int64),
            nominal_pct=np.full(data.n_groups, 100.0 * nominal),
            deviation_pp=coverage - 100.0 * nominal, p_value=p_value,
            n_crossed=data.gsum(mask=crossed).astype(np.int64),
        )
        extra[interval.label] = {"lower_quantile": interval.lower,
                                 "upper_quantile": interval.upper}
    return stack_variants(frames, extra)


def pinball_from_data(data: MeasureData) -> pd.DataFrame:
    """Mean pinball loss per group and configured quantile, in data units: with
    ``u = y − q``, ``τ·u`` if ``u ≥ 0`` else ``(τ − 1)·u``."""
    y = data.actual
    frames: dict[str, pd.DataFrame] = {}
    extra: dict[str, dict[str, object]] = {}
    for tau in data.settings.quantiles:
        q = data.quantile(tau)
        use = ~(np.isnan(y) | np.isnan(q))
        u = np.where(use, y - q, 0.0)
        loss = np.where(u >= 0, tau * u, (tau - 1.0) * u)
        n = data.gsum(mask=use)
        mean = np.full(data.n_groups, np.nan)
        np.divide(data.gsum(loss, use), n, out=mean, where=n > 0)
        label = f"q{tau:g}"
        frames[label] = result_frame(data.n_groups, mean, [(n == 0, "no_data")],
                                     n_obs=n.astype(np.int64))
        extra[label] = {"quantile": tau}
    return stack_variants(frames, extra)


def _interval_score(data: MeasureData, interval: Interval
                    ) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Per row: IS = (U − L) + (2/α)(L − y)·1{y < L} + (2/α)(y − U)·1{y > U}; usable rows and
    crossed rows."""
    lower, upper, use, crossed = interval_rows(data, interval)
    y = data.actual
    penalty = 2.0 / interval.alpha
    with np.errstate(invalid="ignore"):
        score = (
            (upper - lower)
            + penalty * np.where(y < lower, lower - y, 0.0)
            + penalty * np.where(y > upper, y - upper, 0.0)
        )
    return np.where(use, score, 0.0), use, crossed


def mis_from_data(data: MeasureData) -> pd.DataFrame:
    """Mean interval score per group and central interval, pooled, in data units."""
    frames: dict[str, pd.DataFrame] = {}
    extra: dict[str, dict[str, object]] = {}
    for interval in data.settings.intervals:
        score, use, crossed = _interval_score(data, interval)
        n = data.gsum(mask=use)
        mean = np.full(data.n_groups, np.nan)
        np.divide(data.gsum(score, use), n, out=mean, where=n > 0)
        frames[interval.label] = result_frame(
            data.n_groups, mean, [(n == 0, "no_data")], n_obs=n.astype(np.int64),
            n_crossed=data.gsum(mask=crossed).astype(np.int64),
        )
        extra[interval.label] = {"alpha": interval.alpha}
    return stack_variants(frames, extra)


def msis_from_data(data: MeasureData) -> pd.DataFrame:
    """MSIS per group and central interval: per series MIS / s, then the unweighted mean;
    series without a usable scale are skipped and counted (as for MASE)."""
    frames: dict[str, pd.DataFrame] = {}
    extra: dict[str, dict[str, object]] = {}
    for interval in data.settings.intervals:
        score, use, crossed = _interval_score(data, interval)
        units = data.units(use)
        rows = data.unit_sum(units)
        mis = data.unit_sum(units, score) / np.maximum(rows, 1.0)
        reason = data.scale_reason[units.series]
        defined = reason == SCALE_OK
        value = np.full(units.n, np.nan)
        np.divide(mis, data.scale[units.series], out=value, where=defined)
        mean, used = data.per_unit_mean(units, value, defined)
        too_few = np.bincount(units.group[reason == SCALE_TOO_FEW_ROWS], minlength=data.n_groups)
        zero = np.bincount(units.group[(reason != SCALE_OK) & (reason != SCALE_TOO_FEW_ROWS)],
                           minlength=data.n_groups)
        n = data.gsum(mask=use)
        frames[interval.label] = scaled_result(
            data.n_groups, mean, n, used, too_few, zero,
            n_crossed=data.gsum(mask=crossed).astype(np.int64),
        )
        extra[interval.label] = {"alpha": interval.alpha,
                                 "seasonal_period": data.settings.seasonal_period}
    return stack_variants(frames, extra)


def _shift(bound: Any, centre: float) -> Any:
    if bound is None:
        return None
    if isinstance(bound, tuple | list):
        return (centre + float(bound[0]), centre + float(bound[1]))
    return (centre - float(bound), centre + float(bound))


def _coverage_levels(configured: Levels | None, extras: Mapping[str, Any],
                     settings: MeasureSettings) -> Levels | None:
    """Configured levels bound the distance from the nominal level in percentage points: ``t``
    → ``[nominal − t, nominal + t]``, ``[low, high]`` → ``[nominal + low, nominal + high]``."""
    if configured is None:
        return None
    nominal = float(extras["nominal_pct"])
    return _shift(configured[0], nominal), _shift(configured[1], nominal)


def _coverage_breach_counts(extras: Mapping[str, Any], settings: MeasureSettings) -> bool:
    """A coverage breach counts only when the binomial test says chance hardly explains it."""
    p_value = extras.get("p_value")
    return p_value is not None and float(p_value) < settings.coverage_test_level


def _coverage_facts(details: Mapping[str, Any], unit: str | None) -> str:
    if details.get("p_value") is None:
        return ""
    return (f"Nominal {format_number(details['nominal_pct'])} %; binomial p = "
            f"{float(details['p_value']):.2g}.")


_MEASURES: tuple[dict[str, Any], ...] = (
    dict(id="interval_coverage", label="Interval coverage %", unit="%", direction="centered",
         compute=coverage_from_data, needs=frozenset({"intervals"}), levels=_coverage_levels,
         breach_counts=_coverage_breach_counts, facts=_coverage_facts, order=10,
         wording="level"),
    dict(id="pinball", label="Pinball loss", unit="units", direction="lower",
         compute=pinball_from_data, needs=frozenset({"quantiles"}), order=11),
    dict(id="mis", label="Interval score", unit="units", direction="lower",
         compute=mis_from_data, needs=frozenset({"intervals"})),
    dict(id="msis", label="MSIS", unit="", direction="lower", compute=msis_from_data,
         needs=frozenset({"intervals", "history"}), facts=skipped_series_facts),
)
_DESCRIPTIONS = {
    "interval_coverage": "100·mean(1{L ≤ actual ≤ U}) in percent for each central interval, "
    "pooled, judged by its distance from the nominal level (pp) and the one-sided binomial "
    "test (as scipy.stats.binomtest). docs/measures.md §13 (Christoffersen 1998).",
    "pinball": "Mean pinball loss of each quantile forecast, pooled, in data units; at τ = 0.5 "
    "it is MAE/2. docs/measures.md §14 (Koenker & Bassett 1978).",
    "mis": "Mean interval score (U − L) + (2/α)·(miss below L or above U), pooled, in data "
    "units. docs/measures.md §15 (Gneiting & Raftery 2007).",
    "msis": "Mean interval score / s per series (s as for MASE), then the unweighted mean. "
    "docs/measures.md §15 (M4, 2020).",
}
declare(_MEASURES, _DESCRIPTIONS)
