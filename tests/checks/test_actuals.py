"""Non-finite and huge values: infinite or missing actuals, sums beyond the float64 range.

Rules under test (issue 10, item 3):

- an infinite actual fails ``actuals.invalid_values`` (naming its rows) and is left out of
  every figure; a missing actual keeps its meaning "not arrived yet" and is counted and named
  (status pass);
- a finite but huge error (an earlier forecast of 1e308) makes the sums overflow: the figure
  is judged beyond its level (reason ``overflow``), never "undefined (no_data)";
- no output prints ``nan`` or ``inf``.

Expected figures are recomputed here from the files with numpy (docs/measures.md: e = actual −
forecast, Bias % = 100·Σe/Σ|y|, WAPE = 100·Σ|e|/Σ|y|, MAE = mean|e|, RMSE = √mean e²).
"""

from __future__ import annotations

import json
import re
from collections.abc import Callable
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd
import pytest

from accuracy_checks import load_config, sources
from accuracy_checks.checks.accuracy import accuracy_results
from accuracy_checks.checks.actuals import INVALID_ACTUALS, actuals_checks
from accuracy_checks.checks.judge import Thresholds
from accuracy_checks.checks.offenders import worst_offenders
from accuracy_checks.cli.main import main
from accuracy_checks.config import Config
from accuracy_checks.engine import archived_cycles
from accuracy_checks.evaluation.join import evaluation_frame, window_periods
from accuracy_checks.measures.stats import error_stats, overflowed
from accuracy_checks.outputs.wording import (
    describe_value,
    format_example,
    format_example_value,
    format_number,
)
from accuracy_checks.results import CheckResult
from accuracy_checks.sources.load import load_inputs
from tests.support.project import EARLIER, Project, actuals_frame, forecast_frame

#: ``nan``/``inf`` as a word, in any case (``infinity`` is a word of its own and allowed)
NON_FINITE_TOKEN = re.compile(r"\b(nan|inf)\b", re.IGNORECASE)
CURRENT = pd.Timestamp("2026-03-02")


def _set(frame: pd.DataFrame, store: str, product: str, week: str, column: str,
         value: Any) -> pd.DataFrame:
    hit = (frame["store"] == store) & (frame["product"] == product) & (frame["week"] == week)
    assert hit.sum() >= 1
    frame = frame.copy()
    frame[column] = frame[column].astype(object)
    frame.loc[hit, column] = value
    return frame


def _lag1_earlier(project: Project) -> pd.DataFrame:
    earlier = pd.read_csv(project.data / "earlier.csv")
    return earlier[earlier["week"] == earlier["issued_on"]]  # lag 1: period == issue date


def _run(project: Project, capsys: pytest.CaptureFixture[str], *args: str
         ) -> tuple[int, str]:
    capsys.readouterr()
    code = main(["run", "--config", str(project.config), "--no-color", "--verbose", *args])
    captured = capsys.readouterr()
    return code, captured.out + captured.err


# --------------------------------------------------------------------------- reading


def test_reader_reads_inf_text_as_infinity_and_empty_as_missing(
        make_project: Callable[..., Project]) -> None:
    project = make_project()
    text = (project.data / "actuals.csv").read_text().splitlines()
    header, rows = text[0], text[1:4]
    values = ["inf", "-inf", ""]
    lines = [",".join([*row.split(",")[:-1], v]) for row, v in zip(rows, values, strict=True)]
    (project.data / "actuals.csv").write_text("\n".join([header, *lines]) + "\n")
    actuals = sources.read_actuals(load_config(project.config))
    got = actuals["actual"].to_numpy()
    assert np.isposinf(got[0]) and np.isneginf(got[1]) and np.isnan(got[2])


# --------------------------------------------------------------------------- the check


def _actuals(values: list[float]) -> pd.DataFrame:
    n = len(values)
    return pd.DataFrame({
        "store": ["S1"] * n, "product": [f"P{i}" for i in range(n)],
        "period": pd.to_datetime(["2026-02-16"] * n), "actual": values,
    })


def test_infinite_actuals_fail_and_name_their_rows() -> None:
    frame = _actuals([1.0, np.inf, np.nan, -np.inf, 2.0])
    [result] = actuals_checks(frame, keys=["store", "product"], column="units_sold")
    assert result.check == INVALID_ACTUALS and result.status == "fail"
    assert result.value == result.n_obs == 3 and result.n_series == 3
    assert result.details == {"infinite": 2, "missing": 1}
    # infinite rows first, then the missing ones; values in words
    assert [(e["product"], e["actual"]) for e in result.examples] == [
        ("P1", "infinity"), ("P3", "-infinity"), ("P2", "missing")]
    assert result.examples[0]["period"] == "2026-02-16"
    assert "2 actuals are infinite" in result.message and "`units_sold`" in result.message
    assert "product=P1" in result.message and "1 row has no actual" in result.message
    json.dumps(result.to_dict(), allow_nan=False)
    assert not NON_FINITE_TOKEN.search(result.message + format_example(result.examples[0]))


def test_missing_actuals_alone_pass_with_count_and_rows() -> None:
    [result] = actuals_checks(_actuals([1.0, np.nan, np.nan]), keys=["store", "product"])
    assert result.status == "pass" and result.value == 2 and result.n_series == 2
    assert result.details == {"infinite": 0, "missing": 2}
    assert [e["product"] for e in result.examples] == ["P1", "P2"]
    assert result.message.startswith("2 rows have no actual value")
    assert "not arrived yet" in result.message


def test_clean_actuals_pass_with_zero() -> None:
    [result] = actuals_checks(_actuals([1.0, 0.0, -3.0]), keys=["store", "product"])
    assert (result.status, result.value, result.examples) == ("pass", 0, [])


# --------------------------------------------------------------------------- evaluation


def _canonical(project: Project) -> tuple[Config, pd.DataFrame, pd.DataFrame]:
    config = load_config(project.config)
    inputs = load_inputs(config, archive=archived_cycles(config))
    return config, inputs.earlier, inputs.actuals


def test_infinite_actual_is_left_out_of_the_evaluation(
        make_project: Callable[..., Project]) -> None:
    actuals = _set(actuals_frame(CURRENT), "S2", "P3", "2026-02-23", "units_sold", "inf")
    _, earlier, canonical = _canonical(make_project(actuals=actuals))
    ev = evaluation_frame(earlier, canonical, keys=["store", "product"], frequency="W-MON",
                          lags=[1], window=2)
    row = ev.frame[(ev.frame["store"] == "S2") & (ev.frame["product"] == "P3")
                   & (ev.frame["period"] == pd.Timestamp("2026-02-23"))]
    assert len(row) == 1 and np.isnan(row["actual"].iat[0])  # dropped, like a missing one
    assert np.isfinite(ev.frame["actual"].dropna()).all()


def test_a_period_with_only_infinite_actuals_is_not_in_the_window() -> None:
    frame = pd.DataFrame({"period": pd.to_datetime(["2026-02-16", "2026-02-23"]),
                          "actual": [1.0, np.inf]})
    assert window_periods(frame, 1) == [pd.Timestamp("2026-02-16")]


# --------------------------------------------------------------------------- overflow


def test_overflowed_finds_groups_whose_sums_left_the_float_range() -> None:
    frame = pd.DataFrame({"g": ["a", "a", "b", "c", "c"],
                          "actual": [1.0, 1.0, 1.0, 1e154, 2.0],
                          "forecast": [1e308, 1e308, 2.0, 0.0, np.nan]})
    stats = error_stats(frame, ["g"])
    # a: Σe overflows; b: ordinary; c: e² = 1e308 is still finite
    assert overflowed(stats).tolist() == [True, False, False]
    huge = pd.DataFrame({"g": ["d"], "actual": [1.0], "forecast": [-2e154]})
    assert overflowed(error_stats(huge, ["g"])).tolist() == [True]  # e² beyond 1.8e308


def test_ordinary_figures_are_unchanged(make_project: Callable[..., Project]) -> None:
    """Overflow detection adds nothing to the arithmetic: same bits as numpy on clean data."""
    project = make_project()
    config, earlier, actuals = _canonical(project)
    ev = evaluation_frame(earlier, actuals, keys=["store", "product"], frequency="W-MON",
                          lags=[1], window=2)
    results = accuracy_results(ev.frame, keys=["store", "product"], book=Thresholds(config),
                               measures=["wape", "rmse"], lags=[1], min_obs=2,
                               window=ev.window)
    e = ev.frame["actual"].to_numpy() - ev.frame["forecast"].to_numpy()
    y = ev.frame["actual"].to_numpy()
    got = {r.measure: r.value for r in results if r.segment == "*"}
    assert got["wape"] == pytest.approx(100 * np.abs(e).sum() / np.abs(y).sum(), rel=1e-12)
    assert got["rmse"] == pytest.approx(np.sqrt(np.mean(e * e)), rel=1e-12)
    assert all(r.reason != "overflow" for r in results)


def _huge_earlier(factor: float = 1e308) -> pd.DataFrame:
    earlier = pd.concat([forecast_frame(d) for d in EARLIER], ignore_index=True)
    # lag 1 of both cycles for the tools series S1/P1: Σe overflows in tools and "*"
    for week in ("2026-02-16", "2026-02-23"):
        hit = (earlier["store"] == "S1") & (earlier["product"] == "P1") & \
            (earlier["week"] == week) & (earlier["issued_on"] == week)
        earlier.loc[hit, "units"] = factor
    return earlier


def test_huge_error_is_judged_beyond_its_level_not_as_no_data(
        make_project: Callable[..., Project]) -> None:
    config, earlier, actuals = _canonical(make_project(earlier=_huge_earlier()))
    ev = evaluation_frame(earlier, actuals, keys=["store", "product"], frequency="W-MON",
                          lags=[1], window=2)
    results = accuracy_results(ev.frame, keys=["store", "product"], book=Thresholds(config),
                               measures=["bias_pct", "wape", "rmse", "mae"], lags=[1],
                               min_obs=2, window=ev.window)
    by = {(r.segment, r.measure): r for r in results}
    for segment in ("tools", "*"):
        for measure in ("bias_pct", "wape"):  # thresholds set: fail, beyond the fail level
            r = by[(segment, measure)]
            assert (r.status, r.value, r.reason) == ("fail", None, "overflow"), r
            assert "beyond the floating-point range" in r.message
            assert f"beyond the fail level {r.fail:g}" in r.message
            assert r.examples and r.examples[0]["product"] == "P1"
        for measure in ("rmse", "mae"):  # no threshold: nothing to judge against
            r = by[(segment, measure)]
            assert (r.status, r.reason) == ("skipped", "overflow")
    assert by[("plants", "wape")].reason is None and by[("plants", "wape")].value is not None
    for r in results:
        assert not NON_FINITE_TOKEN.search(r.message), r.message
        assert not NON_FINITE_TOKEN.search(" ".join(format_example(e) for e in r.examples))
        json.dumps(r.to_dict(), allow_nan=False)


def test_only_warn_level_overflow_warns(make_project: Callable[..., Project]) -> None:
    extra = "  segments:\n    tools:\n      wape: {warn: 25}\n"
    config, earlier, actuals = _canonical(make_project(earlier=_huge_earlier(), extra=extra))
    ev = evaluation_frame(earlier, actuals, keys=["store", "product"], frequency="W-MON",
                          lags=[1], window=2)
    [tools] = [r for r in accuracy_results(ev.frame, keys=["store", "product"],
                                           book=Thresholds(config), measures=["wape"],
                                           lags=[1], min_obs=2, window=ev.window)
               if r.segment == "tools"]
    assert (tools.status, tools.reason) == ("warn", "overflow")
    assert "beyond the warn level 25" in tools.message


def test_offenders_of_an_overflowed_group_have_no_undefined_numbers() -> None:
    from accuracy_checks.measures.data import MeasureData, MeasureSettings

    rows = pd.DataFrame({"sku": ["a", "a", "b"], "actual": [1.0, 1.0, 5.0],
                         "forecast": [-1e308, -1e308, 1.0], "segment": "*", "lag": 1})
    data = MeasureData(rows, np.zeros(3, dtype=np.int64), pd.DataFrame({"lag": [1],
                       "segment": ["*"]}), np.array([0, 0, 1]), 2, MeasureSettings())
    for bias in (False, True):
        examples = worst_offenders(data, ["sku"], {0: bias}, 5)[0]
        assert examples[0]["sku"] == "a"  # the overflowing series ranks first
        assert examples[0]["error"] is None and examples[0]["abs_error"] is None
        assert all(e["share_of_abs_error_pct"] is None for e in examples)
        assert examples[1]["error"] == 4.0
        json.dumps(examples, allow_nan=False)


def test_infinite_value_breaks_a_level(make_project: Callable[..., Project]) -> None:
    config = load_config(make_project().config)
    book = Thresholds(config)
    assert book.judge("wape", "*", float("inf")).status == "fail"
    assert book.judge("bias_pct", "*", float("-inf")).status == "fail"
    assert book.judge("wape", "*", float("nan")).status == config.evaluation.undefined_status


# --------------------------------------------------------------------------- wording


def test_wording_never_prints_nan_or_inf() -> None:
    assert format_number(float("nan")) == "undefined"
    assert format_number(float("inf")) == "infinity"
    assert format_example_value(float("-inf")) == "-infinity"
    assert format_example_value(np.float64("nan")) == "missing"
    result = CheckResult("accuracy", "fail", measure="wape", reason="overflow", unit="%")
    assert describe_value(result) == "beyond the floating-point range"
    assert describe_value(CheckResult("accuracy", "pass", measure="wape",
                                      value=float("inf"))) == "undefined"


# --------------------------------------------------------------------------- the CLI


def _messy(make_project: Callable[..., Project]) -> Project:
    actuals = actuals_frame(CURRENT)
    actuals = _set(actuals, "S2", "P3", "2026-02-23", "units_sold", "inf")   # plants
    actuals = _set(actuals, "S1", "P3", "2026-02-16", "units_sold", "")      # plants, empty
    actuals = _set(actuals, "S2", "P2", "2026-02-16", "units_sold", 0.0)     # plants, zero
    return make_project(actuals=actuals, earlier=_huge_earlier())


def _no_token(name: str, text: str) -> None:
    found = NON_FINITE_TOKEN.search(text)
    if found is not None:
        around = text[max(found.start() - 120, 0):found.end() + 40]
        raise AssertionError(f"{name} prints {found.group(0)!r}: …{around}…")


def _strict(text: str) -> Any:
    def refuse(constant: str) -> None:
        raise AssertionError(f"the JSON holds the non-standard number {constant}")

    return json.loads(text, parse_constant=refuse)


def test_cli_on_messy_values_names_them_and_prints_no_nan_or_inf(
        make_project: Callable[..., Project], capsys: pytest.CaptureFixture[str]) -> None:
    project = _messy(make_project)
    out = project.root / "out"
    code, console = _run(project, capsys, "--json", str(out / "r.json"),
                         "--markdown", str(out / "r.md"), "--junit", str(out / "r.xml"))
    assert code == 1
    texts = {"console": console, "JSON": (out / "r.json").read_text(),
             "Markdown": (out / "r.md").read_text(), "JUnit": (out / "r.xml").read_text()}
    for name, text in texts.items():
        _no_token(name, text)
    doc = _strict(texts["JSON"])
    results = doc["results"]

    [check] = [r for r in results if r["check"] == INVALID_ACTUALS]
    assert check["status"] == "fail" and check["value"] == 2
    assert check["details"] == {"infinite": 1, "missing": 1}
    assert [(e["store"], e["product"], e["period"], e["actual"]) for e in check["examples"]] == [
        ("S2", "P3", "2026-02-23", "infinity"), ("S1", "P3", "2026-02-16", "missing")]
    assert "FAIL actuals.invalid_values" in console and "actual=infinity" in console

    def acc(segment: str, measure: str) -> dict[str, Any]:
        [hit] = [r for r in results if r["check"] == "accuracy" and r["segment"] == segment
                 and r["measure"] == measure and r["lag"] == 1]
        return hit

    # tools and "*": the 1e308 forecasts overflow the sums → beyond the levels, not no_data
    for segment in ("tools", "*"):
        for measure in ("bias_pct", "wape"):
            r = acc(segment, measure)
            assert (r["status"], r["value"], r["reason"]) == ("fail", None, "overflow")
        assert acc(segment, "rmse")["reason"] == "overflow"
    assert "no_data" not in {r.get("reason") for r in results
                             if r["check"] == "accuracy" and r["segment"] in ("tools", "*")}

    # plants: the remaining rows (the inf and the empty actual left out), recomputed by numpy
    earlier = _lag1_earlier(project)
    actuals = pd.read_csv(project.data / "actuals.csv")
    j = earlier.merge(actuals, on=["store", "product", "week"])
    j = j[j["product"].isin(["P2", "P3"])]
    y = j["units_sold"].to_numpy(dtype=float)
    used = np.isfinite(y)
    assert int(used.sum()) == 6 and len(j) == 8
    y, f = y[used], j["units"].to_numpy(dtype=float)[used]
    e = y - f
    want = {"bias_pct": 100 * e.sum() / np.abs(y).sum(),
            "wape": 100 * np.abs(e).sum() / np.abs(y).sum(),
            "me": e.mean(), "mae": np.abs(e).mean(), "rmse": np.sqrt(np.mean(e ** 2)),
            "sde": np.std(e, ddof=1)}
    for measure, value in want.items():
        r = acc("plants", measure)
        assert r["value"] == pytest.approx(value, rel=1e-12), measure
        assert r["n_obs"] == 6 and r["details"]["n_dropped"] == 2
    mape = acc("plants", "mape")  # one zero actual among the remaining rows
    assert (mape["value"], mape["reason"]) == (None, "zero_actual")


def test_cli_missing_actuals_only_keep_the_gate_passing(
        make_project: Callable[..., Project], capsys: pytest.CaptureFixture[str]) -> None:
    actuals = _set(actuals_frame(CURRENT), "S1", "P2", "2026-02-23", "units_sold", "")
    project = make_project(actuals=actuals)
    out = project.root / "out"
    code, console = _run(project, capsys, "--json", str(out / "r.json"))
    assert code == 0
    _no_token("console", console)
    doc = _strict((out / "r.json").read_text())
    [check] = [r for r in doc["results"] if r["check"] == INVALID_ACTUALS]
    assert check["status"] == "pass" and check["value"] == 1
    assert check["examples"] == [{"store": "S1", "product": "P2", "period": "2026-02-23",
                                  "actual": "missing"}]
    assert "not arrived yet" in check["message"]


def test_cli_json_of_an_overflow_is_strict(make_project: Callable[..., Project],
                                          capsys: pytest.CaptureFixture[str],
                                          tmp_path: Path) -> None:
    project = make_project(earlier=_huge_earlier(1.5e308))
    code, console = _run(project, capsys, "--json", str(tmp_path / "r.json"))
    assert code == 1
    _no_token("console", console)
    doc = _strict((tmp_path / "r.json").read_text())
    overflow = [r for r in doc["results"] if r.get("reason") == "overflow"]
    assert overflow and all(r["value"] is None for r in overflow)
    assert "beyond the floating-point range" in console


def test_a_share_beyond_the_float_range_is_none() -> None:
    from accuracy_checks.measures.data import MeasureData, MeasureSettings

    # errors +1e308, −1e308 and −0.01: the bias total is −0.01, so a share would be ±1e312 %
    rows = pd.DataFrame({"sku": ["a", "b", "c"], "actual": [0.0, 0.0, 0.0],
                         "forecast": [-1e308, 1e308, 0.01], "segment": "*", "lag": 1})
    data = MeasureData(rows, np.zeros(3, dtype=np.int64), pd.DataFrame({"lag": [1],
                       "segment": ["*"]}), np.array([0, 1, 2]), 3, MeasureSettings())
    examples = worst_offenders(data, ["sku"], {0: True}, 5)[0]
    shares = {e["sku"]: e["share_of_bias_pct"] for e in examples}
    assert shares == {"a": None, "b": None, "c": 100.0}
    json.dumps(examples, allow_nan=False)
