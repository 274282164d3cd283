"""Property: every segment's (and "*"'s) accuracy results equal a direct numpy computation of
the docs/measures.md formulas on the same rows, for random evaluation frames."""

from __future__ import annotations

import json
import re
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from accuracy_checks.checks.accuracy import accuracy_results
from accuracy_checks.checks.judge import Thresholds
from accuracy_checks.measures import CORE_MEASURES
from accuracy_checks.measures.catalogue import parse_config

CONFIG = parse_config(
    "version: 1\n"
    "forecast: {path: f.csv, keys: [sku], period: p, value: v, issued: i}\n"
    "actuals: {path: a.csv, period: p, value: v}\n"
    "frequency: D\nhorizon: 3\nevaluation: {lags: [1, 2]}\n",
    source=Path("/x/c.yaml"),
)


def direct(y: np.ndarray, f: np.ndarray) -> dict[str, float | None]:
    """docs/measures.md §1–8 written out with numpy (NaN rows dropped first)."""
    keep = ~(np.isnan(y) | np.isnan(f))
    y, f = y[keep], f[keep]
    e = y - f
    n = len(e)
    if n == 0:
        return dict.fromkeys(CORE_MEASURES)
    sy = np.abs(y).sum()
    return {
        "me": e.mean(),
        "bias_pct": 100 * e.sum() / sy if sy else None,
        "mae": np.abs(e).mean(),
        "mape": 100 * np.mean(np.abs(e) / np.abs(y)) if (y != 0).all() else None,
        "wape": 100 * np.abs(e).sum() / sy if sy else None,
        "rmse": np.sqrt(np.mean(e**2)),
        "sde": np.std(e, ddof=1) if n >= 2 else None,
    }


# demand-like values in hundredths (no subnormals: a 1e-308 denominator overflows numpy itself)
values = st.one_of(st.just(0.0), st.integers(-10**6, 10**6).map(lambda i: i / 100),
                   st.just(np.nan))


@settings(max_examples=40, deadline=None)
@given(data=st.data(), n=st.integers(1, 40), n_seg=st.integers(1, 3))
def test_segment_measures_equal_numpy(data: st.DataObject, n: int, n_seg: int) -> None:
    y = np.array(data.draw(st.lists(values, min_size=n, max_size=n)))
    f = np.array(data.draw(st.lists(values, min_size=n, max_size=n)))
    seg = np.array(data.draw(st.lists(st.sampled_from(["a", "b", "c"][:n_seg]),
                                      min_size=n, max_size=n)))
    lag = np.array(data.draw(st.lists(st.sampled_from([1, 2]), min_size=n, max_size=n)))
    frame = pd.DataFrame({"sku": [f"s{i % 7}" for i in range(n)], "segment": seg, "lag": lag,
                          "forecast": f, "actual": y})
    results = accuracy_results(frame, keys=["sku"], book=Thresholds(CONFIG),
                               measures=CORE_MEASURES, lags=[1, 2], min_obs=1,
                               window=[pd.Timestamp("2026-01-01")])
    # every segment seen (and "*") at every configured lag, with or without rows there
    groups = [(s, lg) for s in [*sorted(set(seg)), "*"] for lg in (1, 2)]
    seen = 0
    for s, lg in groups:
        rows = (frame["lag"] == lg) & ((frame["segment"] == s) if s != "*" else True)
        want = direct(y[rows.to_numpy()], f[rows.to_numpy()])
        n_used = int((~(np.isnan(y) | np.isnan(f)))[rows.to_numpy()].sum())
        for m in CORE_MEASURES:
            (got,) = [r for r in results if r.segment == s and r.lag == lg and r.measure == m]
            seen += 1
            assert got.n_obs == n_used
            if n_used < 1:
                assert got.status == "skipped"
            elif want[m] is None:
                assert got.value is None and got.reason
            else:
                assert got.value == pytest.approx(want[m], rel=1e-9, abs=1e-9)
    assert seen == len(results)


HUGE_CONFIG = parse_config(
    "version: 1\n"
    "forecast: {path: f.csv, keys: [sku], period: p, value: v, issued: i}\n"
    "actuals: {path: a.csv, period: p, value: v}\n"
    "frequency: D\nhorizon: 3\nevaluation: {lags: [1]}\n"
    "thresholds: {default: {wape: {warn: 25, fail: 40}, me: {warn: 5}}}\n",
    source=Path("/x/c.yaml"),
)
#: ordinary values, and finite values so large that their errors leave the float64 range
huge_values = st.one_of(values, st.sampled_from([1e308, -1e308, 3e307, 1e200, -1e155]))
_LEVEL_STATUS = {"wape": "fail", "me": "warn"}


def _sequential_overflow(y: np.ndarray, f: np.ndarray) -> bool:
    """Whether a float64 sum in row order (as ``np.bincount`` adds) of e, |e|, e², |y| or
    |e|/|y| leaves the float64 range (NaN rows dropped)."""
    keep = ~(np.isnan(y) | np.isnan(f))
    with np.errstate(over="ignore", invalid="ignore", divide="ignore"):
        e = y[keep] - f[keep]
        ape = np.where(y[keep] != 0, np.abs(e) / np.abs(np.where(y[keep] != 0, y[keep], 1)), 0)
        terms = [e, np.abs(e), e * e, np.abs(y[keep]), ape]
        totals = [0.0] * len(terms)
        for i, column in enumerate(terms):
            for v in column.tolist():
                totals[i] += v
    return not all(np.isfinite(totals))


@settings(max_examples=60, deadline=None)
@given(data=st.data(), n=st.integers(1, 12))
def test_huge_values_overflow_visibly_and_leave_other_groups_exact(data: st.DataObject,
                                                                   n: int) -> None:
    """A group whose sums leave the float64 range is judged beyond its level (reason
    ``overflow``, no value), never "no data"; every other group still equals numpy."""
    y = np.array(data.draw(st.lists(huge_values, min_size=n, max_size=n)))
    f = np.array(data.draw(st.lists(huge_values, min_size=n, max_size=n)))
    seg = np.array(data.draw(st.lists(st.sampled_from(["a", "b"]), min_size=n, max_size=n)))
    frame = pd.DataFrame({"sku": [f"s{i % 5}" for i in range(n)], "segment": seg, "lag": 1,
                          "forecast": f, "actual": y})
    results = accuracy_results(frame, keys=["sku"], book=Thresholds(HUGE_CONFIG),
                               measures=CORE_MEASURES, lags=[1], min_obs=1,
                               window=[pd.Timestamp("2026-01-01")])
    for s in [*sorted(set(seg)), "*"]:
        rows = ((frame["segment"] == s) if s != "*" else frame["segment"].notna()).to_numpy()
        overflow = _sequential_overflow(y[rows], f[rows])
        with np.errstate(all="ignore"):  # None where a rule leaves the figure undefined
            want = direct(y[rows], f[rows])
        for m in CORE_MEASURES:
            (got,) = [r for r in results if r.segment == s and r.measure == m]
            assert not re.search(r"\b(nan|inf)\b", got.message, re.IGNORECASE), got.message
            json.dumps(got.to_dict(), allow_nan=False)
            if got.n_obs == 0:
                continue
            if want[m] is None:  # zero denominator, zero actual, one row: not an overflow
                assert got.value is None and got.reason not in (None, "overflow")
            elif overflow:
                assert (got.value, got.reason) == (None, "overflow"), (s, m, got)
                assert got.status == _LEVEL_STATUS.get(m, "skipped")
            else:
                assert got.reason is None
                assert got.value == pytest.approx(want[m], rel=1e-9, abs=1e-9), (s, m)
