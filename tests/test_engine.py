"""End-to-end runs of the engine on the small hand-built project (tests/conftest.py).

Expected figures are recomputed here directly from the files with numpy and the formulas of
docs/measures.md (Bias % = 100·Σe/Σ|y|, WAPE = 100·Σ|e|/Σ|y|, e = actual − forecast).
"""

from __future__ import annotations

from collections.abc import Callable

import numpy as np
import pandas as pd
import pytest

from accuracy_checks import load_config, run_checks
from accuracy_checks.results import CheckResult, RunReport
from tests.support.project import CURRENT, EARLIER, Project, actuals_frame, forecast_frame


def find(report: RunReport, check: str, segment: str = "*", measure: str | None = None,
         lag: int | None = None) -> CheckResult:
    hits = [r for r in report.results if r.check == check and r.segment == segment
            and (measure is None or r.measure == measure) and (lag is None or r.lag == lag)]
    assert len(hits) == 1, (check, segment, measure, [r.check for r in report.results])
    return hits[0]


def direct(earlier: pd.DataFrame, actuals: pd.DataFrame, periods: list[str],
           mask: Callable[[pd.DataFrame], pd.Series] | None = None) -> dict[str, float]:
    """Bias % and WAPE of lag-1 rows (period == issue date here) in ``periods``, by numpy."""
    rows = earlier[(earlier["week"] == earlier["issued_on"]) & earlier["week"].isin(periods)]
    j = rows.merge(actuals, on=["store", "product", "week"])
    if mask is not None:
        j = j[mask(j)]
    y = j["units_sold"].to_numpy()
    e = y - j["units"].to_numpy()
    scale = np.abs(y).sum()
    return {"bias_pct": 100 * e.sum() / scale, "wape": 100 * np.abs(e).sum() / scale, "n": len(j)}


def test_clean_project_passes_with_exact_numbers(make_project: Callable[..., Project]) -> None:
    project = make_project()
    report = run_checks(load_config(project.config))
    assert report.status == "pass", [r.message for r in report.results if r.status != "pass"]
    assert report.cycle == "2026-03-02" and report.attempt == 1
    earlier = pd.read_csv(project.data / "earlier.csv")
    actuals = pd.read_csv(project.data / "actuals.csv")
    want = direct(earlier, actuals, ["2026-02-16", "2026-02-23"])
    bias = find(report, "accuracy", "*", "bias_pct", 1)
    wape = find(report, "accuracy", "*", "wape", 1)
    assert bias.value == pytest.approx(want["bias_pct"], rel=1e-12)
    assert wape.value == pytest.approx(want["wape"], rel=1e-12)
    assert bias.n_obs == want["n"] == 12 and bias.n_series == 6
    assert "under-forecast by 3 %" in bias.message
    tools = find(report, "accuracy", "tools", "wape", 1)
    assert tools.n_obs == 4 and tools.n_series == 2
    # every core measure for every segment and "*"
    got = {(r.segment, r.measure) for r in report.results if r.check == "accuracy"}
    assert got == {(s, m) for s in ("*", "tools", "plants")
                   for m in ("me", "bias_pct", "mae", "mape", "wape", "rmse", "sde")}
    assert [c["cycle"] for c in report.evaluated_cycles] == ["2026-02-16", "2026-02-23"]


def test_biased_segment_fails_and_others_pass(make_project: Callable[..., Project]) -> None:
    earlier = pd.concat([forecast_frame(d) for d in EARLIER], ignore_index=True)
    plants = earlier["product"].isin(["P2", "P3"])
    earlier.loc[plants, "units"] = earlier.loc[plants, "units"] / 0.97 * 0.85
    project = make_project(earlier=earlier)
    report = run_checks(load_config(project.config))
    actuals = pd.read_csv(project.data / "actuals.csv")
    earlier = pd.read_csv(project.data / "earlier.csv")
    periods = ["2026-02-16", "2026-02-23"]
    plants_bias = find(report, "accuracy", "plants", "bias_pct", 1)
    want = direct(earlier, actuals, periods, lambda j: j["product"].isin(["P2", "P3"]))
    assert plants_bias.value == pytest.approx(want["bias_pct"], rel=1e-12)
    assert plants_bias.status == "fail" and plants_bias.fail == 10
    assert "under-forecast by 15 %" in plants_bias.message
    assert find(report, "accuracy", "tools", "bias_pct", 1).status == "pass"
    total = find(report, "accuracy", "*", "bias_pct", 1)
    assert total.value == pytest.approx(direct(earlier, actuals, periods)["bias_pct"], rel=1e-12)
    assert report.status == "fail"


def test_frames_in_memory_give_the_numpy_figures(make_project: Callable[..., Project]) -> None:
    """run_checks with every input as a frame: the plants' bias and WAPE recomputed with
    numpy from the same frames (docs/measures.md formulas)."""
    earlier = pd.concat([forecast_frame(d) for d in EARLIER], ignore_index=True)
    plants = earlier["product"].isin(["P2", "P3"])
    earlier.loc[plants, "units"] = earlier.loc[plants, "units"] / 0.97 * 0.85
    project = make_project(earlier=earlier)
    actuals = actuals_frame(CURRENT)
    report = run_checks(load_config(project.config), forecast=forecast_frame(CURRENT),
                        actuals=actuals, history=[earlier],
                        mapping=pd.read_csv(project.data / "products.csv"))
    periods = ["2026-02-16", "2026-02-23"]
    want = direct(earlier, actuals, periods, lambda j: j["product"].isin(["P2", "P3"]))
    got = find(report, "accuracy", "plants", "bias_pct", 1)
    assert got.value == pytest.approx(want["bias_pct"], rel=1e-12) and got.status == "fail"
    assert find(report, "accuracy", "plants", "wape", 1).value == pytest.approx(
        want["wape"], rel=1e-12)
    assert got.n_obs == want["n"]
    assert report.inputs["forecast"]["frame"] == "pandas.DataFrame"


def test_segment_override_and_asymmetric_bounds(make_project: Callable[..., Project]) -> None:
    earlier = pd.concat([forecast_frame(d, bias=1.08) for d in EARLIER], ignore_index=True)
    extra = ("  segments:\n    plants:\n      bias_pct: {warn: [-9, 5], fail: [-12, 10]}\n"
             '    "*":\n      wape: {warn: 1, fail: 50}\n')
    project = make_project(earlier=earlier, extra=extra)
    report = run_checks(load_config(project.config))
    plants = find(report, "accuracy", "plants", "bias_pct", 1)
    assert plants.value == pytest.approx(-8.0, rel=1e-9)  # 8 % over-forecast, inside [-9, 5]
    assert plants.status == "pass" and plants.warn == (-9, 5)
    tools = find(report, "accuracy", "tools", "bias_pct", 1)
    assert tools.status == "warn"  # default ±5 applies: |−8| > 5
    assert "over-forecast by 8 %" in tools.message
    star = find(report, "accuracy", "*", "wape", 1)
    assert star.status == "warn" and star.warn == 1  # the "*" override
    assert find(report, "accuracy", "tools", "wape", 1).warn == 25


def test_min_obs_skips_with_reason(make_project: Callable[..., Project]) -> None:
    project = make_project()
    text = project.config.read_text().replace("min_obs: 2", "min_obs: 5")
    project.config.write_text(text)
    report = run_checks(load_config(project.config))
    tools = find(report, "accuracy", "tools", "wape", 1)
    assert tools.status == "skipped" and tools.reason == "too_few_rows"
    assert "only 4" in tools.message and "min_obs is 5" in tools.message
    assert find(report, "accuracy", "plants", "wape", 1).status == "pass"


def test_zero_actuals_make_mape_undefined_not_huge(make_project: Callable[..., Project]) -> None:
    actuals = actuals_frame(CURRENT)
    actuals.loc[(actuals["product"] == "P1") & (actuals["week"] == "2026-02-23"),
                "units_sold"] = 0.0
    project = make_project(actuals=actuals)
    report = run_checks(load_config(project.config))
    mape = find(report, "accuracy", "tools", "mape", 1)
    assert mape.value is None and mape.reason == "zero_actual"
    assert mape.details["n_zero_actual"] == 2
    assert mape.details["mape_nonzero"] == pytest.approx(3.0, rel=1e-9)
    assert mape.status == "skipped"  # no threshold on mape here
    assert find(report, "accuracy", "tools", "wape", 1).value is not None


def test_missing_series_and_horizon_gap_fail(make_project: Callable[..., Project]) -> None:
    forecast = forecast_frame(CURRENT)
    forecast = forecast[~((forecast["store"] == "S2") & (forecast["product"] == "P3"))]
    gap = (forecast["store"] == "S1") & (forecast["product"] == "P1") & (
        forecast["week"] == "2026-03-16")
    forecast = forecast[~gap]
    project = make_project(forecast=forecast)
    report = run_checks(load_config(project.config))
    missing = find(report, "coverage.missing_series")
    assert missing.value == pytest.approx(100 / 6) and missing.status == "fail"
    assert find(report, "coverage.missing_series", "plants").value == pytest.approx(25.0)
    assert find(report, "coverage.missing_series", "tools").value == 0
    horizon = find(report, "coverage.horizon")
    assert horizon.status == "fail" and horizon.value == 1
    assert "2026-03-16" in str(horizon.examples)
    assert report.status == "fail"


def test_threshold_for_unknown_segment_is_reported(make_project: Callable[..., Project]) -> None:
    project = make_project(extra="  segments:\n    plantz:\n      wape: {warn: 1}\n")
    report = run_checks(load_config(project.config))
    hit = find(report, "config.thresholds", "plantz")
    assert hit.status == "warn" and "did you mean 'plants'" in hit.message.lower()


def test_archive_attempts_and_accuracy_from_archive(make_project: Callable[..., Project]) -> None:
    project = make_project()
    # no history: accuracy must come from the archive of earlier runs
    project.config.write_text(project.config.read_text().replace("history: data/earlier.csv\n", ""))
    config = load_config(project.config)
    for issued in EARLIER:
        project.write(f"f_{issued:%m%d}.csv", forecast_frame(issued))
        run_checks(config, forecast_path=project.data / f"f_{issued:%m%d}.csv")
    # a re-run of the second cycle with a different forecast is a new attempt, used from now on
    worse = forecast_frame(EARLIER[1], bias=0.5)
    project.write("f_rerun.csv", worse)
    rerun = run_checks(config, forecast_path=project.data / "f_rerun.csv")
    assert rerun.cycle == "2026-02-23" and rerun.attempt == 2
    report = run_checks(config)
    assert report.evaluated_cycles == [
        {"cycle": "2026-02-16", "attempt": 1, "source": "archive"},
        {"cycle": "2026-02-23", "attempt": 2, "source": "archive"},
    ]
    snaps = sorted(p.relative_to(config.archive).as_posix()
                   for p in config.archive.rglob("*.parquet"))
    assert snaps == ["cycle=2026-02-16/attempt-0001.parquet",
                     "cycle=2026-02-23/attempt-0001.parquet",
                     "cycle=2026-02-23/attempt-0002.parquet",
                     "cycle=2026-03-02/attempt-0001.parquet"]
    earlier = pd.concat([forecast_frame(EARLIER[0]), worse], ignore_index=True)
    want = direct(earlier, pd.read_csv(project.data / "actuals.csv"), ["2026-02-16", "2026-02-23"])
    assert find(report, "accuracy", "*", "wape", 1).value == pytest.approx(want["wape"], rel=1e-12)
    # series count compares with the previous archived cycle
    count = find(report, "coverage.series_count")
    assert count.value == 0 and count.status == "pass"
