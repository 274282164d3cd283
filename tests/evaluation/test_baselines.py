"""The actuals index behind the join, the naive baselines and the MASE scales: both storages
(dense matrix, sorted keys) agree with a direct computation, and baselines use only the
actuals known at each cycle's issue date (docs/measures.md §12: "using only data known at the
origin")."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from accuracy_checks.evaluation.baselines import (
    ActualsIndex,
    default_seasonal_period,
    known_through,
    naive_forecast,
    seasonal_naive_forecast,
)
from accuracy_checks.evaluation.join import evaluation_frame
from accuracy_checks.measures import functions as fn


def random_actuals(seed: int, n_series: int = 40, span: int = 30) -> pd.DataFrame:
    """Weekly actuals with gaps (missing rows), NaN values, zeros and two key columns."""
    rng = np.random.default_rng(seed)
    weeks = pd.date_range("2025-01-06", periods=span, freq="W-MON")
    store = np.repeat([f"S{i % 3}" for i in range(n_series)], span)
    product = np.repeat([f"P{i}" for i in range(n_series)], span)
    frame = pd.DataFrame({"store": store, "product": product,
                          "period": np.tile(weeks, n_series),
                          "actual": rng.integers(0, 20, n_series * span).astype(float)})
    frame.loc[rng.random(len(frame)) < 0.1, "actual"] = np.nan
    return frame.loc[rng.random(len(frame)) > 0.15].reset_index(drop=True)


def direct_value(actuals: pd.DataFrame, store: str, product: str,
                 period: pd.Timestamp) -> float:
    hit = actuals[(actuals["store"] == store) & (actuals["product"] == product)
                  & (actuals["period"] == period)]["actual"]
    return float(hit.iloc[0]) if len(hit) else np.nan


def history_of(actuals: pd.DataFrame, store: str, product: str, before: pd.Timestamp,
               weeks: pd.DatetimeIndex) -> np.ndarray:
    """The series on the full weekly grid before ``before`` (NaN for gaps)."""
    own = actuals[(actuals["store"] == store) & (actuals["product"] == product)]
    grid = weeks[weeks < before]
    return own.set_index("period")["actual"].reindex(grid).to_numpy(dtype=float)


@pytest.mark.parametrize("seed", [1, 2])
def test_lookups_and_scales_agree_with_direct_computation(seed: int, storage: str) -> None:
    actuals = random_actuals(seed)
    index = ActualsIndex(actuals, ["store", "product"], "W-MON")
    assert index._dense == (storage == "dense")
    weeks = pd.date_range("2025-01-06", periods=30, freq="W-MON")
    rng = np.random.default_rng(seed)
    queries = pd.DataFrame({
        "store": [f"S{i % 3}" for i in range(40)] * 3 + ["S9"],
        "product": [f"P{i}" for i in range(40)] * 3 + ["P0"],
        "period": [*rng.choice(weeks, 120), weeks[3]],
        "issued": [*rng.choice(weeks[5:], 120), weeks[5]],
    })
    codes = index.codes_of(queries)
    assert codes[-1] == -1  # a series the actuals do not hold
    pos = index.positions(queries["period"])
    got = index.values_at(codes, pos)
    want = [direct_value(actuals, s, p, d) for s, p, d in
            zip(queries["store"], queries["product"], queries["period"], strict=True)]
    np.testing.assert_array_equal(got, np.array(want))
    # naive: the last non-missing actual before the issue date (docs/measures.md §12)
    known = known_through(queries["issued"], "W-MON")
    naive = naive_forecast(index, codes, known)
    for i, (s, p, d) in enumerate(zip(queries["store"], queries["product"], queries["issued"],
                                      strict=True)):
        h = history_of(actuals, s, p, d, weeks)
        assert naive[i] == pytest.approx(fn.naive_baseline(h, 1)[0], nan_ok=True)
    # scales (docs/measures.md §9) for every series, before week 20, m = 1 and 4
    for m in (1, 4):
        scale, pairs = index.scales(m, before=int(index.positions(pd.Series([weeks[20]]))[0]))
        for i in range(40):
            s, p = f"S{i % 3}", f"P{i}"
            code = index.codes_of(pd.DataFrame({"store": [s], "product": [p]}))[0]
            h = history_of(actuals, s, p, weeks[20], weeks)
            diff = np.abs(h[m:] - h[:-m])
            assert pairs[code] == np.count_nonzero(~np.isnan(diff))
            assert scale[code] == pytest.approx(fn.mase_scale(h, m), nan_ok=True, rel=1e-12)


def test_seasonal_naive_repeats_the_last_known_season() -> None:
    # docs/measures.md E5: h = 12 quarters of a season of 4; the seasonal naive forecast of the
    # next 4
    # periods is the last 4 actuals, [135, 90, 70, 160], and repeats after that.
    h = [120, 80, 60, 140, 130, 85, 65, 150, 135, 90, 70, 160]
    dates = pd.date_range("2020-01-06", periods=20, freq="W-MON")
    actuals = pd.DataFrame({"sku": "x", "period": dates[:12], "actual": np.asarray(h, float)})
    index = ActualsIndex(actuals, ["sku"], "W-MON")
    targets = index.positions(pd.Series(dates[12:18]))
    known = np.full(6, targets[0] - 1)
    got = seasonal_naive_forecast(index, np.zeros(6, dtype=np.int64), targets, known, 4)
    assert got.tolist() == [135, 90, 70, 160, 135, 90]
    assert got.tolist() == fn.seasonal_naive_baseline(h, 6, 4).tolist()


def test_baselines_and_scales_ignore_actuals_after_the_issue_date() -> None:
    # The baselines are built only from actuals known at each cycle's issue date: changing the
    # actuals of the target periods changes neither the baselines nor the MASE scale.
    actuals = random_actuals(3)
    weeks = pd.date_range("2025-01-06", periods=30, freq="W-MON")
    issued = weeks[22]
    earlier = actuals.loc[actuals["period"] >= issued, ["store", "product", "period"]].assign(
        issued=issued, forecast=5.0, segment="*")
    later = actuals["period"] >= issued
    changed = actuals.assign(actual=np.where(later, actuals["actual"] * 7 + 1, actuals["actual"]))
    frames = []
    for acts in (actuals, changed):
        ev = evaluation_frame(earlier, acts, keys=["store", "product"], frequency="W-MON",
                              lags=list(range(1, 9)), window=8)
        assert ev.history is not None
        rows = ev.frame
        known = known_through(rows["issued"], "W-MON")
        target = ev.history.positions(rows["period"])
        frames.append((
            naive_forecast(ev.history, rows["__series"].to_numpy(), known),
            seasonal_naive_forecast(ev.history, rows["__series"].to_numpy(), target, known, 4),
            ev.history.scales(4, before=int(known.min()) + 1)[0],
            rows["actual"].to_numpy(),
        ))
    for before, after in zip(frames[0][:3], frames[1][:3], strict=True):
        np.testing.assert_array_equal(before, after)
    assert not np.array_equal(np.nan_to_num(frames[0][3]), np.nan_to_num(frames[1][3]))


def test_known_through_and_default_seasonal_periods() -> None:
    weekly = known_through(pd.Series(pd.to_datetime(["2026-03-02", "2026-03-04"])), "W-MON")
    monday = known_through(pd.Series(pd.to_datetime(["2026-02-23"])), "W-MON")
    # on the grid: the week before; between grid dates: the grid date just before
    assert weekly.tolist() == [monday[0] + 1, monday[0] + 2]
    monthly = known_through(pd.Series(pd.to_datetime(["2026-03-01", "2026-03-15"])), "MS")
    assert monthly[1] - monthly[0] == 1
    # docs/measures.md §9 (M4: 12 monthly, 4 quarterly, 24 hourly, 1 otherwise); 52 weekly and 7
    # daily are this project's choices
    assert [default_seasonal_period(f) for f in ("W-SUN", "MS", "QE", "D", "h", "YE", "min")] \
        == [52, 12, 4, 7, 24, 1, 1]


def test_off_grid_periods_join_only_an_exact_date() -> None:
    actuals = pd.DataFrame({"sku": ["a", "a"], "period": pd.to_datetime(["2026-01-05",
                                                                        "2026-01-14"]),
                            "actual": [5.0, 7.0]})
    earlier = pd.DataFrame({"sku": ["a", "a"], "period": pd.to_datetime(["2026-01-05",
                                                                        "2026-01-14"]),
                            "issued": pd.to_datetime(["2026-01-05", "2026-01-05"]),
                            "forecast": [1.0, 2.0], "segment": "*"})
    ev = evaluation_frame(earlier, actuals, keys=["sku"], frequency="W-MON", lags=[1, 2, 3],
                          window=2)
    assert ev.frame.sort_values("period")["actual"].tolist() == [5.0, 7.0]
