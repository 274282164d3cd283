"""The scaled, smoothed, probabilistic, value-added and cost measures against docs/measures.md.

Every measure is checked on two paths: the readable reference functions
(``measures/functions.py``) and the engine path (evaluation rows → ``accuracy_results`` with
the actuals index), on the docs/measures.md check values E1–E8 (table rounded to 6 significant
digits → rel 1e-5), the library references docs/measures.md names (scikit-learn, statsmodels,
scipy) and the relations it states.
"""

from __future__ import annotations

import math
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from sklearn import metrics as sk
from statsmodels.tools import eval_measures as sm

from accuracy_checks.checks.accuracy import accuracy_results
from accuracy_checks.checks.judge import Thresholds
from accuracy_checks.evaluation.baselines import ActualsIndex
from accuracy_checks.measures import functions as fn
from accuracy_checks.measures.catalogue import parse_config
from accuracy_checks.measures.data import CostTable, MeasureSettings
from accuracy_checks.results import CheckResult

NAN = float("nan")

# docs/measures.md "Check values": history h, actual y, forecast f, 80 % interval lo/hi (q0.1/q0.9).
# E7's interval is f ± 8. m = 1 with a naive baseline, except E5 (m = 4, seasonal naive).
CASES: dict[str, tuple[list[float], ...]] = {
    "E1": ([95, 105, 100, 90, 120], [80, 105, 115, 90, 110], [100] * 5, [85] * 5, [115] * 5),
    "E2": ([180, 220, 200, 240, 160, 230], [200] * 4, [100, 300, 100, 100],
           [60, 180, 60, 60], [210, 420, 190, 210]),
    "E3": ([9800, 10200, 10000, 10400, 9600, 10300], [10000] * 4, [9900, 10100, 9900, 9900],
           [9800, 9950, 9800, 9800], [10050, 10300, 10050, 10050]),
    "E4": ([0, 3, 0, 0, 5, 0, 2, 0], [0, 4, 0, 1], [1, 2, 0, 0], [0, 0, 0, 0], [2, 3, 1, 2]),
    "E5": ([120, 80, 60, 140, 130, 85, 65, 150, 135, 90, 70, 160], [140, 95, 72, 170],
           [138, 92, 75, 158], [125, 96, 62, 145], [150, 105, 85, 168]),
    "E6": ([45, 55, 48], [50], [40], [35], [48]),
    "E7": ([96, 100, 98, 102, 99, 101], [102, 98, 110, 115, 121, 126, 133, 140],
           [100, 101, 103, 106, 108, 111, 114, 117],
           [92, 93, 95, 98, 100, 103, 106, 109], [108, 109, 111, 114, 116, 119, 122, 125]),
    "E8": ([11, 9, 10, 12], [10, NAN, 12, 8, 9], [9, 11, NAN, 10, 9], [7, 9, NAN, 8, 7],
           [11, 13, NAN, 12, 10]),
}
IDS = list(CASES)
SEASON = {"E5": 4}

# The docs/measures.md table rows of these families (NaN = "undef"); rel 1e-5 (6 digits).
TABLE: dict[str, list[float]] = {
    "smape": [12.2208, 60, 1.00253, 116.667, 4.01153, 22.2222, 9.62603, 10.9162],
    "scale": [13.75, 50, 500, 2.85714, 6.875, 8.5, 3, 1.66667],
    "mase": [0.872727, 2, 0.2, 0.35, 0.727273, 1.17647, 3.79167, 0.6],
    "tracking_signal": [0, 2, 2, 2, 2.8, 1, 7.47253, -1],
    "trigg": [0.0309238, 0.1819, 0.1819, 0.190817, 0.256611, 0.1, 0.576951, -0.1],
    "fva": [8, -35, 2, 20, 0.419287, -16, 5.50265, 22.2222],
    "fva_rel": [0.4, -2.33333, 0.666667, 0.2, 0.0909091, -4, 0.363636, 0.666667],
    "interval_coverage": [80, 75, 100, 75, 50, 0, 37.5, 100],
    "pinball_0.5": [6, 50, 50, 0.5, 2.5, 5, 5.6875, 0.5],
    "pinball_0.1": [2.5, 11, 16.25, 0.125, 1.475, 1.5, 1.8625, 0.166667],
    "pinball_0.9": [1.5, 8.25, 11.25, 0.325, 1.275, 1.8, 4.6125, 0.2],
    "mis": [40, 192.5, 275, 4.5, 27.5, 33, 64.75, 3.66667],
    "msis": [2.90909, 3.85, 0.55, 1.575, 4, 3.88235, 21.5833, 2.2],
}
MEASURES = ["smape", "mase", "tracking_signal", "trigg", "fva_naive", "fva_seasonal_naive",
            "interval_coverage", "pinball", "mis", "msis", "error_cost"]
CONFIG = parse_config(
    "version: 1\n"
    "forecast: {path: f.csv, keys: [sku], period: p, value: v, issued: i}\n"
    "actuals: {path: a.csv, period: p, value: v}\n"
    "frequency: W-MON\nhorizon: 8\n",
    source=Path("/x/c.yaml"),
)
START = pd.Timestamp("2020-01-06")  # a Monday


def expected(row: str, case: str) -> float:
    return TABLE[row][IDS.index(case)]


def case_frames(names: list[str]) -> tuple[pd.DataFrame, pd.DataFrame]:
    """(evaluation rows, actuals) of the cases: one series each, history then targets on a
    weekly grid; one cycle issued on the first target period, every row at lag 1."""
    actuals, rows = [], []
    for name in names:
        h, y, f, lo, hi = CASES[name]
        dates = pd.date_range(START, periods=len(h) + len(y), freq="W-MON")
        actuals.append(pd.DataFrame({"sku": name, "period": dates, "actual": [*h, *y]}))
        rows.append(pd.DataFrame({
            "sku": name, "period": dates[len(h):], "issued": dates[len(h)], "lag": 1,
            "segment": name, "forecast": f, "actual": y, "q0.1": lo, "q0.5": f, "q0.9": hi,
        }))
    return (pd.concat(rows, ignore_index=True).astype({"actual": float, "forecast": float}),
            pd.concat(actuals, ignore_index=True).astype({"actual": float}))


def engine(names: list[str], m: int = 1, costs: CostTable | None = None,
           measures: list[str] | None = None) -> list[CheckResult]:
    rows, actuals = case_frames(names)
    index = ActualsIndex(actuals, ["sku"], "W-MON")
    rows["__series"] = index.codes_of(rows)
    settings = MeasureSettings(seasonal_period=m, quantiles=(0.1, 0.5, 0.9),
                               costs=costs or CostTable(default=(1.0, 1.0)))
    return accuracy_results(rows, keys=["sku"], book=Thresholds(CONFIG),
                            measures=measures or MEASURES, lags=[1], min_obs=1,
                            window=[START], settings=settings, history=index,
                            frequency="W-MON")


@pytest.fixture(scope="module")
def engine_values() -> dict[tuple[str, str, str | None], CheckResult]:
    """Engine results per (case, measure, variant)."""
    out: dict[tuple[str, str, str | None], CheckResult] = {}
    for name in IDS:
        for r in engine([name], SEASON.get(name, 1)):
            if r.segment == name:
                out[(name, str(r.measure), r.details.get("variant"))] = r
    return out


def present(*arrays: list[float]) -> list[np.ndarray]:
    """The rows where no input is NaN (sklearn raises on NaN: filter first, docs/measures.md)."""
    arr = [np.asarray(a, dtype=float) for a in arrays]
    keep = np.all([~np.isnan(a) for a in arr], axis=0)
    return [a[keep] for a in arr]


# --------------------------------------------------------------------------- check values


@pytest.mark.parametrize("case", IDS)
def test_reference_functions_match_the_table(case: str) -> None:
    # Source: docs/measures.md check-value table (6 significant digits → rel 1e-5).
    h, y, f, lo, hi = CASES[case]
    m = SEASON.get(case, 1)
    approx = {"rel": 1e-5, "abs": 1e-12}
    assert fn.smape(y, f) == pytest.approx(expected("smape", case), **approx)
    assert fn.mase_scale(h, m) == pytest.approx(expected("scale", case), **approx)
    assert fn.mase(y, f, h, m) == pytest.approx(expected("mase", case), **approx)
    assert fn.tracking_signal(y, f) == pytest.approx(expected("tracking_signal", case), **approx)
    assert fn.trigg_signal(y, f, 0.1) == pytest.approx(expected("trigg", case), **approx)
    baseline = (fn.seasonal_naive_baseline(h, len(y), m) if m > 1
                else fn.naive_baseline(h, len(y)))
    fva, skill = fn.forecast_value_added(y, f, baseline)
    assert fva == pytest.approx(expected("fva", case), **approx)
    assert skill == pytest.approx(expected("fva_rel", case), **approx)
    assert fn.interval_coverage(y, lo, hi) == pytest.approx(
        expected("interval_coverage", case), **approx)
    assert fn.pinball_loss(y, f, 0.5) == pytest.approx(expected("pinball_0.5", case), **approx)
    assert fn.pinball_loss(y, lo, 0.1) == pytest.approx(expected("pinball_0.1", case), **approx)
    assert fn.pinball_loss(y, hi, 0.9) == pytest.approx(expected("pinball_0.9", case), **approx)
    assert fn.interval_score(y, lo, hi, 0.2) == pytest.approx(expected("mis", case), **approx)
    assert fn.msis(y, lo, hi, 0.2, h, m) == pytest.approx(expected("msis", case), **approx)


@pytest.mark.parametrize("case", IDS)
def test_engine_matches_the_table(
    case: str, engine_values: dict[tuple[str, str, str | None], CheckResult]
) -> None:
    # Source: docs/measures.md check-value table (6 significant digits → rel 1e-5).
    def value(measure: str, variant: str | None = None) -> float:
        result = engine_values[(case, measure, variant)]
        assert result.value is not None, (measure, result.message)
        return result.value

    approx = {"rel": 1e-5, "abs": 1e-12}
    baseline = "fva_seasonal_naive" if case in SEASON else "fva_naive"
    assert value("smape") == pytest.approx(expected("smape", case), **approx)
    assert value("mase") == pytest.approx(expected("mase", case), **approx)
    assert value("tracking_signal") == pytest.approx(expected("tracking_signal", case), **approx)
    assert value("trigg") == pytest.approx(expected("trigg", case), **approx)
    assert value(baseline) == pytest.approx(expected("fva", case), **approx)
    assert engine_values[(case, baseline, None)].details["relative_skill"] == pytest.approx(
        expected("fva_rel", case), **approx)
    assert value("interval_coverage", "80%") == pytest.approx(
        expected("interval_coverage", case), **approx)
    for tau in ("0.1", "0.5", "0.9"):
        assert value("pinball", f"q{tau}") == pytest.approx(
            expected(f"pinball_{tau}", case), **approx)
    assert value("mis", "80%") == pytest.approx(expected("mis", case), **approx)
    assert value("msis", "80%") == pytest.approx(expected("msis", case), **approx)


def test_e8_drops_nan_rows(engine_values: dict[tuple[str, str, str | None], CheckResult]
                           ) -> None:
    # docs/measures.md E8: rows 2–3 dropped, n_used = 3 (for every measure).
    for measure, variant in [("smape", None), ("mase", None), ("fva_naive", None),
                             ("interval_coverage", "80%"), ("mis", "80%"), ("msis", "80%")]:
        assert engine_values[("E8", measure, variant)].n_obs == 3, measure


def test_e5_with_the_wrong_season() -> None:
    # docs/measures.md E5 note: with the wrong m = 1, s = 42.7273 and MASE = 0.117021.
    h, y, f, _, _ = CASES["E5"]
    assert fn.mase_scale(h, 1) == pytest.approx(42.7273, rel=1e-5)
    assert fn.mase(y, f, h, 1) == pytest.approx(0.117021, rel=1e-5)
    (mase,) = [r for r in engine(["E5"], 1, measures=["mase"]) if r.segment == "E5"]
    assert mase.value == pytest.approx(0.117021, rel=1e-5)


def test_e5_seasonal_naive_baseline_scores_mase_0_8() -> None:
    # docs/measures.md E5 note: the seasonal naive baseline has MASE 0.8.
    h, y, _, _, _ = CASES["E5"]
    baseline = fn.seasonal_naive_baseline(h, len(y), 4)
    assert baseline.tolist() == [135, 90, 70, 160]
    assert fn.mase(y, baseline, h, 4) == pytest.approx(0.8, rel=1e-12)


def test_e2_e3_pooled_as_one_segment() -> None:
    # docs/measures.md note: E2 and E3 pooled as one segment give mean per-series MASE 1.1
    # (per series, then the mean: 2 and 0.2), never a MASE pooled across scales.
    results = engine(["E2", "E3"], measures=["mase", "smape"])
    (mase,) = [r for r in results if r.segment == "*" and r.measure == "mase"]
    (smape,) = [r for r in results if r.segment == "*" and r.measure == "smape"]
    assert mase.value == pytest.approx(1.1, rel=1e-12)
    assert mase.details["n_series_used"] == 2
    assert smape.value == pytest.approx((60 + 1.00253) / 2, rel=1e-5)


def test_e4_smape_rows_with_zero_actuals() -> None:
    # docs/measures.md §6: y = 0 ≠ f scores 200 %, y = f = 0 scores 0 (project convention), so E4's
    # rows score 200, 66.67, 0, 200 → 116.667 %. Checked with exact fractions (no library ref).
    from fractions import Fraction

    terms = [Fraction(200), Fraction(2 * 2 * 100, 6), Fraction(0), Fraction(200)]
    assert fn.smape([0, 4, 0, 1], [1, 2, 0, 0]) == pytest.approx(float(sum(terms) / 4), rel=1e-15)


def test_e7_running_tracking_signal() -> None:
    # docs/measures.md E7: running TS = 1, −0.4, 1.5, 2.85714, 4.11765, 5.26531, 6.38235, 7.47253;
    # first breach of ±4 at row 5.
    _, y, f, _, _ = CASES["E7"]
    running = [fn.tracking_signal(y[:k], f[:k]) for k in range(1, len(y) + 1)]
    assert running == pytest.approx(
        [1, -0.4, 1.5, 2.85714, 4.11765, 5.26531, 6.38235, 7.47253], rel=1e-5)
    assert next(k for k, ts in enumerate(running, 1) if abs(ts) > 4) == 5


def test_e7_coverage_shortfall_binomial_p_value(
    engine_values: dict[tuple[str, str, str | None], CheckResult]
) -> None:
    # docs/measures.md §13 / E7: 3 of 8 inside vs 0.8 nominal, scipy.stats.binomtest p = 0.0104.
    from scipy.stats import binomtest

    result = engine_values[("E7", "interval_coverage", "80%")]
    assert result.details["n_inside"] == 3 and result.n_obs == 8
    reference = binomtest(3, 8, p=0.8, alternative="less").pvalue
    assert reference == pytest.approx(0.0104, abs=5e-5)
    assert result.details["p_value"] == pytest.approx(reference, rel=1e-12)
    assert result.details["nominal_pct"] == pytest.approx(80.0, rel=1e-12)


# --------------------------------------------------------------------------- references


@pytest.mark.parametrize("case", IDS)
def test_library_references(case: str,
                            engine_values: dict[tuple[str, str, str | None], CheckResult]
                            ) -> None:
    h, y, f, lo, hi = CASES[case]
    m = SEASON.get(case, 1)
    hist = np.asarray(h, dtype=float)
    yy, ff, ll, uu = present(y, f, lo, hi)

    def got(measure: str, variant: str | None = None) -> float:
        value = engine_values[(case, measure, variant)].value
        assert value is not None
        return value

    # docs/measures.md §9: sklearn mean_absolute_error(y, f) / mean_absolute_error(h[m:], h[:-m])
    mase = sk.mean_absolute_error(yy, ff) / sk.mean_absolute_error(hist[m:], hist[:-m])
    assert got("mase") == pytest.approx(mase, rel=1e-12)
    assert fn.mase(y, f, h, m) == pytest.approx(mase, rel=1e-12)
    # docs/measures.md §10: n * statsmodels bias(y, f) / meanabs(y, f)
    ts = len(yy) * float(sm.bias(yy, ff)) / float(sm.meanabs(yy, ff))
    assert got("tracking_signal") == pytest.approx(ts, rel=1e-12, abs=1e-12)
    # docs/measures.md §11: scipy.signal.lfilter([a], [1, a − 1], e, zi=[(1 − a)·E0]) on e and |e|
    from scipy.signal import lfilter

    a, e = 0.1, yy - ff
    smoothed = lfilter([a], [1, a - 1], e, zi=[0.0])[0][-1]
    m0 = np.mean(np.abs(e))
    smoothed_abs = lfilter([a], [1, a - 1], np.abs(e), zi=[(1 - a) * m0])[0][-1]
    assert got("trigg") == pytest.approx(smoothed / smoothed_abs, rel=1e-12, abs=1e-15)
    # docs/measures.md §12: two sklearn mean_absolute_error calls
    baseline = (fn.seasonal_naive_baseline(h, len(y), m) if m > 1
                else fn.naive_baseline(h, len(y)))
    yb, fb, bb = present(y, f, baseline)
    wape_b = 100 * sk.mean_absolute_error(yb, bb) / np.mean(np.abs(yb))
    wape_f = 100 * sk.mean_absolute_error(yb, fb) / np.mean(np.abs(yb))
    fva_id = "fva_seasonal_naive" if m > 1 else "fva_naive"
    assert got(fva_id) == pytest.approx(wape_b - wape_f, rel=1e-12, abs=1e-12)
    # docs/measures.md §14: sklearn mean_pinball_loss(y, q, alpha=τ)
    yq, lq, fq, uq = present(y, lo, f, hi)
    for tau, q in (("0.1", lq), ("0.5", fq), ("0.9", uq)):
        ref = sk.mean_pinball_loss(yq, q, alpha=float(tau))
        assert got("pinball", f"q{tau}") == pytest.approx(ref, rel=1e-12, abs=1e-12)
    # docs/measures.md §15: (2/α)(mean_pinball_loss(y, L, α/2) + mean_pinball_loss(y, U, 1 − α/2))
    alpha = 0.2
    mis = (2 / alpha) * (sk.mean_pinball_loss(yy, ll, alpha=alpha / 2)
                         + sk.mean_pinball_loss(yy, uu, alpha=1 - alpha / 2))
    assert got("mis", "80%") == pytest.approx(mis, rel=1e-12)
    scale = sk.mean_absolute_error(hist[m:], hist[:-m])
    assert got("msis", "80%") == pytest.approx(mis / scale, rel=1e-12)


def test_elec_equip_seasonal_naive_mase_regression() -> None:
    # docs/measures.md "Offline datasets": statsmodels.datasets.elec_equip, last 12 months held out,
    # seasonal naive forecast (m = 12): MASE 0.414970, s = 7.00652 (6 significant digits).
    from statsmodels.datasets import elec_equip

    series = elec_equip.load_pandas().data.iloc[:, 0].to_numpy(dtype=float)
    history, y = series[:-12], series[-12:]
    forecast = fn.seasonal_naive_baseline(history, 12, 12)
    assert fn.mase_scale(history, 12) == pytest.approx(7.00652, rel=1e-5)
    assert fn.mase(y, forecast, history, 12) == pytest.approx(0.414970, rel=1e-5)
    # the engine, monthly grid, the forecast issued on the first held-out month
    dates = pd.date_range("1995-01-01", periods=series.size, freq="MS")
    actuals = pd.DataFrame({"sku": "elec", "period": dates, "actual": series})
    rows = pd.DataFrame({"sku": "elec", "period": dates[-12:], "issued": dates[-12], "lag": 1,
                         "segment": "all", "forecast": forecast, "actual": y})
    index = ActualsIndex(actuals, ["sku"], "MS")
    rows["__series"] = index.codes_of(rows)
    results = accuracy_results(
        rows, keys=["sku"], book=Thresholds(CONFIG), measures=["mase", "fva_seasonal_naive"],
        lags=[1], min_obs=1, window=[dates[-1]], settings=MeasureSettings(seasonal_period=12),
        history=index, frequency="MS")
    (mase,) = [r for r in results if r.measure == "mase" and r.segment == "all"]
    assert mase.value == pytest.approx(0.414970, rel=1e-5)
    # the forecast *is* the seasonal naive baseline: it adds nothing over it
    (fva,) = [r for r in results if r.measure == "fva_seasonal_naive" and r.segment == "all"]
    assert fva.value == pytest.approx(0.0, abs=1e-12)


# --------------------------------------------------------------------------- relations


@pytest.mark.parametrize("case", IDS)
def test_mae_is_twice_the_median_pinball_loss(case: str) -> None:
    # docs/measures.md §14: τ = 0.5 gives MAE/2.
    _, y, f, _, _ = CASES[case]
    assert fn.mean_absolute_error(y, f) == pytest.approx(2 * fn.pinball_loss(y, f, 0.5),
                                                         rel=1e-12)


@pytest.mark.parametrize("m", [1, 4, 12])
def test_in_sample_seasonal_naive_scores_mase_exactly_one(m: int) -> None:
    # docs/measures.md §9: "The in-sample seasonal naive forecast scores exactly 1."
    from statsmodels.datasets import elec_equip

    h = elec_equip.load_pandas().data.iloc[:, 0].to_numpy(dtype=float)
    assert fn.mase(h[m:], h[:-m], h, m) == pytest.approx(1.0, rel=1e-14)


@pytest.mark.parametrize("case", [c for c in IDS if c != "E6"])
def test_rmse_me_sde_relation(case: str) -> None:
    # docs/measures.md §7: RMSE² = ME² + (n − 1)/n · SDE².
    _, y, f, _, _ = CASES[case]
    (yy,) = present(y, f)[:1]
    n = yy.size
    assert fn.rmse(y, f) ** 2 == pytest.approx(
        fn.mean_error(y, f) ** 2 + (n - 1) / n * fn.sde(y, f) ** 2, rel=1e-12)


@pytest.mark.parametrize("case", IDS)
def test_error_cost_is_a_pinball_loss_at_the_critical_fractile(case: str) -> None:
    # Cost = (c_under + c_over) · n · pinball at τ* = c_under/(c_under + c_over): the pinball
    # loss of docs/measures.md §14 (Koenker & Bassett 1978) scaled to money; reference
    # sklearn.metrics.mean_pinball_loss.
    _, y, f, _, _ = CASES[case]
    yy, ff = present(y, f)
    under, over = 3.0, 1.5
    tau = under / (under + over)
    want = (under + over) * yy.size * sk.mean_pinball_loss(yy, ff, alpha=tau)
    assert fn.error_cost(y, f, under, over) == pytest.approx(want, rel=1e-12, abs=1e-12)
    results = engine([case], costs=CostTable(currency="EUR", default=(under, over)),
                     measures=["error_cost"])
    (cost,) = [r for r in results if r.segment == case]
    assert cost.value == pytest.approx(want, rel=1e-12, abs=1e-12)
    assert cost.unit == "EUR"
    assert cost.details["tau_star"] == pytest.approx(tau, rel=1e-15)
    assert cost.details["pinball_at_tau_star"] == pytest.approx(
        sk.mean_pinball_loss(yy, ff, alpha=tau), rel=1e-12, abs=1e-12)


def test_error_cost_adds_each_segment_at_its_own_costs() -> None:
    # "*" is the sum of the segments' money; τ* is reported only when all rows share it.
    costs = CostTable(default=(1.0, 1.0), segments={"E2": (4.0, 1.0)})
    results = engine(["E1", "E2"], costs=costs, measures=["error_cost"])
    value = {r.segment: r for r in results}
    want_e1 = fn.error_cost(*CASES["E1"][1:3], 1.0, 1.0)
    want_e2 = fn.error_cost(*CASES["E2"][1:3], 4.0, 1.0)
    assert value["E1"].value == pytest.approx(want_e1)
    assert value["E2"].value == pytest.approx(want_e2)
    assert value["*"].value == pytest.approx(want_e1 + want_e2)
    assert value["E2"].details["tau_star"] == pytest.approx(0.8)
    assert value["*"].details["tau_star"] is None


def test_error_cost_without_costs_for_a_segment_is_not_configured() -> None:
    results = engine(["E1", "E2"], costs=CostTable(segments={"E1": (1.0, 2.0)}),
                     measures=["error_cost"])
    value = {r.segment: r for r in results}
    assert value["E1"].value is not None
    assert value["E2"].value is None and value["E2"].reason == "not_configured"
    assert value["*"].value is None and value["*"].reason == "not_configured"


def test_trigg_edge_cases_from_the_table() -> None:
    # docs/measures.md edge-case table: TS/Trigg are 0 when every e = 0; n = 1 gives sign(e) and
    # α·sign(e).
    assert fn.tracking_signal([5, 5], [5, 5]) == 0.0
    assert fn.trigg_signal([5, 5], [5, 5]) == 0.0
    assert fn.tracking_signal([3], [5]) == -1.0
    assert fn.trigg_signal([3], [5], alpha=0.2) == pytest.approx(-0.2, rel=1e-15)


def test_mase_undefined_cases() -> None:
    # docs/measures.md §9: N ≤ m → too_few_rows; s = 0 → zero_scale (edge-case table: undefined if
    # the history is all zero).
    assert math.isnan(fn.mase([1, 2], [1, 1], [5, 6, 7], m=4))
    assert math.isnan(fn.mase([1, 2], [1, 1], [0, 0, 0]))


def test_error_cost_of_a_window_without_rows_is_no_data() -> None:
    """A window with no evaluation row (the tracking window may still hold some) gives every
    group an undefined cost instead of failing on an empty reduction (a regression: numpy's
    ``min`` over a zero-width axis raised)."""
    from accuracy_checks.measures.cost import error_cost_from_data
    from accuracy_checks.measures.data import MeasureData
    from accuracy_checks.sources import frames as F

    rows = pd.DataFrame({F.SEGMENT: pd.Series([], dtype=object),
                         F.ACTUAL: pd.Series([], dtype=float),
                         F.FORECAST: pd.Series([], dtype=float)})
    groups = pd.DataFrame({"lag": [1, 1], "segment": ["a", "*"]})
    settings = MeasureSettings(costs=CostTable(default=(2.0, 1.0)))
    data = MeasureData(rows, np.array([], dtype=np.int64), groups, np.array([], dtype=np.int64),
                       0, settings)
    out = error_cost_from_data(data)
    assert len(out) == 2
    assert out["value"].isna().all()
