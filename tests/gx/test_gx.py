"""The Great Expectations adapter, validated in one ephemeral GX context (progress bars off).

The reference for every number is the CLI itself: ``run_checks(config, snapshot=False)`` on the
same project. The suite's verdict and every result of the coverage, accuracy, actuals and
archive checks (value to 1e-9, levels, status, counts, message, examples) must equal the CLI's;
the built-in output expectations must give each output check the CLI's status.
"""

from __future__ import annotations

import json
import math
from collections.abc import Callable, Iterator
from pathlib import Path
from typing import Any

import pandas as pd
import pytest

import accuracy_checks.gx as agx  # first: it silences GX's own DeprecationWarnings
from accuracy_checks import load_config, run_checks
from accuracy_checks.results import CheckResult, RunReport
from tests.support.project import (
    CONFIG,
    CURRENT,
    EARLIER,
    KEYS,
    Project,
    actuals_frame,
    forecast_frame,
)

gx = agx.great_expectations

Key = tuple[str, str | None, int | None, str | None, str | None]


class Runner:
    """One ephemeral context with one pandas asset; validates a suite on a frame."""

    def __init__(self) -> None:
        from great_expectations.data_context.types.base import ProgressBarsConfig

        self.context = gx.get_context(mode="ephemeral")
        self.context.variables.progress_bars = ProgressBarsConfig(globally=False)
        asset = self.context.data_sources.add_pandas("forecasts").add_dataframe_asset("batch")
        self.batch = asset.add_batch_definition_whole_dataframe("whole")
        self.n = 0

    def run(self, suite: Any, frame: pd.DataFrame, **options: Any) -> Any:
        self.n += 1
        suite.name = f"{suite.name}-{self.n}"
        suite = self.context.suites.add(suite)
        vd = gx.ValidationDefinition(data=self.batch, suite=suite, name=f"v{self.n}")
        return vd.run(batch_parameters={"dataframe": frame}, **options)


@pytest.fixture(scope="module")
def runner() -> Iterator[Runner]:
    yield Runner()


def key_of(r: CheckResult | dict[str, Any]) -> Key:
    """Check, segment, lag, measure, and the cycle of an archive warning (one per cycle)."""
    d = r if isinstance(r, dict) else r.to_dict()
    cycle = d["details"].get("cycle") if d["check"].startswith("archive.") else None
    return (d["check"], d["segment"], d["lag"], d["measure"], cycle)


def by_key(results: list[CheckResult], prefixes: tuple[str, ...]) -> dict[Key, CheckResult]:
    out: dict[Key, CheckResult] = {}
    for r in results:
        if r.check.startswith(prefixes):
            key = key_of(r)
            assert key not in out, key
            out[key] = r
    return out


def same_value(a: float | None, b: float | None) -> bool:
    if a is None or b is None:
        return a is None and b is None
    return math.isclose(a, b, rel_tol=1e-9, abs_tol=1e-9)


def assert_same_as_cli(cli: RunReport, result: Any) -> RunReport:
    """The GX run gives the CLI's verdict and, result by result, its figures."""
    converted = agx.to_run_report(result)
    assert agx.verdict(result) == cli.status
    assert converted.status == cli.status
    judged = ("coverage.", "accuracy", "config.thresholds", "actuals.", "archive.")
    want, got = by_key(cli.results, judged), by_key(converted.results, judged)
    assert set(got) == set(want)
    for key, w in want.items():
        g = got[key]
        assert (g.status, g.warn, g.fail, g.n_obs, g.n_series, g.reason, g.unit) == (
            w.status, w.warn, w.fail, w.n_obs, w.n_series, w.reason, w.unit), key
        assert same_value(g.value, w.value), (key, g.value, w.value)
        assert g.message == w.message, key
        assert g.examples == w.examples, key
        if key[0].startswith(("actuals.", "archive.")):
            assert g.details == w.details, key
    # built-in expectations: the worst status of each output check is the CLI's
    for check in {r.check for r in cli.results if r.check.startswith("output.")}:
        cli_status = next(r.status for r in cli.results if r.check == check)
        gx_status = [r.status for r in converted.results if r.check == check]
        if cli_status == "skipped":  # no quantile pair to order: no GX expectation
            assert not gx_status or set(gx_status) == {"pass"}
        else:
            assert max(gx_status, key=["pass", "warn", "fail"].index) == cli_status, check
    # the GX result itself carries each segment's value in observed_value
    for er in result.results:
        details = er.result.get("details") or {}
        observed = er.result.get("observed_value")
        if er.expectation_config.type == "expect_usable_snapshots":
            assert observed == {"left_out": [w.details["cycle"] for w in cli.results
                                             if w.check == "archive.snapshot"]}
            continue
        for d in details.get("results", []):
            if d["check"] == "config.thresholds":
                assert d["segment"] in observed["unmatched"]
                continue
            value = observed[str(d["segment"])]
            if d["check"] == "accuracy":
                value = value[str(d["lag"])]
            assert same_value(value, want[key_of(d)].value)
    return converted


def validate(runner: Runner, project: Project) -> tuple[RunReport, Any]:
    config = load_config(project.config)
    cli = run_checks(config, snapshot=False)
    result = runner.run(agx.suite_from_config(project.config),
                        agx.batch_from_config(project.config))
    return cli, result


def broken_project(make_project: Callable[..., Project]) -> Project:
    """A biased segment, a missing series, a horizon gap, a zero-actual segment, asymmetric
    bias bounds, per-segment overrides, extra measures and a misspelt segment name."""
    earlier = pd.concat([forecast_frame(d) for d in EARLIER], ignore_index=True)
    plants = earlier["product"].isin(["P2", "P3"])
    earlier.loc[plants, "units"] = earlier.loc[plants, "units"] / 0.97 * 0.85
    forecast = forecast_frame(CURRENT)
    forecast = forecast[~((forecast["store"] == "S2") & (forecast["product"] == "P1"))]
    gap = (forecast["store"] == "S1") & (forecast["product"] == "P2")
    forecast = forecast[~(gap & (forecast["week"] == "2026-03-16"))]
    actuals = actuals_frame(CURRENT)
    tools = actuals["product"] == "P1"
    actuals.loc[tools & (actuals["week"] == "2026-02-23"), "units_sold"] = 0.0
    extra = """\
    mape: {warn: 30}
    mase: {warn: 1.5, fail: 3}
  segments:
    plants:
      bias_pct: {warn: [-5, 12], fail: [-8, 14]}
    tools:
      wape: {fail: 50}
    "*":
      rmse: {warn: 3}
    tool:
      wape: {warn: 1}
"""
    return make_project(earlier=earlier, forecast=forecast, actuals=actuals, extra=extra)


def test_clean_project_same_as_cli(runner: Runner,
                                   make_project: Callable[..., Project]) -> None:
    cli, result = validate(runner, make_project())
    assert cli.status == "pass"
    converted = assert_same_as_cli(cli, result)
    assert converted.cycle == cli.cycle == "2026-03-02"
    assert converted.evaluated_cycles == cli.evaluated_cycles
    assert len(converted.evaluated_cycles) == 2


def test_first_cycle_same_as_cli(runner: Runner, make_project: Callable[..., Project]) -> None:
    """No earlier cycle yet: accuracy is skipped (no_data) in both, not a silent pass."""
    no_history = forecast_frame(CURRENT).iloc[:0]
    cli, result = validate(runner, make_project(earlier=no_history))
    converted = assert_same_as_cli(cli, result)
    accuracy = [r for r in converted.results if r.check == "accuracy"]
    assert accuracy and {(r.status, r.reason) for r in accuracy} == {("skipped", "no_data")}


def test_previous_cycle_same_as_cli(runner: Runner,
                                    make_project: Callable[..., Project]) -> None:
    """An archived earlier cycle with one series fewer: the series count check runs too."""
    project = make_project()
    earlier = forecast_frame(EARLIER[1])
    project.write("previous.csv", earlier[earlier["product"] != "P3"])
    run_checks(load_config(project.config), forecast_path=project.data / "previous.csv")
    cli, result = validate(runner, project)
    converted = assert_same_as_cli(cli, result)
    count = [r for r in converted.results if r.check == "coverage.series_count"]
    assert len(count) == 1 and count[0].status == "warn" and same_value(count[0].value, 50.0)


def test_broken_project_same_as_cli(runner: Runner,
                                    make_project: Callable[..., Project]) -> None:
    cli, result = validate(runner, broken_project(make_project))
    assert cli.status == "fail"
    converted = assert_same_as_cli(cli, result)
    statuses = {(r.check, r.segment, r.measure): r.status for r in converted.results
                if r.lag in (None, 1)}
    assert statuses[("coverage.missing_series", "*", "missing_series_pct")] == "fail"
    assert statuses[("coverage.horizon", "plants", "incomplete_series")] == "fail"
    assert statuses[("accuracy", "plants", "bias_pct")] == "fail"  # 15 % > 14 (high bound)
    assert statuses[("accuracy", "tools", "mape")] == "warn"  # undefined: a zero actual
    assert statuses[("config.thresholds", "tool", None)] == "warn"
    assert ("accuracy", "*", "mase") in statuses
    assert result.get_max_severity_failure().value == "critical"
    failed = {(er.expectation_config.type, er.expectation_config.severity.value)
              for er in result.results if not er.success}
    assert ("expect_segment_accuracy", "critical") in failed
    assert ("expect_active_series_forecast", "critical") in failed
    assert ("expect_threshold_segments_present", "warning") in failed


def test_infinite_and_missing_actuals_same_as_cli(
        runner: Runner, make_project: Callable[..., Project]) -> None:
    """An infinite actual fails actuals.invalid_values in both (never a silent pass in GX) and
    is left out of the figures; a missing one is counted and named."""
    actuals = actuals_frame(CURRENT)
    actuals.loc[(actuals["week"] == "2026-02-23") & (actuals["product"] == "P2"),
                "units_sold"] = [float("inf"), -float("inf")]
    actuals.loc[(actuals["week"] == "2026-02-16") & (actuals["store"] == "S1")
                & (actuals["product"] == "P1"), "units_sold"] = float("nan")
    cli, result = validate(runner, make_project(actuals=actuals))
    assert cli.status == "fail"
    converted = assert_same_as_cli(cli, result)
    [invalid] = [r for r in converted.results if r.check == "actuals.invalid_values"]
    assert invalid.status == "fail" and invalid.details == {"infinite": 2, "missing": 1}
    assert [e["actual"] for e in invalid.examples] == ["infinity", "-infinity", "missing"]
    failed = [er.expectation_config.type for er in result.results if not er.success]
    assert failed == ["expect_finite_actuals"]


def test_missing_actual_same_as_cli(runner: Runner, make_project: Callable[..., Project]) -> None:
    """A missing actual alone passes, with its count and row, in both."""
    actuals = actuals_frame(CURRENT)
    actuals.loc[3, "units_sold"] = float("nan")
    cli, result = validate(runner, make_project(actuals=actuals))
    converted = assert_same_as_cli(cli, result)
    [invalid] = [r for r in converted.results if r.check == "actuals.invalid_values"]
    assert invalid.status == "pass" and invalid.value == 1
    assert invalid.examples[0]["actual"] == "missing"


def test_missing_archived_snapshots_same_as_cli(
        runner: Runner, make_project: Callable[..., Project]) -> None:
    """The last snapshot of the previous cycle and of an older one are gone: one
    archive.snapshot warning each (carried through the batch), the series count not compared
    with an older cycle, and the figures without them — as in the CLI."""
    project = make_project()
    config = load_config(project.config)
    older = pd.Timestamp("2026-02-09")
    lost = [run_checks(config, forecast_path=project.write(f"{d:%m%d}.csv", forecast_frame(d)))
            .snapshot for d in (older, EARLIER[1])]
    for path in lost:
        assert path is not None
        Path(path).unlink()
    cli, result = validate(runner, project)
    assert cli.status == "warn"
    converted = assert_same_as_cli(cli, result)
    warnings = [r for r in converted.results if r.check == "archive.snapshot"]
    assert sorted(r.details["cycle"] for r in warnings) == [f"{d:%Y-%m-%d}"
                                                            for d in (older, EARLIER[1])]
    [count] = [r for r in converted.results if r.check == "coverage.series_count"]
    assert count.status == "skipped" and count.reason == "no_data"
    assert converted.evaluated_cycles == cli.evaluated_cycles
    failed = [(er.expectation_config.type, er.expectation_config.severity.value)
              for er in result.results if not er.success]
    assert failed == [("expect_usable_snapshots", "warning")]


def test_severity_mapping(make_project: Callable[..., Project]) -> None:
    text = CONFIG.format(extra="""\
    rmse: {fail: 9}
  segments:
    plants:
      wape: {warn: 30}
""").replace("  min_obs: 2\n", "  min_obs: 2\n  undefined_status: skipped\n")
    suite = agx.suite_from_config(make_project(config_text=text).config)
    severities: dict[str, set[str]] = {}
    for e in suite.expectations:
        what = e.measure if e.expectation_type == "expect_segment_accuracy" else e.expectation_type
        severities.setdefault(what, set()).add(e.severity.value)
    assert severities["wape"] == {"warning", "critical"}
    assert severities["bias_pct"] == {"warning", "critical"}
    assert severities["rmse"] == {"critical"}  # a fail level only
    assert severities["mae"] == {"info"}  # no level: reported, never gating
    assert severities["expect_complete_horizon"] == {"critical"}  # built-in: fail above 0
    assert severities["expect_no_unexpected_series"] == {"warning"}  # built-in: warn above 0
    assert severities["expect_compound_columns_to_be_unique"] == {"critical"}
    wape = next(e for e in suite.expectations if getattr(e, "measure", None) == "wape")
    assert wape.thresholds == {"warn": 25.0, "fail": 40.0}
    assert wape.segment_thresholds == {"plants": {"warn": 30.0}}


def test_undefined_status_adds_its_severity(make_project: Callable[..., Project]) -> None:
    text = CONFIG.format(extra="    rmse: {fail: 9}\n")
    suite = agx.suite_from_config(make_project(config_text=text).config)
    rmse = {e.severity.value for e in suite.expectations if getattr(e, "measure", None) == "rmse"}
    assert rmse == {"warning", "critical"}  # undefined_status warn needs a warning expectation


def test_gating_by_severity(runner: Runner, make_project: Callable[..., Project]) -> None:
    """A warning expectation never fails the verdict; a critical one ignores warn levels."""
    project = broken_project(make_project)
    config = load_config(project.config)
    batch = agx.batch_from_config(config)
    # plants' bias is about 15 %: beyond warn 5 and fail 10
    common = dict(measure="bias_pct", keys=KEYS, frequency="W-MON", window=2, min_obs=2,
                  thresholds={"warn": 5, "fail": 10})
    suite = gx.ExpectationSuite(name="gating", expectations=[
        agx.ExpectSegmentAccuracy(**common, severity="warning"),
        agx.ExpectSegmentAccuracy(measure="wape", keys=KEYS, frequency="W-MON", window=2,
                                  min_obs=2, thresholds={"warn": 1, "fail": 200}),
    ])
    result = runner.run(suite, batch)
    by_measure = {er.expectation_config.kwargs["measure"]: er for er in result.results}
    assert not by_measure["bias_pct"].success and by_measure["wape"].success
    assert agx.verdict(result) == "warn"
    report = agx.to_run_report(result)
    plants = next(r for r in report.results if r.measure == "bias_pct" and r.segment == "plants")
    assert plants.status == "warn" and "severity 'warning'" in plants.message
    breaches = by_measure["bias_pct"].result["details"]["breaches"]
    assert "plants" in {b["segment"] for b in breaches}
    # without details (result_format BOOLEAN_ONLY) the conversion still keeps GX's outcome
    bare = agx.to_run_report(runner.run(gx.ExpectationSuite(
        name="bare", expectations=[agx.ExpectSegmentAccuracy(**common, severity="warning")]),
        batch, result_format="BOOLEAN_ONLY"))
    assert [(r.check, r.measure, r.status) for r in bare.results] == [
        ("accuracy", "bias_pct", "warn")]
    # the same levels on the CLI: the same value, judged fail there
    cli = run_checks(config, snapshot=False)
    want = next(r for r in cli.results if r.check == "accuracy" and r.measure == "bias_pct"
            and r.segment == "plants")
    assert want.status == "fail" and same_value(plants.value, want.value)


def test_explicit_settings_and_asymmetric_bounds(runner: Runner,
                                                 make_project: Callable[..., Project]) -> None:
    """Without a config file: keys, frequency and levels in the expectation itself."""
    project = broken_project(make_project)
    cli = run_checks(load_config(project.config), snapshot=False)
    batch = agx.batch_from_config(project.config)
    expectation = agx.ExpectSegmentAccuracy(
        measure="bias_pct", keys=KEYS, frequency="W-MON", lags=[1], window=2, min_obs=2,
        thresholds={"warn": 5, "fail": 10},
        segment_thresholds={"plants": {"warn": [-5, 12], "fail": [-8, 14]}})
    result = runner.run(gx.ExpectationSuite(name="explicit", expectations=[expectation]), batch)
    got = by_key(agx.to_run_report(result).results, ("accuracy",))
    want = {k: r for k, r in by_key(cli.results, ("accuracy",)).items() if k[3] == "bias_pct"}
    assert set(got) == set(want)
    for key, w in want.items():
        assert same_value(got[key].value, w.value) and got[key].status == w.status, key
    assert got[("accuracy", "plants", 1, "bias_pct", None)].fail == (-8.0, 14.0)


def test_expectation_arguments_are_checked() -> None:
    with pytest.raises(ValueError, match="unknown measure 'wap'"):
        agx.ExpectSegmentAccuracy(measure="wap", keys=KEYS, frequency="W-MON")
    with pytest.raises(ValueError, match="warn 40 is beyond fail 25"):
        agx.ExpectSegmentAccuracy(measure="wape", keys=KEYS, frequency="W-MON",
                                  thresholds={"warn": 40, "fail": 25})
    with pytest.raises(ValueError, match="come from the config file"):
        agx.ExpectSegmentAccuracy(measure="wape", config="x.yaml", keys=KEYS)
    with pytest.raises(ValueError, match="give config"):
        agx.ExpectSegmentAccuracy(measure="wape")
    with pytest.raises(ValueError, match="pair only suits"):
        agx.ExpectCompleteHorizon(keys=KEYS, frequency="W-MON", horizon=4,
                                  thresholds={"fail": [0, 1]})


def test_suite_json_round_trip(runner: Runner, make_project: Callable[..., Project]) -> None:
    project = broken_project(make_project)
    suite = agx.suite_from_config(project.config)
    text = agx.suite_to_json(suite)
    again = agx.suite_from_json(text)

    def shape(s: Any) -> list[str]:
        doc = json.loads(agx.suite_to_json(s))
        return sorted(json.dumps({k: v for k, v in e.items() if k != "id"}, sort_keys=True)
                      for e in doc["expectations"])

    assert shape(again) == shape(suite) and len(again.expectations) == len(suite.expectations)
    assert again.meta["accuracy_checks"]["config"] == str(project.config.resolve())
    batch = agx.batch_from_config(project.config)
    first, second = runner.run(suite, batch), runner.run(again, batch)
    assert agx.verdict(first) == agx.verdict(second) == "fail"
    a, b = agx.to_run_report(first), agx.to_run_report(second)
    assert [r.to_dict() for r in a.results] == [r.to_dict() for r in b.results]


def test_suite_from_json_refuses_to_drop_an_expectation() -> None:
    text = json.dumps({"name": "s", "expectations": [
        {"type": "expect_something_nobody_defined", "kwargs": {}}]})
    with pytest.raises(ValueError, match="could not rebuild 1 expectation"):
        agx.suite_from_json(text)


def test_conversion_of_built_ins_and_errors(runner: Runner,
                                            make_project: Callable[..., Project]) -> None:
    forecast = forecast_frame(CURRENT)
    forecast.loc[0, "units"] = -4.0
    forecast.loc[1, "p90"] = float("nan")
    project = make_project(forecast=forecast)
    config = load_config(project.config)
    cli = run_checks(config, snapshot=False)
    suite = agx.suite_from_config(config)
    # an accuracy expectation on a plain frame cannot run: an error, not a silent pass
    suite.add_expectation(agx.ExpectSegmentAccuracy(measure="me", keys=KEYS, frequency="W-MON"))
    result = runner.run(suite, agx.batch_from_config(config))
    plain = runner.run(gx.ExpectationSuite(name="plain", expectations=[
        agx.ExpectSegmentAccuracy(measure="me", keys=KEYS, frequency="W-MON"),
        agx.ExpectActiveSeriesForecast(keys=KEYS, frequency="W-MON", horizon=4),
        agx.ExpectFiniteActuals(keys=KEYS)]),
        forecast.rename(columns={"week": "period", "units": "forecast"}))
    report = agx.to_run_report(result.to_json_dict(), config_path=str(project.config))
    statuses = {r.check: r.status for r in cli.results if r.check.startswith("output.")}
    assert statuses["output.negative_values"] == statuses["output.invalid_values"] == "fail"
    negative = [r for r in report.results if r.check == "output.negative_values"
                and r.status == "fail"]
    assert len(negative) == 1 and negative[0].examples == [{"value": -4.0}]
    assert report.status == "fail" and report.config_path == str(project.config)
    errors = agx.to_run_report(plain)
    assert {r.status for r in errors.results} == {"error"} and agx.verdict(plain) == "fail"
    assert any("no actuals rows" in r.message for r in errors.results)
    assert "actuals.invalid_values" in {r.check for r in errors.results}
    json.dumps(report.to_dict())  # every output can render it


def test_converted_report_lands_in_the_audit_store(runner: Runner,
                                                   make_project: Callable[..., Project]) -> None:
    from accuracy_checks import store
    project = broken_project(make_project)
    config = load_config(project.config)
    _, result = validate(runner, project)
    report = agx.to_run_report(result, config_path=str(project.config))
    opened = store.open_store(config)
    before = [r["attempt"] or 0 for r in opened.history(cycle="2026-03-02")]  # the CLI's run
    recorded = opened.record_run(report, config=config)
    assert recorded.cycle == "2026-03-02" and recorded.attempt == max(before, default=0) + 1
    runs = [r for r in opened.history(cycle="2026-03-02") if r["run_id"] == report.run_id]
    assert len(runs) == 1 and runs[0]["status"] == report.status == "fail"
    assert runs[0]["evaluated_cycles"] == report.evaluated_cycles
    stored = opened.results_of(report.run_id)
    assert sorted((r["check"], str(r["segment"]), r["status"]) for r in stored) == sorted(
        (r.check, str(r.segment), r.status) for r in report.results)
    bias = next(r for r in stored if r["measure"] == "bias_pct" and r["segment"] == "plants")
    want = next(r for r in report.results if r.measure == "bias_pct" and r.segment == "plants")
    assert same_value(bias["value"], want.value) and bias["status"] == "fail"
