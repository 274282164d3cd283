"""The drift rules on constructed and simulated histories: control limits (trailing mean and
sample sd, only worsening counts, centred figures), their false-alarm rate against Student's t,
a step change caught within the evaluation window, and breach streaks."""

from __future__ import annotations

import numpy as np
import pytest
from scipy import stats

from accuracy_checks.checks.drift_rules import breach_streaks, control_limits, false_alarm_rate


def test_limits_are_trailing_mean_and_sample_sd_of_the_last_n_values() -> None:
    rng = np.random.default_rng(3)
    v = rng.normal(20, 2, size=(5, 30))
    v[1, [4, 9, 10, 20]] = np.nan  # cycles without a value are passed over
    out = control_limits(v, cycles=8, k=2.5, min_history=5)
    for i in range(5):
        seen = [x for x in v[i] if np.isfinite(x)]
        cols = np.flatnonzero(np.isfinite(v[i]))
        for j, c in enumerate(cols):
            window = seen[max(0, j - 8):j]
            assert out.n[i, c] == len(window)
            if len(window) >= 2:
                # reference: numpy's mean and sample standard deviation (ddof = 1)
                assert out.mean[i, c] == pytest.approx(np.mean(window), rel=1e-9)
                assert out.sd[i, c] == pytest.approx(np.std(window, ddof=1), rel=1e-9)
                assert out.upper[i, c] == pytest.approx(
                    np.mean(window) + 2.5 * np.std(window, ddof=1), rel=1e-9)
            assert out.judged[i, c] == (len(window) >= 5)
    assert not out.judged[~np.isfinite(v)].any() and not out.signal[~np.isfinite(v)].any()


def test_a_step_is_flagged_on_its_first_cycle_and_only_worsening_counts() -> None:
    stable = [20.0, 21.0, 19.0, 20.5, 19.5, 20.0, 21.0, 19.0, 20.0, 20.5]
    up = np.array([[*stable, 26.0, 26.5]])  # WAPE jumps 6 points: ~7 sd
    down = np.array([[*stable, 14.0]])
    lower = control_limits(up, cycles=8, k=3, min_history=8)
    assert lower.signal[0].tolist() == [False] * 10 + [True, False]  # step, then in baseline
    assert not control_limits(down, cycles=8, k=3, min_history=8).signal.any()  # improved
    # higher is better (forecast value added): only a fall counts
    assert control_limits(down, cycles=8, k=3, min_history=8, direction="higher").signal[0, 10]
    assert not control_limits(up, cycles=8, k=3, min_history=8, direction="higher").signal.any()
    # centred (bias): beyond a limit and further from 0 than the mean
    bias = np.array([[-8.0, -7.5, -8.5, -8.0, -7.0, -9.0, -8.0, -8.2, -3.0],
                     [-8.0, -7.5, -8.5, -8.0, -7.0, -9.0, -8.0, -8.2, -14.0],
                     [0.5, -0.5, 0.2, -0.3, 0.4, -0.1, 0.0, 0.3, 4.0]])
    got = control_limits(bias, cycles=8, k=3, min_history=8, direction="centered")
    assert got.signal[:, -1].tolist() == [False, True, True]
    # interval coverage aims at its nominal level: moving towards it is no drift
    cover = np.array([[70.0, 71, 69, 70, 70.5, 69.5, 70, 71, 79.0],
                      [70.0, 71, 69, 70, 70.5, 69.5, 70, 71, 62.0]])
    got = control_limits(cover, cycles=8, k=3, min_history=8, direction="centered", ideal=80)
    assert got.signal[:, -1].tolist() == [False, True]


def test_too_little_history_is_not_judged() -> None:
    v = np.array([[10.0, 10.5, 9.5, 50.0, 10.0]])
    out = control_limits(v, cycles=8, k=3, min_history=4)
    assert out.judged[0].tolist() == [False, False, False, False, True]
    assert not out.signal.any()
    with pytest.raises(ValueError, match="min_history"):
        control_limits(v, cycles=3, k=3, min_history=4)


def test_stable_noisy_history_stays_quiet_at_the_t_distribution_rate() -> None:
    # For iid normal values, (x − mean_n)/(s_n·√(1 + 1/n)) ~ Student t(n − 1): the prediction
    # interval of a new observation (standard result; e.g. Hahn & Meeker (1991) "Statistical
    # Intervals", Wiley, ch. 4 — from memory). Reference: scipy.stats.t.sf.
    rng = np.random.default_rng(20260302)
    n, k = 13, 3.0
    values = rng.normal(25.0, 2.0, size=(20_000, 40))
    out = control_limits(values, cycles=n, k=k, min_history=8)
    full = out.n == n
    expected = stats.t.sf(k / np.sqrt(1 + 1 / n), n - 1)
    assert false_alarm_rate(n, k) == pytest.approx(expected, rel=1e-9)
    rate = out.signal[full].mean()
    trials = int(full.sum())
    assert abs(rate - expected) < 5 * np.sqrt(expected * (1 - expected) / trials)
    assert expected == pytest.approx(0.0068, abs=5e-5)  # the documented default rate
    # at the minimum history (8 earlier values) the rate is the t rate with n = 8
    at_min = out.n == 8
    assert out.signal[at_min].mean() == pytest.approx(false_alarm_rate(8, k), rel=0.2)
    # centred figures can worsen on either side: about twice the one-sided rate
    two = control_limits(values - 25.0, cycles=n, k=k, min_history=8, direction="centered")
    assert two.signal[full].mean() == pytest.approx(2 * expected, rel=0.15)


def test_a_step_change_is_caught_within_the_evaluation_window() -> None:
    rng = np.random.default_rng(7)
    figures, cycles, step_at = 4000, 40, 25
    # abrupt: the figure itself jumps 6 sd; caught on the step's first cycle
    v = rng.normal(0, 1, size=(figures, cycles))
    v[:, step_at:] += 6.0
    out = control_limits(v, cycles=13, k=3, min_history=8)
    # P(T_12 > (3 − 6)/√(1 + 1/13)) = 0.99 (scipy.stats.t)
    assert out.signal[:, step_at].mean() > 0.98
    # gradual: the period errors step by 3 sd and each cycle's figure is the mean of the last
    # W = 4 periods (evaluation.window): the step enters over 4 cycles, caught within them
    window = 4
    periods = rng.normal(0, 1, size=(figures, cycles + window - 1))
    periods[:, step_at + window - 1:] += 3.0
    figure = np.lib.stride_tricks.sliding_window_view(periods, window, axis=1).mean(axis=2)
    steady = np.lib.stride_tricks.sliding_window_view(
        rng.normal(0, 1, size=(figures, cycles + window - 1)), window, axis=1).mean(axis=2)
    caught = control_limits(figure, cycles=13, k=3, min_history=8).signal
    quiet = control_limits(steady, cycles=13, k=3, min_history=8).signal
    within = caught[:, step_at:step_at + window].any(axis=1).mean()
    by_chance = quiet[:, step_at:step_at + window].any(axis=1).mean()
    assert within > 0.85 and by_chance < 0.1


def test_breach_streaks_skip_unjudged_cycles() -> None:
    nan = np.nan
    states = np.array([[1, 1, nan, 1, 1.0], [1, 0, 1, 1, 1.0], [nan, nan, nan, nan, 1.0]])
    n, first = breach_streaks(states)
    assert n.tolist() == [4, 3, 1] and first.tolist() == [0, 2, 4]
