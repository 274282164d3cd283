"""Coverage checks: missing and unexpected series, horizon completeness, series count change.

Expected values are hand-computed from the definitions in docs/checks.md and the module docstring
of ``accuracy_checks.checks.coverage`` (project rules, no outside source): e.g. 1 missing of
4 active series is 100 · 1 / 4 = 25 %.
"""

from __future__ import annotations

import json

import numpy as np
import pandas as pd
import pytest

from accuracy_checks.checks.coverage import (
    HORIZON,
    MISSING_SERIES,
    SERIES_COUNT,
    UNEXPECTED_SERIES,
)
from accuracy_checks.errors import InputError
from tests.support.coverage import (
    FOUR,
    actuals,
    book,
    check,
    forecast,
    pick,
    weekly_actuals,
)

# --------------------------------------------------------------------------- missing series


def test_missing_series_percent_and_segment_split() -> None:
    fc = forecast({k: v for k, v in FOUR.items() if k != ("S1", "P2")})
    b = book("  default:\n    missing_series_pct: {warn: 0, fail: 1}")
    res = pick(check(fc, weekly_actuals(FOUR), b=b), MISSING_SERIES)
    assert list(res) == ["*", "plants", "tools"]
    star = res["*"]
    assert star.value == pytest.approx(25.0)  # 1 missing of 4 active
    assert (star.n_series, star.status, star.unit) == (1, "fail", "%")
    assert (star.warn, star.fail, star.measure) == (0, 1, "missing_series_pct")
    assert star.details["active"] == 4 and star.details["missing"] == 1
    assert star.message.startswith("1 of 4 active series (25 %) has no forecast")
    assert star.examples == [
        {"store": "S1", "product": "P2", "segment": "tools", "recent_actuals": 40.0}
    ]
    assert res["tools"].value == pytest.approx(50.0) and res["tools"].status == "fail"
    # 0 % equals the warn level 0: a level is broken only when strictly beyond it
    assert res["plants"].value == 0.0 and res["plants"].status == "pass"


def test_missing_examples_largest_recent_volume_first_and_capped() -> None:
    many = {("S1", f"P{i:02d}"): "tools" for i in range(15)}
    act = pd.concat(
        [weekly_actuals({k: "tools"}, weeks=2, value=float(i)) for i, k in enumerate(many)],
        ignore_index=True,
    )
    fc = forecast({("S1", "P00"): "tools"})
    res = pick(check(fc, act, max_examples=3), MISSING_SERIES)["*"]
    assert res.n_series == 14 and res.value == pytest.approx(100 * 14 / 15)
    assert [e["product"] for e in res.examples] == ["P14", "P13", "P12"]
    assert [e["recent_actuals"] for e in res.examples] == [28.0, 26.0, 24.0]


def test_active_window_boundary() -> None:
    # actuals weeks W1..W6 (2026-01-19 … 2026-02-23); active_periods = 2 → window W5, W6
    weeks = pd.date_range("2026-01-19", periods=6, freq="W-MON")
    rows: list[tuple[str, str, str, float | None, str]]
    rows = [("S1", "P1", d.isoformat(), 5.0, "tools") for d in weeks]  # forecast, active
    rows += [("S1", "P2", weeks[3].isoformat(), 5.0, "tools")]  # last actual W4: outside
    rows += [("S2", "P1", weeks[4].isoformat(), 5.0, "tools")]  # W5: inside, not forecast
    rows += [("S2", "P2", weeks[5].isoformat(), None, "tools")]  # only a null actual
    fc = forecast({("S1", "P1"): "tools"})
    res = pick(check(fc, actuals(rows), active_periods=2), MISSING_SERIES)["*"]
    assert res.details["active"] == 2 and res.details["missing"] == 1
    assert res.details["window_start"] == "2026-02-16"
    assert [(e["store"], e["product"]) for e in res.examples] == [("S2", "P1")]


def test_window_counts_only_periods_that_hold_actuals() -> None:
    # the latest week holds only a null actual: the 2-period window is still W5, W6
    weeks = pd.date_range("2026-01-19", periods=7, freq="W-MON")
    rows = [
        ("S1", "P1", weeks[4].isoformat(), 1.0, "*"),
        ("S1", "P2", weeks[5].isoformat(), 1.0, "*"),
        ("S2", "P1", weeks[6].isoformat(), None, "*"),
    ]
    res = pick(check(forecast({}), actuals(rows), active_periods=2), MISSING_SERIES)["*"]
    assert res.details["active"] == 2 and res.details["window_start"] == "2026-02-16"


def test_no_active_series_is_skipped() -> None:
    act = actuals([("S1", "P1", "2026-02-23", None, "*")])
    res = pick(check(forecast({("S1", "P1"): "*"}), act), MISSING_SERIES)
    assert list(res) == ["*"]
    assert res["*"].status == "skipped" and res["*"].reason == "no_data"


def test_only_all_series_results_without_segments() -> None:
    series = {k: "*" for k in FOUR}
    results = check(forecast(series), weekly_actuals(series))
    assert {r.segment for r in results} == {"*"}
    assert [r.check for r in results] == [MISSING_SERIES, UNEXPECTED_SERIES, HORIZON]
    assert {r.status for r in results} == {"pass"}


def test_actual_only_series_takes_the_segment_of_the_actuals() -> None:
    act = weekly_actuals({("S1", "P1"): "tools", ("S9", "P9"): "unassigned"})
    res = pick(check(forecast({("S1", "P1"): "tools"}), act), MISSING_SERIES)
    assert res["unassigned"].value == 100.0 and res["unassigned"].n_series == 1
    assert res["tools"].value == 0.0


def test_segment_override_and_equal_to_level_boundaries() -> None:
    thresholds = (
        "  default:\n    missing_series_pct: {warn: 10, fail: 25}\n"
        "  segments:\n    tools:\n      missing_series_pct: {warn: 50, fail: 60}"
    )
    fc = forecast({k: v for k, v in FOUR.items() if k != ("S1", "P2")})
    res = pick(check(fc, weekly_actuals(FOUR), b=book(thresholds)), MISSING_SERIES)
    assert res["*"].value == 25.0 and res["*"].status == "warn"  # equal to fail: not beyond
    assert res["tools"].value == 50.0 and res["tools"].status == "pass"  # equal to warn
    assert (res["tools"].warn, res["tools"].fail) == (50, 60)


# --------------------------------------------------------------------------- unexpected series


def test_unexpected_series_with_a_product_only_known_table() -> None:
    known = {("S1", "P1"): "tools"}
    fc = forecast({("S1", "P1"): "tools", ("S1", "P9"): "tools", ("S2", "P8"): "plants"})
    mapping = pd.DataFrame({"product": ["P1", "P9"], "category": ["tools", "tools"]})
    mapping["product"] = mapping["product"].astype("str")
    res = pick(check(fc, weekly_actuals(known), known_series=mapping), UNEXPECTED_SERIES)
    star = res["*"]
    # P9 is known by the table (product only); P8 is known to neither
    assert (star.value, star.n_series, star.status) == (1, 1, "warn")  # built-in: warn at 0
    assert star.examples == [{"store": "S2", "product": "P8", "segment": "plants", "rows": 3}]
    assert res["tools"].value == 0 and res["plants"].value == 1
    without = pick(check(fc, weekly_actuals(known)), UNEXPECTED_SERIES)["*"]
    assert without.value == 2


def test_unexpected_series_threshold_from_config() -> None:
    fc = forecast({("S1", "P1"): "*", ("S1", "P9"): "*"})
    b = book("  default:\n    unexpected_series: {fail: 0}")
    res = pick(check(fc, weekly_actuals({("S1", "P1"): "*"}), b=b), UNEXPECTED_SERIES)["*"]
    assert (res.status, res.fail, res.warn) == ("fail", 0, None)


def test_series_with_null_actuals_only_are_known() -> None:
    act = actuals([("S1", "P1", "2026-02-23", None, "*")])
    res = pick(check(forecast({("S1", "P1"): "*"}), act), UNEXPECTED_SERIES)["*"]
    assert res.value == 0 and res.status == "pass"


def test_known_table_without_key_columns_is_an_input_error() -> None:
    with pytest.raises(InputError, match="none of the key columns"):
        check(
            forecast({("S1", "P1"): "*"}),
            weekly_actuals({("S1", "P1"): "*"}),
            known_series=pd.DataFrame({"sku": ["P1"]}),
        )


# --------------------------------------------------------------------------- series count


def test_series_count_change_with_thresholds_and_all_series_override() -> None:
    now = {k: "tools" for k in FOUR} | {("S3", "P1"): "tools"}
    previous = forecast(dict(FOUR))
    b = book("  default:\n    series_count_change_pct: {warn: 10, fail: 20}")
    res = check(
        forecast(now),
        weekly_actuals(now),
        b=b,
        previous=previous,
        previous_label="2026-02-20 (attempt 1)",
    )
    sc = pick(res, SERIES_COUNT)
    assert list(sc) == ["*"]  # one result, for all series
    r = sc["*"]
    assert r.value == pytest.approx(25.0)  # (5 − 4) / 4
    assert (r.status, r.unit, r.measure) == ("fail", "%", "series_count_change_pct")
    assert r.details == {"previous_cycle": "2026-02-20 (attempt 1)", "now": 5, "previous": 4}
    assert "25 % more than the 4 of 2026-02-20 (attempt 1)" in r.message
    override = book(
        "  default:\n    series_count_change_pct: {warn: 10, fail: 20}\n"
        "  segments:\n    '*':\n      series_count_change_pct: {warn: 30, fail: 50}"
    )
    again = pick(
        check(forecast(now), weekly_actuals(now), b=override, previous=previous), SERIES_COUNT
    )["*"]
    assert again.status == "pass"


def test_series_count_boundary_and_drop() -> None:
    ten = {("S1", f"P{i}"): "*" for i in range(10)}
    nine = dict(list(ten.items())[:9])
    b = book("  default:\n    series_count_change_pct: {warn: 10, fail: 20}")
    res = pick(
        check(forecast(nine), weekly_actuals(ten), b=b, previous=forecast(ten)), SERIES_COUNT
    )["*"]
    assert res.value == pytest.approx(-10.0)
    assert res.status == "pass"  # |−10| equals the warn level: not beyond
    assert "fewer" in res.message


def test_no_series_count_without_previous_and_undefined_with_empty_previous() -> None:
    series = {("S1", "P1"): "*"}
    assert not pick(check(forecast(series), weekly_actuals(series)), SERIES_COUNT)
    res = pick(
        check(forecast(series), weekly_actuals(series), previous=forecast({})), SERIES_COUNT
    )["*"]
    assert res.value is None and res.reason == "no_data"
    assert res.status == "warn"  # evaluation.undefined_status default


# --------------------------------------------------------------------------- all together


def test_results_are_json_ready_and_one_sentence() -> None:
    fc = forecast(
        {("S1", "P1"): "tools", ("S7", "P7"): "plants"}, per_series={("S7", "P7"): ["2026-03-04"]}
    )
    fc.loc[0, "period"] = pd.NaT
    act = weekly_actuals(FOUR)
    act.loc[0, "actual"] = np.nan
    results = check(fc, act, previous=forecast(FOUR), previous_label="x")
    assert {r.status for r in results} >= {"fail", "warn"}
    for r in results:
        json.dumps(r.to_dict(), allow_nan=False)
        assert r.message and "\n" not in r.message


def test_empty_forecast() -> None:
    res = check(forecast({}), weekly_actuals(FOUR))
    missing = pick(res, MISSING_SERIES)["*"]
    assert missing.value == 100.0 and missing.status == "fail"
    assert pick(res, HORIZON)["*"].status == "skipped"
