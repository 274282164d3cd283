"""Property tests: every registered measure equals a direct computation of its docs/measures.md
formula, on random data with zero, negative and missing values.

1. The core measures from ``error_stats`` (and from merged partitions) against numpy per group.
2. Every registry measure through the engine path (evaluation rows → ``accuracy_results`` with
   the actuals index) against plain-Python loops per segment and for all series, on random
   series with histories of random length (gaps, zeros), crossed intervals and unit costs.
"""

from __future__ import annotations

import math
from collections.abc import Callable
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd
from hypothesis import given, settings
from hypothesis import strategies as st

from accuracy_checks.checks.accuracy import accuracy_results
from accuracy_checks.checks.judge import Thresholds
from accuracy_checks.evaluation.baselines import ActualsIndex
from accuracy_checks.measures.catalogue import parse_config
from accuracy_checks.measures.data import CostTable, MeasureSettings
from accuracy_checks.measures.registry import MEASURES, registered_measures
from accuracy_checks.measures.stats import error_stats, merge_stats

NAN = float("nan")

# ---------------------------------------------------------------------------- 1. core, pooled

# Direct numpy formulas from docs/measures.md §1–8 on one group's rows (NaN rows already
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
    # np.std(ddof=1) = statsmodels stde(ddof=1), docs/measures.md §8
    return float(np.std(e, ddof=1)), None, float(np.max(np.abs(e)))


POOLED: dict[str, Direct] = {
    "me": _me,
    "bias_pct": _bias_pct,
    "mae": _mae,
    "mape": _mape,
    "wape": _wape,
    "rmse": _rmse,
    "sde": _sde,
}

# demand-like values in hundredths, zeros and NaN (no subnormal or near-overflow magnitudes:
# 100·Σe/Σ|y| overflows numpy itself for |y| ≈ 1e-308)
values = st.one_of(st.just(0.0), st.just(NAN), st.integers(-50, 500).map(float),
                   st.integers(-10**6, 10**6).map(lambda i: i / 100))
rows = st.lists(
    st.tuples(st.integers(0, 4), values, values, st.booleans()), min_size=1, max_size=40
)


def _check_pooled(stats: pd.DataFrame, frame: pd.DataFrame) -> None:
    stats = stats.set_index("group")
    stats_measures = {k: m for k, m in MEASURES.items() if m.from_stats is not None}
    assert set(stats_measures) <= set(POOLED), "add a direct computation for each new measure"
    groups: dict[int, tuple[np.ndarray, np.ndarray]] = {}
    for group, rows_of in frame.groupby("group"):
        y = rows_of["actual"].to_numpy()
        f = rows_of["forecast"].to_numpy()
        keep = ~(np.isnan(y) | np.isnan(f))
        groups[int(group)] = (y[keep], y[keep] - f[keep])
    assert sorted(groups) == stats.index.tolist()
    for measure_id, measure in stats_measures.items():
        assert measure.from_stats is not None
        out = measure.from_stats(stats).to_dict(orient="index")
        for group, (y, e) in groups.items():
            reason: str | None
            if y.size == 0:
                want, reason, scale = NAN, "no_data", 0.0
            else:
                want, reason, scale = POOLED[measure_id](y, e)
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
def test_core_measures_equal_direct_numpy(data: list[tuple[int, float, float, bool]]) -> None:
    frame = pd.DataFrame(data, columns=["group", "actual", "forecast", "part"])
    _check_pooled(error_stats(frame, ["group"]), frame)
    # The same holds after splitting the rows into two partitions and merging their stats.
    parts = [error_stats(frame[frame["part"] == side], ["group"]) for side in (False, True)]
    _check_pooled(merge_stats(parts, ["group"]), frame)


# ---------------------------------------------------------------------------- 2. every measure

P = 10  # grid position of the one cycle's issue date (= its first target period)
START = pd.Timestamp("2025-01-06")
CONFIG = parse_config(
    "version: 1\n"
    "forecast: {path: f.csv, keys: [sku], period: p, value: v, issued: i}\n"
    "actuals: {path: a.csv, period: p, value: v}\n"
    "frequency: W-MON\nhorizon: 4\n",
    source=Path("/x/c.yaml"),
)
COSTS = CostTable(default=(1.0, 3.0), segments={"a": (2.0, 1.0)})


class Series:
    """One random series: segment, history by position (< P), and target rows."""

    def __init__(self, sku: str, segment: str, history: dict[int, float],
                 targets: list[tuple[int, float, float, float, float]]) -> None:
        self.sku, self.segment, self.history, self.targets = sku, segment, history, targets

    def hist(self, position: int) -> float:
        return self.history.get(position, NAN)


def _pooled_rows(series: list[Series]) -> list[tuple[Series, int, float, float, float, float]]:
    return [(s, t, y, f, lo, hi) for s in series for (t, y, f, lo, hi) in s.targets]


def _scale(s: Series, m: int) -> float:
    h = np.array([s.hist(p) for p in range(P)])
    d = np.abs(h[m:] - h[:-m])
    d = d[~np.isnan(d)]
    return float(d.mean()) if d.size else NAN


def _usable(rows: list[Any]) -> list[Any]:
    return [r for r in rows if not (math.isnan(r[2]) or math.isnan(r[3]))]


def _interval(rows: list[Any]) -> list[Any]:
    return [r for r in rows if not (math.isnan(r[2]) or math.isnan(r[4]) or math.isnan(r[5]))
            and r[4] <= r[5]]


def _per_series_mean(series: list[Series], value: Callable[[Series], float]) -> float:
    got = [value(s) for s in series]
    got = [v for v in got if not math.isnan(v)]
    return sum(got) / len(got) if got else NAN


def d_smape(series: list[Series], cfg: MeasureSettings) -> dict[str, float]:
    def one(s: Series) -> float:
        rows = _usable(_pooled_rows([s]))
        terms = [0.0 if abs(y) + abs(f) == 0 else 200 * abs(y - f) / (abs(y) + abs(f))
                 for _, _, y, f, _, _ in rows]
        return sum(terms) / len(terms) if terms else NAN
    return {"": _per_series_mean(series, one)}


def _scaled_mean(series: list[Series], m: int, rows_of: Callable[[list[Any]], list[Any]],
                 loss: Callable[[Any], float]) -> float:
    """The mean over series of (the mean ``loss`` of a series' ``rows_of`` rows) / its naive
    scale at season ``m``; a series with no rows or no positive scale is left out."""
    def one(s: Series) -> float:
        rows = rows_of(_pooled_rows([s]))
        scale = _scale(s, m)
        if not rows or math.isnan(scale) or scale == 0:
            return NAN
        return sum(loss(r) for r in rows) / len(rows) / scale
    return _per_series_mean(series, one)


def d_mase(series: list[Series], cfg: MeasureSettings) -> dict[str, float]:
    return {"": _scaled_mean(series, cfg.seasonal_period, _usable,
                             lambda r: abs(r[2] - r[3]))}


def _period_errors(series: list[Series]) -> list[float]:
    by: dict[int, float] = {}
    for _, t, y, f, _, _ in _usable(_pooled_rows(series)):
        by[t] = by.get(t, 0.0) + (y - f)
    return [by[t] for t in sorted(by)]


def d_tracking_signal(series: list[Series], cfg: MeasureSettings) -> dict[str, float]:
    e = _period_errors(series)
    if not e:
        return {"": NAN}
    mad = sum(abs(x) for x in e) / len(e)
    return {"": sum(e) / mad if mad > 0 else 0.0}


def d_trigg(series: list[Series], cfg: MeasureSettings) -> dict[str, float]:
    e = _period_errors(series)
    if not e:
        return {"": NAN}
    a = cfg.trigg_alpha
    smoothed, smoothed_abs = 0.0, sum(abs(x) for x in e) / len(e)
    for x in e:  # the recursion of docs/measures.md §11, row by row
        smoothed = a * x + (1 - a) * smoothed
        smoothed_abs = a * abs(x) + (1 - a) * smoothed_abs
    return {"": smoothed / smoothed_abs if smoothed_abs > 0 else 0.0}


def _fva(series: list[Series], baseline: Callable[[Series, int], float]) -> dict[str, float]:
    rows = [(y, f, baseline(s, t)) for s, t, y, f, _, _ in _usable(_pooled_rows(series))]
    rows = [r for r in rows if not math.isnan(r[2])]
    scale = sum(abs(y) for y, _, _ in rows)
    if not rows or scale == 0:
        return {"": NAN}
    return {"": 100 * (sum(abs(y - b) for y, _, b in rows)
                       - sum(abs(y - f) for y, f, _ in rows)) / scale}


def d_fva_naive(series: list[Series], cfg: MeasureSettings) -> dict[str, float]:
    def last(s: Series, t: int) -> float:
        known = [s.history[p] for p in sorted(s.history) if not math.isnan(s.history[p])]
        return known[-1] if known else NAN
    return _fva(series, last)


def d_fva_seasonal_naive(series: list[Series], cfg: MeasureSettings) -> dict[str, float]:
    m = cfg.seasonal_period

    def season(s: Series, t: int) -> float:
        return s.hist(t - m * math.ceil((t - (P - 1)) / m))
    return _fva(series, season)


def d_interval_coverage(series: list[Series], cfg: MeasureSettings) -> dict[str, float]:
    rows = _interval(_pooled_rows(series))
    if not rows:
        return {"80%": NAN}
    return {"80%": 100 * sum(lo <= y <= hi for _, _, y, _, lo, hi in rows) / len(rows)}


def d_pinball(series: list[Series], cfg: MeasureSettings) -> dict[str, float]:
    out = {}
    for tau, col in ((0.1, 4), (0.5, 3), (0.9, 5)):
        rows = [(r[2], r[col]) for r in _pooled_rows(series)
                if not (math.isnan(r[2]) or math.isnan(r[col]))]
        loss = [tau * (y - q) if y >= q else (tau - 1) * (y - q) for y, q in rows]
        out[f"q{tau:g}"] = sum(loss) / len(loss) if loss else NAN
    return out


def _score(y: float, lo: float, hi: float, alpha: float = 0.2) -> float:
    return (hi - lo) + (2 / alpha) * ((lo - y) * (y < lo) + (y - hi) * (y > hi))


def d_mis(series: list[Series], cfg: MeasureSettings) -> dict[str, float]:
    rows = _interval(_pooled_rows(series))
    return {"80%": sum(_score(y, lo, hi) for _, _, y, _, lo, hi in rows) / len(rows)
            if rows else NAN}


def d_msis(series: list[Series], cfg: MeasureSettings) -> dict[str, float]:
    return {"80%": _scaled_mean(series, cfg.seasonal_period, _interval,
                                lambda r: _score(r[2], r[4], r[5]))}


def d_error_cost(series: list[Series], cfg: MeasureSettings) -> dict[str, float]:
    rows = _usable(_pooled_rows(series))
    total = 0.0
    for s, _, y, f, _, _ in rows:
        under, over = COSTS.of(s.segment)  # type: ignore[misc]
        total += under * max(y - f, 0) + over * max(f - y, 0)
    return {"": total if rows else NAN}


def _core(name: str) -> Callable[[list[Series], MeasureSettings], dict[str, float]]:
    def direct(series: list[Series], cfg: MeasureSettings) -> dict[str, float]:
        rows = _usable(_pooled_rows(series))
        if not rows:
            return {"": NAN}
        y = np.array([r[2] for r in rows])
        e = y - np.array([r[3] for r in rows])
        return {"": POOLED[name](y, e)[0]}
    return direct


DIRECT: dict[str, Callable[[list[Series], MeasureSettings], dict[str, float]]] = {
    **{name: _core(name) for name in POOLED},
    "smape": d_smape,
    "mase": d_mase,
    "tracking_signal": d_tracking_signal,
    "trigg": d_trigg,
    "fva_naive": d_fva_naive,
    "fva_seasonal_naive": d_fva_seasonal_naive,
    "interval_coverage": d_interval_coverage,
    "pinball": d_pinball,
    "mis": d_mis,
    "msis": d_msis,
    "error_cost": d_error_cost,
}

small = st.one_of(st.just(0.0), st.just(NAN), st.integers(0, 30).map(float))


@st.composite
def random_series(draw: st.DrawFn) -> list[Series]:
    out = []
    for i in range(draw(st.integers(1, 4))):
        length = draw(st.integers(0, P))
        history = {p: draw(small) for p in range(P - length, P)}
        positions = sorted(draw(st.sets(st.integers(P, P + 3), min_size=1, max_size=4)))
        targets = []
        for t in positions:
            f = draw(small)
            lo, hi = f - draw(st.integers(0, 8)), f + draw(st.integers(0, 8))
            if draw(st.integers(0, 9)) == 0:
                lo, hi = hi + 1, lo  # a crossed interval
            targets.append((t, draw(small), f, lo, hi))
        out.append(Series(f"s{i}", draw(st.sampled_from(["a", "b"])), history, targets))
    return out


def frames(series: list[Series]) -> tuple[pd.DataFrame, pd.DataFrame]:
    weeks = pd.date_range(START, periods=P + 4, freq="W-MON")
    actuals = [{"sku": s.sku, "period": weeks[p], "actual": v}
               for s in series for p, v in s.history.items()]
    actuals += [{"sku": s.sku, "period": weeks[t], "actual": y}
                for s in series for t, y, *_ in s.targets]
    rows = [{"sku": s.sku, "period": weeks[t], "issued": weeks[P], "lag": 1,
             "segment": s.segment, "forecast": f, "actual": y, "q0.1": lo, "q0.5": f,
             "q0.9": hi} for s in series for t, y, f, lo, hi in s.targets]
    return pd.DataFrame(rows), pd.DataFrame(actuals).astype({"actual": float})


@settings(max_examples=30, deadline=None)
@given(series=random_series(), m=st.sampled_from([1, 2]), alpha=st.sampled_from([0.1, 0.3]))
def test_every_registry_measure_equals_its_direct_formula(series: list[Series], m: int,
                                                          alpha: float) -> None:
    registry = registered_measures()
    assert set(registry) <= set(DIRECT), "add a direct computation for each new measure"
    rows, actuals = frames(series)
    index = ActualsIndex(actuals, ["sku"], "W-MON")
    rows["__series"] = index.codes_of(rows)
    cfg = MeasureSettings(seasonal_period=m, trigg_alpha=alpha, quantiles=(0.1, 0.5, 0.9),
                          costs=COSTS)
    results = accuracy_results(rows, keys=["sku"], book=Thresholds(CONFIG),
                               measures=list(registry), lags=[1], min_obs=1,
                               window=[START], settings=cfg, history=index, frequency="W-MON")
    got = {(r.segment, r.measure, r.details.get("variant", "")): r.value for r in results}
    segments = sorted({s.segment for s in series})
    groups = {seg: [s for s in series if s.segment == seg] for seg in segments}
    if segments != ["*"]:
        groups["*"] = series
    checked = 0
    for segment, members in groups.items():
        if segment == "*" and len(segments) == 1 and segments[0] == "*":
            continue
        for measure in registry:
            for variant, want in DIRECT[measure](members, cfg).items():
                value = got[(segment, measure, variant)]
                checked += 1
                if math.isnan(want):
                    assert value is None, (segment, measure, variant, value)
                else:
                    assert value is not None, (segment, measure, variant, want)
                    assert math.isclose(value, want, rel_tol=1e-9, abs_tol=1e-9), (
                        segment, measure, variant, value, want)
    assert checked == len(results)
