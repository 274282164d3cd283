"""Property test: every registered measure, computed from ``error_stats``, equals a direct numpy
computation per group, on random frames with zero and negative actuals and NaN rows."""

from __future__ import annotations

import math
from collections.abc import Callable

import numpy as np
import pandas as pd
from hypothesis import given, settings
from hypothesis import strategies as st

from accuracy_checks.measures.registry import MEASURES
from accuracy_checks.measures.stats import error_stats, merge_stats

NAN = float("nan")

# Direct numpy formulas from METRICS.md entries 1–8 on one group's rows (NaN rows already
# dropped). Each returns (value, reason, absolute tolerance scale).
Direct = Callable[[np.ndarray, np.ndarray], tuple[float, str | None, float]]


def _me(y: np.ndarray, e: np.ndarray) -> tuple[float, str | None, float]:
    return float(np.mean(e)), None, float(np.max(np.abs(e)))


def _bias_pct(y: np.ndarray, e: np.ndarray) -> tuple[float, str | None, float]:
    den = np.sum(np.abs(y))
    if den == 0:
        return NAN, "zero_denominator", 0.0
    return float(100 * np.sum(e) / den), None, float(100 * np.sum(np.abs(e)) / den)


def _mae(y: np.ndarray, e: np.ndarray) -> tuple[float, str | None, float]:
    return float(np.mean(np.abs(e))), None, 0.0


def _mape(y: np.ndarray, e: np.ndarray) -> tuple[float, str | None, float]:
    if np.any(y == 0):
        return NAN, "zero_actual", 0.0
    return float(100 * np.mean(np.abs(e) / np.abs(y))), None, 0.0


def _wape(y: np.ndarray, e: np.ndarray) -> tuple[float, str | None, float]:
    den = np.sum(np.abs(y))
    if den == 0:
        return NAN, "zero_denominator", 0.0
    return float(100 * np.sum(np.abs(e)) / den), None, 0.0


def _rmse(y: np.ndarray, e: np.ndarray) -> tuple[float, str | None, float]:
    return float(np.sqrt(np.mean(e * e))), None, 0.0


def _sde(y: np.ndarray, e: np.ndarray) -> tuple[float, str | None, float]:
    if e.size < 2:
        return NAN, "too_few_rows", 0.0
    # np.std(ddof=1) = statsmodels stde(ddof=1), METRICS.md 8
    return float(np.std(e, ddof=1)), None, float(np.max(np.abs(e)))


DIRECT: dict[str, Direct] = {
    "me": _me,
    "bias_pct": _bias_pct,
    "mae": _mae,
    "mape": _mape,
    "wape": _wape,
    "rmse": _rmse,
    "sde": _sde,
}

values = st.one_of(
    st.just(0.0),
    st.just(NAN),
    st.integers(-50, 500).map(float),
    st.floats(-1e4, 1e4, allow_nan=False, allow_subnormal=False),
)
rows = st.lists(
    st.tuples(st.integers(0, 4), values, values, st.booleans()), min_size=1, max_size=40
)


def _check(stats: pd.DataFrame, frame: pd.DataFrame) -> None:
    stats = stats.set_index("group")
    assert set(MEASURES) <= set(DIRECT), "add a direct computation for each new measure"
    groups: dict[int, tuple[np.ndarray, np.ndarray]] = {}
    for group, rows_of in frame.groupby("group"):
        y = rows_of["actual"].to_numpy()
        f = rows_of["forecast"].to_numpy()
        keep = ~(np.isnan(y) | np.isnan(f))
        groups[int(group)] = (y[keep], y[keep] - f[keep])
    assert sorted(groups) == stats.index.tolist()
    for measure_id, measure in MEASURES.items():
        out = measure.from_stats(stats).to_dict(orient="index")
        for group, (y, e) in groups.items():
            reason: str | None
            if y.size == 0:
                want, reason, scale = NAN, "no_data", 0.0
            else:
                want, reason, scale = DIRECT[measure_id](y, e)
            got = out[group]
            assert got["reason"] == reason, (measure_id, group)
            if math.isnan(want):
                assert math.isnan(got["value"]), (measure_id, group)
            else:
                tol = 1e-9 * abs(want) + 1e-9 * scale + 1e-12
                assert abs(got["value"] - want) <= tol, (measure_id, group, got["value"], want)
            if measure_id == "mape":
                nonzero = y != 0
                assert got["n_zero_actual"] == int(np.sum(~nonzero))
                if nonzero.any():
                    ref = 100 * np.mean(np.abs(e[nonzero]) / np.abs(y[nonzero]))
                    assert abs(got["mape_nonzero"] - ref) <= 1e-9 * ref + 1e-12
                else:
                    assert math.isnan(got["mape_nonzero"])


@settings(max_examples=60, deadline=None)
@given(rows)
def test_registry_measures_equal_direct_numpy(data: list[tuple[int, float, float, bool]]) -> None:
    frame = pd.DataFrame(data, columns=["group", "actual", "forecast", "part"])
    _check(error_stats(frame, ["group"]), frame)
    # The same holds after splitting the rows into two partitions and merging their stats.
    parts = [error_stats(frame[frame["part"] == side], ["group"]) for side in (False, True)]
    _check(merge_stats(parts, ["group"]), frame)
