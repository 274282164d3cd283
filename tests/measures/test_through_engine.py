"""The measure families inside a run of the gate (tests/conftest.py's small project): figures
recomputed directly from the files with numpy, per-lag results, limits and judging, worst
offenders, the lag-by-segment tables, and the bad inputs of issue 3.

Formulas as in docs/measures.md (9 MASE, 10 tracking signal, 12 FVA, 13 coverage, 14 pinball);
e = actual − forecast.
"""

from __future__ import annotations

import io
import math
from collections.abc import Callable

import numpy as np
import pandas as pd
import pytest

from accuracy_checks import load_config, run_checks
from accuracy_checks.cli.main import main
from accuracy_checks.errors import ConfigError
from accuracy_checks.outputs import render_console, render_markdown
from accuracy_checks.results import CheckResult, RunReport
from tests.support.project import CONFIG, EARLIER, Project, forecast_frame


def config_text(evaluation: str = "", extra: str = "") -> str:
    """conftest's config with more ``evaluation`` keys and top-level sections."""
    text = CONFIG.format(extra="")
    text = text.replace("  min_obs: 2\n", "  min_obs: 2\n" + evaluation)
    return text + extra


def find(report: RunReport, measure: str, segment: str = "*", lag: int = 1,
         variant: str | None = None) -> CheckResult:
    hits = [r for r in report.results if r.check == "accuracy" and r.measure == measure
            and r.segment == segment and r.lag == lag and r.details.get("variant") == variant]
    assert len(hits) == 1, (measure, segment, lag, variant, len(hits))
    return hits[0]


def files(project: Project) -> tuple[pd.DataFrame, pd.DataFrame]:
    earlier = pd.read_csv(project.data / "earlier.csv", parse_dates=["week", "issued_on"])
    actuals = pd.read_csv(project.data / "actuals.csv", parse_dates=["week"])
    return earlier, actuals


def lag1_rows(project: Project) -> pd.DataFrame:
    """Lag-1 rows of the window (the 2 most recent weeks with actuals), joined by hand."""
    earlier, actuals = files(project)
    window = sorted(actuals["week"].unique())[-2:]
    rows = earlier[(earlier["week"] == earlier["issued_on"]) & earlier["week"].isin(window)]
    return rows.merge(actuals, on=["store", "product", "week"])


def test_every_measure_in_a_run_equals_numpy_on_the_files(
    make_project: Callable[..., Project]
) -> None:
    project = make_project(config_text=config_text(
        "  measures: [all]\n  seasonal_period: 1\n",
        "costs: {currency: EUR, default: {under: 3, over: 1}}\n"))
    report = run_checks(load_config(project.config))
    j = lag1_rows(project)
    _, actuals = files(project)
    y, f = j["units_sold"].to_numpy(), j["units"].to_numpy()
    e = y - f

    # MASE (docs/measures.md §9): per series MAE / s, s from the actuals before the earliest cycle
    # evaluated (2026-02-16), then the unweighted mean over the series.
    earliest = j["issued_on"].min()
    per_series = []
    for (store, product), rows in j.groupby(["store", "product"]):
        h = actuals[(actuals["store"] == store) & (actuals["product"] == product)
                    & (actuals["week"] < earliest)].sort_values("week")["units_sold"].to_numpy()
        scale = np.mean(np.abs(np.diff(h)))
        per_series.append(np.mean(np.abs(rows["units_sold"] - rows["units"])) / scale)
    assert find(report, "mase").value == pytest.approx(np.mean(per_series), rel=1e-12)
    # sMAPE (docs/measures.md §6): per series, then the mean
    smape = j.assign(t=200 * np.abs(e) / (np.abs(y) + np.abs(f))).groupby(
        ["store", "product"])["t"].mean().mean()
    assert find(report, "smape").value == pytest.approx(smape, rel=1e-12)
    # FVA vs naive (docs/measures.md §12): the last actual before each cycle's issue date
    last = [actuals[(actuals["store"] == r.store) & (actuals["product"] == r.product)
                    & (actuals["week"] < r.issued_on)].sort_values("week")["units_sold"].iloc[-1]
            for r in j.itertuples()]
    fva = 100 * (np.abs(y - np.array(last)).sum() - np.abs(e).sum()) / np.abs(y).sum()
    assert find(report, "fva_naive").value == pytest.approx(fva, rel=1e-12)
    # coverage, pinball (docs/measures.md §13, 14)
    inside = (j["p10"] <= y) & (y <= j["p90"])
    assert find(report, "interval_coverage", variant="80%").value == pytest.approx(
        100 * inside.mean(), rel=1e-12)
    u = y - j["p90"].to_numpy()
    assert find(report, "pinball", variant="q0.9").value == pytest.approx(
        np.mean(np.where(u >= 0, 0.9 * u, -0.1 * u)), rel=1e-12)
    # cost of error: 3 EUR per unit under-forecast, 1 per unit over
    cost = find(report, "error_cost")
    assert cost.value == pytest.approx(np.sum(3 * np.maximum(e, 0) + np.maximum(-e, 0)))
    assert cost.unit == "EUR" and cost.details["tau_star"] == pytest.approx(0.75)
    # tracking signal (docs/measures.md §10): the segment's errors summed by period
    by_week = pd.Series(e).groupby(j["week"].to_numpy()).sum().to_numpy()
    ts = find(report, "tracking_signal")
    assert ts.value == pytest.approx(by_week.sum() / np.mean(np.abs(by_week)), rel=1e-12)
    assert ts.details["window_periods"] == 2
    # unitless ratios are reported without a unit
    assert find(report, "mase").unit is None and ts.unit is None


def test_every_measure_is_broken_down_by_lag(make_project: Callable[..., Project]) -> None:
    text = config_text("  measures: [smape, mase, fva_naive, pinball]\n  seasonal_period: 1\n")
    text = text.replace("  lags: [1]\n", "  lags: [1, 2]\n")
    project = make_project(config_text=text)
    report = run_checks(load_config(project.config))
    for measure, variant in [("smape", None), ("mase", None), ("fva_naive", None),
                             ("pinball", "q0.1"), ("pinball", "q0.9"), ("wape", None)]:
        for segment in ("*", "tools", "plants"):
            for lag in (1, 2):
                assert find(report, measure, segment, lag, variant).value is not None
    markdown = render_markdown(report)
    assert "### Accuracy by lag and segment (wape; worst status of any measure)" in markdown
    assert "| segment | lag 1 | lag 2 |" in markdown


def test_seasonal_period_longer_than_history_is_skipped_and_counted(
    make_project: Callable[..., Project]
) -> None:
    # weekly data → m = 52 by default; the project has 6 weeks of history before 2026-02-16
    project = make_project(config_text=config_text(
        "  measures: [mase, msis]\n",
        "").replace("    wape: {warn: 25, fail: 40}\n",
                    "    wape: {warn: 25, fail: 40}\n    mase: {warn: 1}\n"))
    report = run_checks(load_config(project.config))
    mase = find(report, "mase", "tools")
    assert mase.value is None and mase.reason == "too_few_rows"
    assert mase.details["n_series_skipped"] == 2 and mase.details["skipped_too_few_rows"] == 2
    assert mase.details["seasonal_period"] == 52
    assert mase.status == "warn"  # evaluation.undefined_status under a threshold
    msis = find(report, "msis", "tools", variant="80%")
    assert msis.value is None and msis.reason == "too_few_rows" and msis.status == "skipped"


def test_costs_that_are_zero_or_negative_are_a_config_error(
    make_project: Callable[..., Project], capsys: pytest.CaptureFixture[str]
) -> None:
    for bad in ("{under: 0, over: 1}", "{under: 2, over: -1}"):
        project = make_project(config_text=config_text(extra=f"costs: {{default: {bad}}}\n"))
        with pytest.raises(ConfigError, match=r"costs\.default\.(under|over)"):
            load_config(project.config)
        code = main(["run", "--config", str(project.config), "-q", "--no-color"])
        assert code == 2
        assert "greater than 0" in capsys.readouterr().err


def test_unknown_measure_in_evaluation_measures_is_a_config_error(
    make_project: Callable[..., Project]
) -> None:
    project = make_project(config_text=config_text("  measures: [mase, smap]\n"))
    with pytest.raises(ConfigError, match="did you mean 'smape'"):
        load_config(project.config)


def test_measures_the_config_cannot_feed_are_config_errors_or_left_out(
    make_project: Callable[..., Project]
) -> None:
    # named explicitly without their inputs: exit 2 with a message naming key and input
    project = make_project(config_text=config_text("  measures: [error_cost]\n"))
    with pytest.raises(ConfigError, match=r"evaluation\.measures names 'error_cost', which "
                                          r"needs a `costs` section"):
        load_config(project.config)
    text = config_text().replace("  quantiles: {0.1: p10, 0.9: p90}\n",
                                 "  quantiles: {0.9: p90}\n").replace(
        "    wape: {warn: 25, fail: 40}\n",
        "    wape: {warn: 25, fail: 40}\n    interval_coverage: {warn: 5}\n")
    project = make_project(config_text=text)
    with pytest.raises(ConfigError, match=r"thresholds\.default names 'interval_coverage', "
                                          r"which needs two quantile levels"):
        load_config(project.config)
    # "all" only reports what the config can feed
    project = make_project(config_text=config_text("  measures: [all]\n"))
    report = run_checks(load_config(project.config))
    assert not [r for r in report.results if r.measure == "error_cost"]
    assert find(report, "mase").reason == "too_few_rows"  # m = 52 > 6 weeks of history


def test_crossed_quantiles_fail_the_output_check_and_are_left_out_of_intervals(
    make_project: Callable[..., Project]
) -> None:
    current = forecast_frame(pd.Timestamp("2026-03-02"))
    current.loc[0, ["p10", "p90"]] = [200.0, 10.0]
    earlier = pd.concat([forecast_frame(d) for d in EARLIER], ignore_index=True)
    crossed = (earlier["week"] == earlier["issued_on"]) & (earlier["store"] == "S1")
    earlier.loc[crossed, ["p10", "p90"]] = earlier.loc[crossed, ["p90", "p10"]].to_numpy()
    project = make_project(forecast=current, earlier=earlier,
                           config_text=config_text("  measures: [interval_coverage, mis]\n"))
    report = run_checks(load_config(project.config))
    (order,) = [r for r in report.results if r.check == "output.quantile_order"]
    assert order.status == "fail" and order.examples
    coverage = find(report, "interval_coverage", variant="80%")
    assert coverage.details["n_crossed"] == 6 and coverage.n_obs == 6
    assert find(report, "mis", variant="80%").details["n_crossed"] == 6


def test_breached_segments_list_their_worst_offenders(
    make_project: Callable[..., Project]
) -> None:
    earlier = pd.concat([forecast_frame(d) for d in EARLIER], ignore_index=True)
    worst = (earlier["store"] == "S2") & (earlier["product"] == "P3")
    earlier.loc[worst, "units"] *= 0.6  # S2/P3 far under-forecast
    project = make_project(earlier=earlier, config_text=config_text("  offenders: 3\n"))
    report = run_checks(load_config(project.config))
    bias = find(report, "bias_pct", "plants")
    assert bias.status == "fail"
    j = lag1_rows(project)
    j = j[j["product"].isin(["P2", "P3"])].assign(e=lambda d: d["units_sold"] - d["units"])
    by_series = j.groupby(["store", "product"])["e"].sum().sort_values(ascending=False)
    assert len(bias.examples) == 3
    top = bias.examples[0]
    assert (top["store"], top["product"]) == by_series.index[0] == ("S2", "P3")
    assert top["error"] == pytest.approx(by_series.iloc[0], rel=1e-12)
    assert top["share_of_bias_pct"] == pytest.approx(100 * by_series.iloc[0] / j["e"].sum())
    assert [(x["store"], x["product"]) for x in bias.examples] == list(by_series.index[:3])
    assert "Worst series: store=S2, product=P3" in bias.message
    # WAPE ranks by the absolute error; "*" examples name the segment too
    wape = find(report, "wape", "*")
    if wape.status in ("warn", "fail"):
        assert wape.examples[0]["segment"] == "plants"
    shares = [x["share_of_abs_error_pct"] for x in bias.examples]
    assert all(0 <= s <= 100 for s in shares)
    # passing results carry no examples
    assert not find(report, "bias_pct", "tools").examples
    # the console shows the offenders of an accuracy failure; Markdown lists them too
    buffer = io.StringIO()
    render_console(report, file=buffer, color=False)
    text = buffer.getvalue()
    assert "store=S2, product=P3" in text
    assert "Accuracy by lag (wape; worst status of any measure)" in text
    assert "store" in render_markdown(report).split("<details>")[1]


def test_coverage_breach_needs_the_binomial_test(make_project: Callable[..., Project]) -> None:
    # p10/p90 are ±20 % of a forecast 3 % low: every actual is inside → coverage 100 % vs 80 %
    # nominal, an excess of 20 pp; with 4 rows per segment the upper-tail p-value is
    # 0.8⁴ = 0.41 (chance), with 12 rows for "*" 0.8¹² = 0.069 (still chance at 0.05).
    text = config_text("  measures: [interval_coverage]\n").replace(
        "    wape: {warn: 25, fail: 40}\n",
        "    wape: {warn: 25, fail: 40}\n    interval_coverage: {warn: 5, fail: 15}\n")
    project = make_project(config_text=text)
    report = run_checks(load_config(project.config))
    coverage = find(report, "interval_coverage", "*", variant="80%")
    assert coverage.value == 100.0
    assert coverage.warn == (75.0, 85.0) and coverage.fail == (65.0, 95.0)
    assert coverage.details["p_value"] == pytest.approx(0.8**12, rel=1e-12)
    assert coverage.status == "pass" and "chance" in coverage.message
    project = make_project(config_text=text.replace(
        "  measures: [interval_coverage]\n",
        "  measures: [interval_coverage]\n  coverage_test_level: 0.1\n"))
    report = run_checks(load_config(project.config))
    assert find(report, "interval_coverage", "*", variant="80%").status == "fail"


def test_tracking_signal_limits_scale_with_the_window(
    make_project: Callable[..., Project]
) -> None:
    report = run_checks(load_config(make_project(
        config_text=config_text("  measures: [tracking_signal]\n")).config))
    ts = find(report, "tracking_signal", "tools")
    # 2 periods, all forecasts 3 % low: TS = n = 2; scaled limit 1.96·1.25·√2 = 3.46
    assert ts.value == pytest.approx(2.0)
    assert ts.warn == pytest.approx(1.96 * 1.25 * math.sqrt(2)) and ts.fail is None
    assert ts.status == "pass"
    text = config_text("  measures: [tracking_signal]\n  tracking_limit: constant\n").replace(
        "    wape: {warn: 25, fail: 40}\n",
        "    wape: {warn: 25, fail: 40}\n    tracking_signal: {warn: 1.5, fail: 3}\n")
    report = run_checks(load_config(make_project(config_text=text).config))
    ts = find(report, "tracking_signal", "tools")
    assert (ts.warn, ts.fail, ts.status) == (1.5, 3.0, "warn")
    assert "sustained under-forecast" in ts.message
