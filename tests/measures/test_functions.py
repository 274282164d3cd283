"""Measures against the docs/measures.md check values and the sklearn/statsmodels references.

Every measure is checked on both paths: the reference functions (``functions.py``) and the
engine path (``error_stats`` → registry ``from_stats``).
"""

from __future__ import annotations

import math
from collections.abc import Callable

import numpy as np
import pandas as pd
import pytest
from numpy.typing import ArrayLike
from sklearn import metrics as sk
from statsmodels.tools import eval_measures as sm

from accuracy_checks.measures import functions as fn
from accuracy_checks.measures.registry import CORE_MEASURES, get_measure
from accuracy_checks.measures.stats import error_stats, total_stats

NAN = float("nan")

# Check-value inputs E1–E8, copied from docs/measures.md "Check values" (y = actual, f = forecast).
CASES: dict[str, tuple[list[float], list[float]]] = {
    "E1": ([80, 105, 115, 90, 110], [100] * 5),
    "E2": ([200] * 4, [100, 300, 100, 100]),
    "E3": ([10000] * 4, [9900, 10100, 9900, 9900]),
    "E4": ([0, 4, 0, 1], [1, 2, 0, 0]),
    "E5": ([140, 95, 72, 170], [138, 92, 75, 158]),
    "E6": ([50], [40]),
    "E7": ([102, 98, 110, 115, 121, 126, 133, 140], [100, 101, 103, 106, 108, 111, 114, 117]),
    "E8": ([10, NAN, 12, 8, 9], [9, 11, NAN, 10, 9]),
}

# The docs/measures.md check-value table, rows ME … SDE (NaN = "undef"). The table is rounded to
# 6 significant digits, so values are compared with rel=1e-5 (as docs/measures.md prescribes).
TABLE: dict[str, list[float]] = {
    "me": [0, 50, 50, 0.5, 3.5, 10, 10.625, -0.333333],
    "bias_pct": [0, 25, 0.5, 40, 2.93501, 20, 8.99471, -3.7037],
    "mae": [12, 100, 100, 1, 5, 10, 11.375, 1],
    "mape": [12.6015, 50, 1, NAN, 3.95299, 20, 9.07182, 11.6667],
    "wape": [12, 50, 1, 80, 4.19287, 20, 9.62963, 11.1111],
    "rmse": [13.0384, 100, 100, 1.22474, 6.44205, 10, 13.3557, 1.29099],
    "sde": [14.5774, 100, 100, 1.29099, 6.245, NAN, 8.65097, 1.52753],
}
CASE_IDS = list(CASES)

FUNCTIONS: dict[str, Callable[[ArrayLike, ArrayLike], float]] = {
    "me": fn.mean_error,
    "bias_pct": fn.bias_pct,
    "mae": fn.mean_absolute_error,
    "mape": fn.mape,
    "wape": fn.wape,
    "rmse": fn.rmse,
    "sde": fn.sde,
}
# Expected reasons for the undefined cells of TABLE.
UNDEFINED_REASON = {("mape", "E4"): "zero_actual", ("sde", "E6"): "too_few_rows"}


def _cases_frame(cases: dict[str, tuple[list[float], list[float]]]) -> pd.DataFrame:
    rows = [
        {"case": name, "actual": float(a), "forecast": float(f)}
        for name, (ys, fs) in cases.items()
        for a, f in zip(ys, fs, strict=True)
    ]
    return pd.DataFrame(rows)


@pytest.fixture(scope="module")
def case_stats() -> pd.DataFrame:
    stats = error_stats(_cases_frame(CASES), ["case"])
    return stats.set_index("case")


def _filtered(name: str) -> tuple[np.ndarray, np.ndarray]:
    """The case's rows with NaN dropped (sklearn raises on NaN: filter first, docs/measures.md)."""
    y = np.asarray(CASES[name][0], dtype=float)
    f = np.asarray(CASES[name][1], dtype=float)
    keep = ~(np.isnan(y) | np.isnan(f))
    return y[keep], f[keep]


def test_table_covers_every_core_measure() -> None:
    assert set(TABLE) == set(CORE_MEASURES) == set(FUNCTIONS)


@pytest.mark.parametrize("case", CASE_IDS)
@pytest.mark.parametrize("measure", list(TABLE))
def test_function_matches_check_value(measure: str, case: str) -> None:
    # Source: docs/measures.md check-value table (rounded to 6 significant digits → rel=1e-5).
    expected = TABLE[measure][CASE_IDS.index(case)]
    got = FUNCTIONS[measure](*CASES[case])
    if math.isnan(expected):
        assert math.isnan(got)
    else:
        assert got == pytest.approx(expected, rel=1e-5, abs=1e-12)


@pytest.mark.parametrize("case", CASE_IDS)
@pytest.mark.parametrize("measure", list(TABLE))
def test_registry_matches_check_value(measure: str, case: str, case_stats: pd.DataFrame) -> None:
    # Source: docs/measures.md check-value table (rounded to 6 significant digits → rel=1e-5).
    expected = TABLE[measure][CASE_IDS.index(case)]
    result = get_measure(measure).from_stats(case_stats).loc[case]
    if math.isnan(expected):
        assert math.isnan(result["value"])
        assert result["reason"] == UNDEFINED_REASON[(measure, case)]
    else:
        assert result["value"] == pytest.approx(expected, rel=1e-5, abs=1e-12)
        assert result["reason"] is None


def test_exact_values(case_stats: pd.DataFrame) -> None:
    # docs/measures.md: "E1: ME = 0 while MAE = 12; the errors −20, 5, 15, −10, 10 cancel", and E2's
    # |e| = 100 on every row; these are exact in binary floating point.
    assert fn.mean_error(*CASES["E1"]) == 0.0
    assert fn.mean_absolute_error(*CASES["E1"]) == 12.0
    assert fn.mean_absolute_error(*CASES["E2"]) == 100.0
    assert fn.rmse(*CASES["E2"]) == 100.0
    assert fn.mean_error(*CASES["E6"]) == 10.0
    assert fn.mape_nonzero(*CASES["E4"]) == 75.0  # docs/measures.md: E4 mape_nonzero = 75 %
    values = {m: get_measure(m).from_stats(case_stats)["value"] for m in CORE_MEASURES}
    assert values["me"]["E1"] == 0.0
    assert values["mae"]["E1"] == 12.0
    assert values["mae"]["E2"] == 100.0
    assert values["rmse"]["E2"] == 100.0
    assert values["me"]["E6"] == 10.0


def test_e4_mape_nonzero_and_counts(case_stats: pd.DataFrame) -> None:
    # docs/measures.md E4: MAPE undefined (zero actuals), mape_nonzero = 75 %, 2 rows excluded.
    out = get_measure("mape").from_stats(case_stats).loc["E4"]
    assert math.isnan(out["value"])
    assert out["reason"] == "zero_actual"
    assert out["mape_nonzero"] == pytest.approx(75.0, rel=1e-12)
    assert out["n_zero_actual"] == 2


def test_e8_counts_dropped_rows(case_stats: pd.DataFrame) -> None:
    # docs/measures.md E8: rows 2–3 dropped, n_used = 3.
    assert case_stats.loc["E8", "n"] == 3
    assert case_stats.loc["E8", "n_dropped"] == 2


def test_sklearn_mape_blows_up_on_zero_actuals() -> None:
    # docs/measures.md E4: sklearn's raw MAPE returns about 1.1259e17 % (it divides by ~2.2e-16);
    # ours is undefined instead. This is why sklearn is only a reference without zero actuals.
    y, f = _filtered("E4")
    assert 100 * sk.mean_absolute_percentage_error(y, f) == pytest.approx(1.1259e17, rel=1e-4)
    assert math.isnan(fn.mape(y, f))


# ---- cross-checks against sklearn / statsmodels (rel 1e-12) ----------------------------------


def _references(y: np.ndarray, f: np.ndarray) -> dict[str, float]:
    """The reference call for each measure, as named in docs/measures.md §1–8."""
    refs = {
        # docs/measures.md §1: statsmodels.tools.eval_measures.bias(y, f) = mean(y − f)
        "me": float(sm.bias(y, f)),
        # docs/measures.md §3: sklearn.metrics.mean_absolute_error (= statsmodels meanabs, below)
        "mae": sk.mean_absolute_error(y, f),
        # docs/measures.md §7: sklearn.metrics.root_mean_squared_error (= statsmodels rmse, below)
        "rmse": sk.root_mean_squared_error(y, f),
    }
    if np.abs(y).sum() > 0:
        # docs/measures.md §2: 100 * statsmodels bias(y, f) / mean|y|
        refs["bias_pct"] = 100 * float(sm.bias(y, f)) / np.mean(np.abs(y))
        # docs/measures.md §5: 100 * sklearn mean_absolute_error(y, f) / mean|y|
        refs["wape"] = 100 * sk.mean_absolute_error(y, f) / np.mean(np.abs(y))
    if np.all(y != 0):
        # docs/measures.md §4: 100 * sklearn mean_absolute_percentage_error, only without zero
        # actuals
        refs["mape"] = 100 * sk.mean_absolute_percentage_error(y, f)
    if y.size >= 2:
        # docs/measures.md §8: statsmodels.tools.eval_measures.stde(y, f, ddof=1) (default ddof=0 is
        # not the spec's SDE)
        refs["sde"] = float(sm.stde(y, f, ddof=1))
    return refs


@pytest.mark.parametrize("case", CASE_IDS)
def test_against_sklearn_and_statsmodels(case: str, case_stats: pd.DataFrame) -> None:
    y, f = _filtered(case)
    refs = _references(y, f)
    # statsmodels meanabs/rmse agree with the sklearn calls (docs/measures.md §3 and 7).
    assert float(sm.meanabs(y, f)) == pytest.approx(refs["mae"], rel=1e-12)
    assert float(sm.rmse(y, f)) == pytest.approx(refs["rmse"], rel=1e-12)
    for measure, ref in refs.items():
        # Unfiltered input on our side: our functions drop the NaN rows themselves.
        assert FUNCTIONS[measure](*CASES[case]) == pytest.approx(ref, rel=1e-12, abs=1e-12)
        got = get_measure(measure).from_stats(case_stats).loc[case, "value"]
        assert got == pytest.approx(ref, rel=1e-12, abs=1e-12), measure
    # Every measure defined on this case was cross-checked (only undefined cells are skipped).
    defined = {m for m in TABLE if not math.isnan(TABLE[m][CASE_IDS.index(case)])}
    assert defined == set(refs)


def test_e2_e3_pooled_as_one_segment(case_stats: pd.DataFrame) -> None:
    # docs/measures.md, note under the check values: E2 and E3 pooled as one segment give
    # WAPE 1.96078 %
    # and Bias % 0.980392, but pooled MAPE 25.5 % (the mean of the per-series WAPEs 50 and 1).
    expected = {"wape": 1.96078, "bias_pct": 0.980392, "mape": 25.5}
    y = CASES["E2"][0] + CASES["E3"][0]
    f = CASES["E2"][1] + CASES["E3"][1]
    pooled = total_stats(case_stats.loc[["E2", "E3"]].reset_index(), [])
    direct = error_stats(pd.DataFrame({"actual": y, "forecast": f}, dtype=float), [])
    for measure, value in expected.items():
        assert FUNCTIONS[measure](y, f) == pytest.approx(value, rel=1e-5)
        for stats in (pooled, direct):
            assert get_measure(measure).from_stats(stats)["value"].iloc[0] == pytest.approx(
                value, rel=1e-5
            )


@pytest.mark.parametrize("case", [c for c in CASE_IDS if c != "E6"])
def test_rmse_me_sde_relation(case: str, case_stats: pd.DataFrame) -> None:
    # docs/measures.md §7: RMSE² = ME² + (n−1)/n·SDE² (variance decomposition of the mean square).
    n = int(case_stats.loc[case, "n"])
    me, rmse, sde = (fn.mean_error(*CASES[case]), fn.rmse(*CASES[case]), fn.sde(*CASES[case]))
    assert rmse**2 == pytest.approx(me**2 + (n - 1) / n * sde**2, rel=1e-12)
    value = {m: get_measure(m).from_stats(case_stats).loc[case, "value"] for m in TABLE}
    assert value["rmse"] ** 2 == pytest.approx(
        value["me"] ** 2 + (n - 1) / n * value["sde"] ** 2, rel=1e-12
    )


def test_elec_equip_seasonal_naive_regression() -> None:
    # docs/measures.md "Offline datasets": statsmodels.datasets.elec_equip, last 12 months held out,
    # seasonal naive forecast (m = 12): WAPE 2.83290 %, ME 2.88417 (6 significant digits).
    from statsmodels.datasets import elec_equip

    series = elec_equip.load_pandas().data.iloc[:, 0].to_numpy(dtype=float)
    assert series.shape == (257,)
    y, f = series[-12:], series[-24:-12]
    assert fn.wape(y, f) == pytest.approx(2.83290, rel=1e-5)
    assert fn.mean_error(y, f) == pytest.approx(2.88417, rel=1e-5)
    stats = error_stats(pd.DataFrame({"actual": y, "forecast": f}), [])
    assert get_measure("wape").from_stats(stats)["value"].iloc[0] == pytest.approx(
        2.83290, rel=1e-5
    )
    assert get_measure("me").from_stats(stats)["value"].iloc[0] == pytest.approx(2.88417, rel=1e-5)
    # Same figures from the references: statsmodels bias (docs/measures.md §1) and
    # 100 * sklearn mean_absolute_error / mean|y| (docs/measures.md §5).
    assert fn.mean_error(y, f) == pytest.approx(float(sm.bias(y, f)), rel=1e-12)
    assert fn.wape(y, f) == pytest.approx(
        100 * sk.mean_absolute_error(y, f) / np.mean(np.abs(y)), rel=1e-12
    )


def test_functions_reject_bad_shapes() -> None:
    with pytest.raises(ValueError, match="differ in length"):
        fn.mean_error([1.0, 2.0], [1.0])
    with pytest.raises(ValueError, match="1-D"):
        fn.rmse([[1.0]], [[1.0]])
