"""Grouped sufficient statistics: merging, totals, dropped rows, numerical stability, and
invariances of every registered measure computed from them."""

from __future__ import annotations

import math

import numpy as np
import pandas as pd
import pytest

from accuracy_checks.measures import stats as stats_module
from accuracy_checks.measures.registry import (
    MEASURES,
    Measure,
    get_measure,
    register_measure,
)
from accuracy_checks.measures.stats import STAT_COLUMNS, error_stats, merge_stats, total_stats

BY = ["lag", "segment"]
COUNTS = ["n", "n_dropped", "n_zero_y", "n_negative_y"]


def _stats_measures() -> list[Measure]:
    """The registry measures pooled from the sufficient statistics (the core measures)."""
    return [m for m in MEASURES.values() if m.from_stats is not None]


def _random_frame(seed: int, rows: int = 2_000) -> pd.DataFrame:
    rng = np.random.default_rng(seed)
    actual = rng.gamma(2.0, 50.0, rows).round(1)
    actual[rng.random(rows) < 0.1] = 0.0
    actual[rng.random(rows) < 0.05] *= -1
    forecast = actual + rng.normal(3.0, 20.0, rows)
    actual[rng.random(rows) < 0.05] = np.nan
    forecast[rng.random(rows) < 0.05] = np.nan
    frame = pd.DataFrame(
        {
            "lag": rng.integers(1, 4, rows),
            "segment": rng.choice(["tools", "pet-care", "soil", "plants"], rows),
            "actual": actual,
            "forecast": forecast,
        }
    )
    # A group whose rows are all dropped must still appear, with n = 0.
    frame.loc[frame["segment"].eq("soil") & frame["lag"].eq(3), "forecast"] = np.nan
    return frame


def _assert_stats_close(got: pd.DataFrame, want: pd.DataFrame, by: list[str]) -> None:
    """Counts exact; floats to 1e-12 relative to the scale of the quantity."""
    pd.testing.assert_frame_equal(got[by], want[by])
    for column in COUNTS:
        np.testing.assert_array_equal(got[column].to_numpy(), want[column].to_numpy())
        assert got[column].dtype == np.int64
    scale = {
        "sum_e": want["sum_abs_e"],
        "sum_abs_e": want["sum_abs_e"],
        "sum_sq_e": want["sum_sq_e"],
        "mean_e": want["sum_abs_e"] / want["n"].clip(lower=1),
        "m2_e": want["sum_sq_e"],
        "sum_abs_y": want["sum_abs_y"],
        "sum_ape": want["sum_ape"],
    }
    for column, size in scale.items():
        a, b = got[column].to_numpy(), want[column].to_numpy()
        np.testing.assert_array_equal(np.isnan(a), np.isnan(b))
        ok = ~np.isnan(b)
        assert np.all(np.abs(a[ok] - b[ok]) <= 1e-12 * size.to_numpy()[ok] + 1e-300), column


def test_columns_and_shape() -> None:
    frame = _random_frame(0)
    stats = error_stats(frame, BY)
    assert list(stats.columns) == [*BY, *STAT_COLUMNS]
    assert isinstance(stats.index, pd.RangeIndex)
    observed = frame.groupby(BY).size()
    assert len(stats) == len(observed)
    # sorted by key, every row accounted for
    assert list(map(tuple, stats[BY].to_numpy())) == list(observed.index)
    assert (stats["n"] + stats["n_dropped"]).to_numpy().tolist() == observed.tolist()


@pytest.mark.parametrize("seed", range(5))
def test_merge_of_random_partitions_equals_one_shot(seed: int) -> None:
    frame = _random_frame(seed)
    rng = np.random.default_rng(100 + seed)
    n_parts = int(rng.integers(2, 7))
    part_of_row = rng.integers(0, n_parts, len(frame))
    parts = [error_stats(frame[part_of_row == i], BY) for i in range(n_parts)]
    merged = merge_stats(parts, BY)
    _assert_stats_close(merged, error_stats(frame, BY), BY)


def test_merge_of_one_and_of_none() -> None:
    frame = _random_frame(1)
    stats = error_stats(frame, BY)
    _assert_stats_close(merge_stats([stats], BY), stats, BY)
    empty = merge_stats([], BY)
    assert list(empty.columns) == [*BY, *STAT_COLUMNS]
    assert len(empty) == 0


def test_merge_is_order_free() -> None:
    frame = _random_frame(2)
    halves = [error_stats(frame.iloc[:700], BY), error_stats(frame.iloc[700:], BY)]
    _assert_stats_close(merge_stats(halves, BY), merge_stats(halves[::-1], BY), BY)


def test_total_stats_equals_stats_on_coarser_keys() -> None:
    frame = _random_frame(3)
    fine = error_stats(frame, BY)
    _assert_stats_close(total_stats(fine, ["lag"]), error_stats(frame, ["lag"]), ["lag"])
    _assert_stats_close(
        total_stats(fine, ["segment"]), error_stats(frame, ["segment"]), ["segment"]
    )
    everything = total_stats(fine, [])
    assert len(everything) == 1
    _assert_stats_close(everything, error_stats(frame, []), [])


def test_nan_rows_are_counted_as_dropped() -> None:
    frame = pd.DataFrame(
        {
            "segment": ["a", "a", "a", "a", "b", "b"],
            "actual": [1.0, np.nan, 3.0, np.nan, np.nan, 2.0],
            "forecast": [1.5, 2.0, np.nan, np.nan, 1.0, np.nan],
        }
    )
    stats = error_stats(frame, ["segment"]).set_index("segment")
    assert stats.loc["a", "n"] == 1
    assert stats.loc["a", "n_dropped"] == 3
    assert stats.loc["a", "sum_e"] == -0.5
    # group b: every row dropped → still present, n = 0, every measure "no_data"
    assert stats.loc["b", "n"] == 0
    assert stats.loc["b", "n_dropped"] == 2
    assert math.isnan(stats.loc["b", "mean_e"])
    assert stats.loc["b", "m2_e"] == 0.0
    assert {m.id for m in _stats_measures()} >= {"me", "wape", "sde"}
    for measure in _stats_measures():
        out = measure.from_stats(stats).loc["b"]
        assert math.isnan(out["value"]), measure.id
        assert out["reason"] == "no_data", measure.id


def test_nullable_dtypes_and_missing_group_keys() -> None:
    frame = pd.DataFrame(
        {
            "segment": pd.array(["a", None, "a", "b"], dtype="string"),
            "actual": pd.array([1.0, 5.0, None, 4.0], dtype="Float64"),
            "forecast": pd.array([0, 0, 1, 2], dtype="Int64"),
        }
    )
    stats = error_stats(frame, ["segment"])
    assert stats["segment"].tolist() == ["a", "b"]  # the row without a key is in no group
    assert stats["n"].tolist() == [1, 1]
    assert stats["n_dropped"].tolist() == [1, 0]
    assert stats["sum_e"].tolist() == [1.0, 2.0]


@pytest.mark.parametrize(
    ("by", "fallback"),
    [
        (["text"], False),
        (["cat"], False),
        (["whole", "cat"], False),
        (["day", "flag", "text"], False),
        (["many", "whole", "day", "text"], True),
    ],
)
def test_groups_match_pandas_groupby(
    by: list[str], fallback: bool, monkeypatch: pytest.MonkeyPatch
) -> None:
    # Groups and their order are those of frame.groupby(by, observed=True, sort=True), for
    # every key dtype: str with missing values, categoricals (unsorted and unobserved
    # categories), nullable Int64 with missing values, datetimes, bools; with many key
    # combinations the pandas path is used instead of the mixed-radix one.
    rng = np.random.default_rng(9)
    rows = 400
    frame = pd.DataFrame(
        {
            "text": pd.array(
                rng.choice(np.array(["b", "a", None, "c"], dtype=object), rows), dtype="str"
            ),
            "cat": pd.Categorical(rng.choice(["z", "y"], rows), categories=["z", "x", "y"]),
            "whole": pd.array(
                rng.choice(np.array([1, 2, None], dtype=object), rows), dtype="Int64"
            ),
            "day": pd.to_datetime(rng.choice(["2024-01-08", "2024-01-01"], rows)),
            "flag": rng.random(rows) < 0.5,
            "many": rng.permutation(rows),
            "actual": rng.normal(100.0, 10.0, rows),
            "forecast": rng.normal(100.0, 10.0, rows),
        }
    )
    calls: list[list[str]] = []
    original = stats_module._group_codes_pandas

    def spy(frame: pd.DataFrame, by: list[str]) -> tuple[np.ndarray, pd.DataFrame]:
        calls.append(by)
        return original(frame, by)

    monkeypatch.setattr(stats_module, "_group_codes_pandas", spy)
    stats = error_stats(frame, by)
    assert bool(calls) == fallback
    grouped = frame.assign(e=frame["actual"] - frame["forecast"]).groupby(
        by, observed=True, sort=True
    )
    pd.testing.assert_frame_equal(stats[by], grouped.size().index.to_frame(index=False))
    np.testing.assert_array_equal(stats["n"], grouped.size().to_numpy())
    np.testing.assert_allclose(stats["sum_e"], grouped["e"].sum(), rtol=1e-12, atol=1e-9)


def test_counts_of_zero_and_negative_actuals() -> None:
    frame = pd.DataFrame(
        {"actual": [0.0, -2.0, 4.0, 0.0, np.nan], "forecast": [1.0, 1.0, 2.0, np.nan, 1.0]}
    )
    stats = error_stats(frame, [])
    assert stats.loc[0, "n"] == 3
    assert stats.loc[0, "n_zero_y"] == 1  # the 4th row's zero is dropped with its NaN forecast
    assert stats.loc[0, "n_negative_y"] == 1
    # |e|/|y| over y ≠ 0: 3/2 + 2/4
    assert stats.loc[0, "sum_ape"] == pytest.approx(2.0, rel=1e-15)
    assert stats.loc[0, "sum_abs_y"] == 6.0


def test_empty_frame() -> None:
    frame = pd.DataFrame(
        {
            "lag": pd.Series(dtype="int64"),
            "segment": pd.Series(dtype="str"),
            "actual": pd.Series(dtype="float64"),
            "forecast": pd.Series(dtype="float64"),
        }
    )
    assert len(error_stats(frame, BY)) == 0
    assert len(error_stats(frame, [])) == 0
    assert list(error_stats(frame, BY).columns) == [*BY, *STAT_COLUMNS]


def test_bad_arguments() -> None:
    frame = _random_frame(4, rows=10)
    with pytest.raises(TypeError, match="list of column names"):
        error_stats(frame, "segment")  # type: ignore[arg-type]
    with pytest.raises(KeyError, match="store"):
        error_stats(frame, ["store"])
    with pytest.raises(KeyError, match="units"):
        error_stats(frame, BY, actual="units")
    with pytest.raises(KeyError, match="lacks"):
        total_stats(frame, ["lag"])


def test_large_mean_small_spread_keeps_sde_accurate() -> None:
    # Catastrophic cancellation test: errors near 1e9 with a spread of ~1e-3. The reference is
    # np.std(e, ddof=1) (= statsmodels stde ddof=1, docs/measures.md §8), which centres before
    # squaring.
    rng = np.random.default_rng(7)
    rows = 5_000
    forecast = rng.uniform(50.0, 150.0, rows).round(2)
    actual = forecast + 1e9 + rng.normal(0.0, 1e-3, rows)
    segment = np.where(np.arange(rows) < 3_000, "big", "small")
    frame = pd.DataFrame({"segment": segment, "actual": actual, "forecast": forecast})
    e = actual - forecast
    stats = error_stats(frame, ["segment"]).set_index("segment")
    sde = get_measure("sde").from_stats(stats)["value"]
    for name, rows_of in (("big", segment == "big"), ("small", segment == "small")):
        reference = np.std(e[rows_of], ddof=1)
        assert 5e-4 < reference < 2e-3
        assert sde[name] == pytest.approx(reference, rel=1e-9)
    # the textbook shortcut Σe² − (Σe)²/n would be useless here: that is what the test guards
    s = stats.loc["big"]
    shortcut = (s["sum_sq_e"] - s["sum_e"] ** 2 / s["n"]) / (s["n"] - 1)
    assert shortcut != pytest.approx(np.std(e[segment == "big"], ddof=1) ** 2, rel=0.1)
    # Merging the two groups (and merging random partitions) stays accurate too, to the limit
    # set by storing each part's mean (≈1e9) in float64: an ulp of 1.2e-7 on a spread of 1e-3.
    total = total_stats(stats.reset_index(), [])
    assert get_measure("sde").from_stats(total)["value"].iloc[0] == pytest.approx(
        np.std(e, ddof=1), rel=1e-6
    )
    split = np.random.default_rng(8).integers(0, 4, rows)
    parts = [error_stats(frame[split == i], ["segment"]) for i in range(4)]
    merged = merge_stats(parts, ["segment"]).set_index("segment")
    assert get_measure("sde").from_stats(merged)["value"]["big"] == pytest.approx(
        np.std(e[segment == "big"], ddof=1), rel=1e-6
    )


# ---- invariances over the registry (as sklearn's metrics/tests/test_common.py does) ----------


def _all_measures(stats: pd.DataFrame) -> dict[str, pd.DataFrame]:
    return {m.id: m.from_stats(stats) for m in _stats_measures()}  # type: ignore[misc]


def test_row_order_does_not_change_any_measure() -> None:
    frame = _random_frame(5)
    shuffled = frame.sample(frac=1.0, random_state=11)
    before = _all_measures(error_stats(frame, BY))
    after = _all_measures(error_stats(shuffled, BY))
    for measure_id, out in before.items():
        pd.testing.assert_series_equal(
            out["reason"], after[measure_id]["reason"], check_names=False
        )
        np.testing.assert_allclose(
            after[measure_id]["value"], out["value"], rtol=1e-12, atol=1e-12, err_msg=measure_id
        )


def test_perfect_forecast_scores_zero() -> None:
    actual = [5.0, 0.0, -3.0, 0.0, 0.0, 0.0, 2.0, 4.0]
    frame = pd.DataFrame(
        {
            "segment": ["normal"] * 3 + ["zeros"] * 3 + ["positive"] * 2,
            "actual": actual,
            "forecast": actual,
        }
    )
    out = _all_measures(error_stats(frame, ["segment"]).set_index("segment"))
    # undefined only by zero denominators / zero actuals (docs/measures.md edge-case table)
    undefined = {
        ("mape", "normal"): "zero_actual",
        ("mape", "zeros"): "zero_actual",
        ("bias_pct", "zeros"): "zero_denominator",
        ("wape", "zeros"): "zero_denominator",
    }
    for measure_id, result in out.items():
        for segment in ("normal", "zeros", "positive"):
            row = result.loc[segment]
            if (measure_id, segment) in undefined:
                assert math.isnan(row["value"])
                assert row["reason"] == undefined[(measure_id, segment)]
            else:
                assert row["value"] == 0.0, (measure_id, segment)
                assert row["reason"] is None
    assert out["mape"].loc["normal", "mape_nonzero"] == 0.0
    assert math.isnan(out["mape"].loc["zeros", "mape_nonzero"])


def test_sign_convention_under_forecast_is_positive() -> None:
    # docs/measures.md: e = actual − forecast; positive = under-forecast.
    frame = pd.DataFrame({"actual": [10.0, 20.0], "forecast": [8.0, 15.0]})
    out = _all_measures(error_stats(frame, []))
    assert out["me"]["value"].iloc[0] == 3.5
    assert out["bias_pct"]["value"].iloc[0] == pytest.approx(100 * 7 / 30, rel=1e-15)


def test_registry_definitions() -> None:
    expected = {
        "me": ("centered", "units"),
        "bias_pct": ("centered", "%"),
        "mae": ("lower", "units"),
        "mape": ("lower", "%"),
        "wape": ("lower", "%"),
        "rmse": ("lower", "units"),
        "sde": ("lower", "units"),
    }
    for measure_id, (direction, unit) in expected.items():
        measure = get_measure(measure_id)
        assert (measure.id, measure.direction, measure.unit) == (measure_id, direction, unit)
        assert measure.label and measure.description
    with pytest.raises(KeyError, match="known measures: bias_pct"):
        get_measure("accuracy")


def test_register_measure_refuses_clashes() -> None:
    wape = get_measure("wape")
    with pytest.raises(ValueError, match="already registered"):
        register_measure(wape)
    custom = Measure(
        id="test_double_mae",
        label="2×MAE",
        unit="units",
        direction="lower",
        from_stats=lambda s: (
            get_measure("mae").from_stats(s).assign(value=lambda d: 2 * d["value"])
        ),
        description="test only",
    )
    try:
        register_measure(custom)
        assert get_measure("test_double_mae") is custom
        register_measure(custom, replace=True)
        with pytest.raises(ValueError, match="direction"):
            register_measure(
                Measure("test_bad", "x", "units", "down", custom.from_stats, "x"),  # type: ignore[arg-type]
            )
    finally:
        MEASURES.pop("test_double_mae", None)
    assert "test_bad" not in MEASURES
