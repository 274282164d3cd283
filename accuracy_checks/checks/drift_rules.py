"""The drift rules, pure numpy on a figures × cycles matrix: control limits and breach streaks.

:func:`control_limits` judges each cycle (column, oldest first) of every figure (row) against
the mean ± k·sd of its own trailing cycles; :func:`breach_streaks` counts the consecutive
breached cycles at the end of each row. Both are fully vectorised (prefix sums, no loop over
figures or cycles) and know nothing of results or the store: :mod:`.drift` lays a run's
figures and their recorded trail out as matrices and words the outcome (docs/checks.md).

**False alarms.** For a stable figure whose cycle-to-cycle values are independent and normal,
a new value minus the mean of n earlier ones, divided by their sample standard deviation
times √(1 + 1/n), follows Student's t with n − 1 degrees of freedom (the prediction interval
of a new observation). So a one-sided limit at k standard deviations is crossed with
probability ``P(T_{n−1} > k / √(1 + 1/n))`` (:func:`false_alarm_rate`): with the defaults
N = 13, k = 3 that is 0.68 % per figure per cycle (1.27 % while only the minimum history of 8
cycles exists; k = 4: 0.11 %). Figures judged by their distance from an ideal value can worsen
on either side: about twice that. Consecutive accuracy windows overlap (a 4-period window
shares 3 periods with the previous cycle's), so a figure's values are positively correlated
from cycle to cycle: the trailing sd then understates the spread of a new value and false
alarms are more frequent (1.2 % instead of 0.68 % for a 4-period window, simulated), and a
step change in the forecast's errors enters the figure over ``evaluation.window`` cycles: a
step of 3 standard deviations of the period-level error is caught within 4 cycles in 91 % of
simulated histories, an abrupt step of 6 standard deviations of the figure in its first cycle
in 99.5 %. Expect about ``figures × rate`` drift warnings per cycle by chance: with many
segments, raise ``k``.

**Why at least 8 earlier cycles by default.** The standard deviation of n values is itself
uncertain: its relative standard error is about 1/√(2(n − 1)), 27 % at n = 8 but 50 % at
n = 3, and the false-alarm rate at k = 3 grows from 1.27 % (n = 8) to 2.6 % (n = 5) and 6.1 %
(n = 3). Eight cycles (two months of weekly cycles) keeps a young figure's limits honest;
fewer makes the rule mostly noise.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np

__all__ = ["ControlLimits", "breach_streaks", "control_limits", "false_alarm_rate"]


@dataclass(frozen=True)
class ControlLimits:
    """The control-limit rule over cycles: arrays of shape (figures, cycles).

    ``mean``/``sd``/``n`` describe the baseline each cycle was judged against (its ``n``
    earlier values, at most N), ``lower``/``upper`` the limits ``mean ∓ k·sd``; ``judged``
    is whether the cycle had a value and at least ``min_history`` earlier values, ``signal``
    whether its value worsened beyond a limit.
    """

    mean: np.ndarray
    sd: np.ndarray
    n: np.ndarray
    lower: np.ndarray
    upper: np.ndarray
    judged: np.ndarray
    signal: np.ndarray


def control_limits(values: np.ndarray, *, cycles: int, k: float, min_history: int,
                   direction: str | Sequence[str] | np.ndarray = "lower",
                   ideal: float | np.ndarray = 0.0) -> ControlLimits:
    """Judge every cycle (column, oldest first) of ``values`` against its trailing cycles.

    ``values`` has one row per figure and one column per cycle (NaN: no value that cycle).
    A cycle's baseline is the last ``cycles`` (N) earlier values of its row (cycles without
    a value are passed over); it is judged once the baseline holds ``min_history`` values,
    against ``mean ± k·sd`` (sample sd, ddof = 1). ``direction`` (per figure, or one for
    all): ``lower`` (only above the upper limit counts), ``higher`` (only below the lower
    limit) or ``centered`` (beyond either limit and further from ``ideal`` than the mean).

    Fully vectorised: prefix sums over each row's values in time order (centred on the row's
    mean first, so the sums of squares keep their precision).

    >>> v = np.array([[10, 11, 9, 10, 11, 9, 10, 11, 9, 30, 10.5]])
    >>> out = control_limits(v, cycles=8, k=3, min_history=8)
    >>> out.signal[0].astype(int).tolist()
    [0, 0, 0, 0, 0, 0, 0, 0, 0, 1, 0]
    >>> round(float(out.upper[0, 9]), 3)  # mean 10 of the last 8, sd √(6/7) (ddof = 1)
    12.777
    >>> bool(control_limits(-v, cycles=8, k=3, min_history=8).signal[0, 9])  # lower is better
    False
    """
    x = np.asarray(values, dtype=np.float64)
    if x.ndim != 2:
        raise ValueError("values must be a 2-d array: figures × cycles")
    if not 2 <= min_history <= cycles:
        raise ValueError(f"need 2 ≤ min_history ≤ cycles; got {min_history} and {cycles}")
    n_fig = x.shape[0]
    kind = np.broadcast_to(np.asarray(direction), (n_fig,))
    ideal_v = np.broadcast_to(np.asarray(ideal, dtype=np.float64), (n_fig,))
    ok = np.isfinite(x)
    count = ok.sum(axis=1)
    centre = np.divide(np.where(ok, x, 0.0).sum(axis=1), count, out=np.zeros(n_fig),
                       where=count > 0)
    xc = np.where(ok, x - centre[:, None], 0.0)
    order = np.argsort(~ok, axis=1, kind="stable")  # each row's values first, in time order
    packed = np.take_along_axis(xc, order, axis=1)
    zero = np.zeros((n_fig, 1))
    p1 = np.concatenate([zero, np.cumsum(packed, axis=1)], axis=1)
    p2 = np.concatenate([zero, np.cumsum(packed * packed, axis=1)], axis=1)
    before = np.cumsum(ok, axis=1) - ok  # values strictly before each cycle
    start = np.maximum(before - cycles, 0)
    n = before - start
    s1 = np.take_along_axis(p1, before, axis=1) - np.take_along_axis(p1, start, axis=1)
    s2 = np.take_along_axis(p2, before, axis=1) - np.take_along_axis(p2, start, axis=1)
    mean_c = np.divide(s1, n, out=np.full(x.shape, np.nan), where=n > 0)
    ss = np.maximum(s2 - np.where(n > 0, s1 * mean_c, 0.0), 0.0)
    sd = np.sqrt(np.divide(ss, n - 1, out=np.full(x.shape, np.nan), where=n > 1))
    mean = mean_c + centre[:, None]
    lower, upper = mean - k * sd, mean + k * sd
    judged = ok & (n >= min_history)
    up, down = x > upper, x < lower
    further = np.abs(x - ideal_v[:, None]) > np.abs(mean - ideal_v[:, None])
    beyond = np.where((kind == "lower")[:, None], up,
                      np.where((kind == "higher")[:, None], down, (up | down) & further))
    return ControlLimits(mean, sd, n, lower, upper, judged, judged & beyond)


def false_alarm_rate(n: int, k: float, *, sides: int = 1) -> float:
    """Chance that a stable, independent normal figure crosses a limit at ``k`` sd of ``n``
    earlier values: ``sides · P(T_{n−1} > k / √(1 + 1/n))`` (Student's t; the prediction
    interval of a new observation).

    >>> round(false_alarm_rate(13, 3.0) * 100, 2), round(false_alarm_rate(8, 3.0) * 100, 2)
    (0.68, 1.27)
    """
    from scipy.special import stdtr

    return float(sides * stdtr(n - 1, -k / math.sqrt(1 + 1 / n)))


def breach_streaks(states: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Consecutive breached cycles at the end of each row, and where that run starts.

    ``states`` (figures × cycles, oldest first): 1 breached, 0 not breached (``pass``), NaN no
    judgement (skipped, error, absent: neither breaks nor extends a run). Returns the length of
    the run of breaches since the last pass, and the column of its first breach (−1 if none).

    >>> s = np.array([[1, 0, 1, np.nan, 1, 1], [0, 0, 0, 0, 0, 0], [1, 1, 1, 1, 1, 1.0]])
    >>> n, first = breach_streaks(s)
    >>> n.tolist(), first.tolist()
    ([3, 0, 6], [2, -1, 0])
    """
    s = np.asarray(states, dtype=np.float64)
    col = np.arange(s.shape[1])
    last_pass = np.where(s == 0, col, -1).max(axis=1, initial=-1)
    after = (s == 1) & (col > last_pass[:, None])
    n = after.sum(axis=1)
    first = np.where(after, col, s.shape[1]).min(axis=1, initial=s.shape[1])
    return n, np.where(n > 0, first, -1)
