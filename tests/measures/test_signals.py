"""Tracking-signal limits by Monte Carlo, through the engine's own code, and the judging of the
tracking signal in the window (scaled and constant limits).

docs/measures.md §10: on unbiased iid normal errors P(|TS| > 4) = 0.17, 0.27, 0.39, 0.54, 0.66 at
n = 5, 8, 13, 26, 52 (200k runs), and the 95 % point of |TS| is 2.34√n at n = 8 and 2.45√n at
n = 52; the recommended limit is 1.96·1.25·√n. docs/measures.md §11: the steady-state 95 %/99 %
points of Trigg's |T| are 0.54/0.67 at α = 0.1 and 0.74/0.86 at α = 0.2.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from accuracy_checks.measures.data import MeasureData, MeasureSettings
from accuracy_checks.measures.registry import get_measure
from accuracy_checks.measures.signals import scaled_limit, tracking_signal_from_data

RUNS = 20_000


def simulated(n: int, runs: int = RUNS, seed: int = 0) -> MeasureData:
    """``runs`` groups of one series with ``n`` periods of unbiased N(0, 1) errors."""
    rng = np.random.default_rng(seed + n)
    errors = rng.standard_normal(runs * n)
    rows = pd.DataFrame({
        "period": np.tile(pd.date_range("2026-01-05", periods=n, freq="W-MON"), runs),
        "actual": 100.0 + errors,
        "forecast": np.full(runs * n, 100.0),
        "segment": "s",
    })
    group = np.repeat(np.arange(runs), n)
    groups = pd.DataFrame({"lag": np.ones(runs, dtype=int), "segment": "s"})
    return MeasureData(rows, group, groups, group, runs, MeasureSettings())


def false_alarms(n: int, settings: MeasureSettings) -> float:
    """Share of runs whose tracking signal breaks the warn level the engine would use."""
    data = simulated(n)
    out = tracking_signal_from_data(data)
    levels = get_measure("tracking_signal").levels
    assert levels is not None
    warn, _ = levels(None, {"window_periods": n}, settings)
    assert out["window_periods"].eq(n).all()
    return float((np.abs(out["value"].to_numpy()) > warn).mean())


@pytest.mark.parametrize("n", [8, 13, 52])
def test_scaled_limit_false_alarm_rate_is_near_nominal(n: int) -> None:
    # Monte Carlo (docs/measures.md §10): the limit 1.96·1.25·√n fires on ~5 % of unbiased windows;
    # the 95 % point of |TS| is 2.34√n at n = 8 (so a little under 5 % there) and 2.45√n at
    # n = 52 (5 %). 20k runs: the standard error of a 5 % rate is 0.15 pp.
    rate = false_alarms(n, MeasureSettings())
    assert 0.03 <= rate <= 0.06, rate


@pytest.mark.parametrize(("n", "rate"), [(8, 0.27), (13, 0.39), (52, 0.66)])
def test_constant_limit_fires_far_too_often_on_long_windows(n: int, rate: float) -> None:
    # docs/measures.md §10: P(|TS| > 4) = 0.27, 0.39, 0.66 at n = 8, 13, 52 (Monte Carlo, 200k
    # runs).
    got = false_alarms(n, MeasureSettings(tracking_limit="constant"))
    assert got == pytest.approx(rate, abs=0.015)


def test_a_constant_limit_cannot_fire_on_short_windows() -> None:
    # docs/measures.md §10: |TS| ≤ n, so ±4 cannot fire when n ≤ 4 — even on fully biased errors.
    data = simulated(4, runs=50)
    data.rows["actual"] = 110.0  # every error +10
    out = tracking_signal_from_data(MeasureData(data.rows, data.group, data.groups, data.series,
                                                data.n_series, data.settings))
    assert np.allclose(out["value"], 4.0)


def test_scaled_limit_values() -> None:
    # 1.96 · 1.25 · √n (docs/measures.md §10): 6.93 at n = 8, 8.83 at 13, 17.67 at 52.
    assert [round(scaled_limit(1.96, n), 2) for n in (8, 13, 52)] == [6.93, 8.83, 17.67]


@pytest.mark.parametrize(("alpha", "p95", "p99"), [(0.1, 0.54, 0.67), (0.2, 0.74, 0.86)])
def test_trigg_steady_state_percentiles(alpha: float, p95: float, p99: float) -> None:
    # docs/measures.md §11: simulated steady-state 95 %/99 % points of |T| (iid normal errors); here
    # through the engine's closed form on 200 periods (the start value M0 has decayed by then).
    from accuracy_checks.measures.signals import trigg_from_data

    data = simulated(200, runs=5_000, seed=11)
    settings = MeasureSettings(trigg_alpha=alpha)
    data = MeasureData(data.rows, data.group, data.groups, data.series, data.n_series, settings)
    t = np.abs(trigg_from_data(data)["value"].to_numpy())
    assert np.quantile(t, 0.95) == pytest.approx(p95, abs=0.025)
    assert np.quantile(t, 0.99) == pytest.approx(p99, abs=0.035)
