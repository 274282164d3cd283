"""``coverage.horizon``: gaps, rows beyond the horizon, off-grid and undated rows, with the
exact dates in each example.

Expected values are hand-computed from the definition in docs/checks.md and the module
docstring of ``accuracy_checks.checks.horizon`` (project rules, no outside source).
"""

from __future__ import annotations

import pandas as pd

from accuracy_checks.checks.horizon import HORIZON
from tests.support.coverage import FOUR, actuals, check, forecast, pick, weekly_actuals


def test_horizon_exactly_complete_passes() -> None:
    series = {k: "*" for k in FOUR}
    res = pick(check(forecast(series), weekly_actuals(series)), HORIZON)["*"]
    assert (res.status, res.value, res.measure, res.unit) == (
        "pass",
        0,
        "incomplete_series",
        "count",
    )
    assert res.details["first_period"] == "2026-03-02" and res.details["series"] == 4


def test_horizon_gap_and_off_grid_with_exact_dates() -> None:
    per = {("S1", "P2"): ["2026-03-02", "2026-03-09", "2026-03-18"]}  # Wed instead of Mon
    series = {("S1", "P1"): "tools", ("S1", "P2"): "plants"}
    res = pick(check(forecast(series, per_series=per), weekly_actuals(series)), HORIZON)
    star = res["*"]
    assert (star.status, star.value, star.n_series) == ("fail", 1, 1)  # built-in: fail at 0
    assert star.examples == [
        {
            "store": "S1",
            "product": "P2",
            "segment": "plants",
            "problem": "missing 2026-03-16; off-grid 2026-03-18",
        }
    ]
    assert star.details["missing_steps"] == 1 and star.details["off_grid_rows"] == 1
    assert res["tools"].status == "pass" and res["plants"].value == 1


def test_horizon_rows_beyond_and_late_start() -> None:
    per = {
        ("S1", "P1"): ["2026-03-02", "2026-03-09", "2026-03-16", "2026-03-23"],  # one extra
        ("S1", "P2"): ["2026-03-09", "2026-03-16"],  # starts after the cycle's first period
        ("S2", "P1"): ["2026-03-02", "2026-03-02", "2026-03-09", "2026-03-16"],  # duplicate
    }
    series = dict.fromkeys(per, "*")
    res = pick(check(forecast(series, per_series=per), weekly_actuals(series)), HORIZON)["*"]
    assert res.value == 2  # the duplicated week is the output checks' business
    problems = {e["product"] + e["store"]: e["problem"] for e in res.examples}
    assert problems == {"P1S1": "beyond the horizon 2026-03-23", "P2S1": "missing 2026-03-02"}
    assert res.details["with_rows_beyond"] == 1 and res.details["with_gaps"] == 1
    assert res.n_obs == 1


def test_horizon_monthly_grid() -> None:
    months = pd.date_range("2026-01-01", periods=3, freq="MS")
    per = {("S1", "P2"): ["2026-01-01", "2026-02-01", "2026-03-15"]}
    series = {("S1", "P1"): "*", ("S1", "P2"): "*"}
    act = actuals([(s, p, "2025-12-01", 3.0, "*") for s, p in series])
    res = pick(
        check(forecast(series, periods=months, per_series=per), act, frequency="MS"), HORIZON
    )["*"]
    assert res.value == 1
    assert res.examples[0]["problem"] == "missing 2026-03-01; off-grid 2026-03-15"


def test_horizon_missing_period_date_is_reported() -> None:
    series = {("S1", "P1"): "*"}
    fc = forecast(series)
    fc.loc[1, "period"] = pd.NaT
    res = pick(check(fc, weekly_actuals(series)), HORIZON)["*"]
    assert res.value == 1
    assert res.examples[0]["problem"] == "missing 2026-03-09; off-grid no date"


def test_horizon_dates_listed_are_capped() -> None:
    series = {("S1", "P1"): "*"}
    fc = forecast(series, per_series={("S1", "P1"): ["2026-03-02"]})
    res = pick(check(fc, weekly_actuals(series), horizon=8), HORIZON)["*"]
    assert res.examples[0]["problem"] == (
        "missing 2026-03-09, 2026-03-16, 2026-03-23, 2026-03-30 (+3 more)"
    )
