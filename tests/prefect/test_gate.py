"""The Prefect integration without a Prefect server: the gate task's body (``task.fn``), the
example pipelines' forecaster and the plain CI step (the dask engine: ``tests/dask/``).

Flow-level tests against a Prefect server are in ``test_flows.py`` (one test harness).
"""

from __future__ import annotations

import json
import logging
import math
import pickle
from collections.abc import Callable, Iterator
from pathlib import Path
from statistics import NormalDist
from typing import Any

import numpy as np
import pandas as pd
import pytest
from prefect.logging import disable_run_logger
from prefect.states import Completed, Failed, State

import accuracy_checks.prefect.gate as gate_module
from accuracy_checks.cli.main import main as cli_main
from accuracy_checks.engine import archived_cycles, evaluate
from accuracy_checks.errors import ConfigError, GateFailed, InputError
from accuracy_checks.measures.catalogue import load_config
from accuracy_checks.prefect import (
    WARNED_STATE_NAME,
    check_forecast,
    findings_table,
    first_failure,
)
from accuracy_checks.results import RunReport
from accuracy_checks.sources.load import load_inputs
from accuracy_checks.store import default_store_url, open_store
from accuracy_checks.store.urls import sqlite_file
from flows import ci_gate
from flows.forecasting import forecast_next_cycle, seasonal_naive, write_forecast
from tests.support.project import (
    CONFIG,
    CURRENT,
    EARLIER,
    HORIZON,
    Project,
    actuals_frame,
    forecast_frame,
)

Make = Callable[..., Project]


def earlier_with_bias(bias: float) -> pd.DataFrame:
    return pd.concat([forecast_frame(d, bias=bias) for d in EARLIER], ignore_index=True)


# bias 3 % passes (warn > 5), 7 % warns, 15 % fails (fail > 10): the conftest thresholds
PASS, WARN, FAIL = 0.97, 0.93, 0.85


@pytest.fixture
def run_log(monkeypatch: pytest.MonkeyPatch,
            caplog: pytest.LogCaptureFixture) -> Iterator[pytest.LogCaptureFixture]:
    """The task body's run logger replaced by a plain logger that caplog records, inside
    Prefect's ``disable_run_logger`` (no server, no run context)."""
    logger = logging.getLogger("accuracy_checks.test_prefect")
    monkeypatch.setattr(gate_module, "get_run_logger", lambda: logger)
    caplog.set_level(logging.INFO, logger=logger.name)
    with disable_run_logger():
        yield caplog


def gate_failed(state: State) -> GateFailed:
    """The ``GateFailed`` of a failed gate: the task body returns a ``Failed`` state with the
    verdict as its message (it never raises, so Prefect logs no traceback)."""
    assert isinstance(state, State) and state.is_failed()
    exc = state.result(raise_on_failure=False)
    assert isinstance(exc, GateFailed) and state.message == str(exc)
    with pytest.raises(GateFailed):  # what future.result() raises downstream
        state.result()
    return exc


def recorded(project: Project) -> list[dict[str, Any]]:
    with open_store(load_config(project.config), create=False) as store:
        return store.history()


# --------------------------------------------------------------------------- the task body


def test_pass_completes_with_the_report_and_records_it(make_project: Make) -> None:
    project = make_project(earlier=earlier_with_bias(PASS))
    with disable_run_logger():
        state = check_forecast.fn(str(project.config), label="nightly #1")
    assert state.is_completed() and state.name == "Completed"
    report = state.data
    assert isinstance(report, RunReport) and report.status == "pass"
    assert state.message.startswith("PASS")
    runs = recorded(project)
    assert [(r["run_id"], r["status"], r["label"]) for r in runs] == [
        (report.run_id, "pass", "nightly #1")]


def test_warn_logs_every_warning_and_completes_under_its_own_name(
        make_project: Make, run_log: pytest.LogCaptureFixture) -> None:
    project = make_project(earlier=earlier_with_bias(WARN))
    state = check_forecast.fn(project.config)
    assert state.is_completed()
    assert state.name == WARNED_STATE_NAME != "Completed"
    report = state.data
    warned = [r for r in report.results if r.status == "warn"]
    assert report.status == "warn" and warned
    logged = [rec.getMessage() for rec in run_log.records if rec.levelno == logging.WARNING]
    assert len(logged) == len(warned)
    for r in warned:
        assert any(r.message in line for line in logged)
    assert recorded(project)[0]["status"] == "warn"


def test_fail_returns_a_failed_state_with_a_picklable_summary_after_recording(
        make_project: Make) -> None:
    project = make_project(earlier=earlier_with_bias(FAIL))
    with disable_run_logger():
        exc = gate_failed(check_forecast.fn(project.config))
    runs = recorded(project)  # the audit record exists although the gate failed
    assert [r["status"] for r in runs] == ["fail"]
    assert exc.summary["status"] == "fail" and exc.summary["run_id"] == runs[0]["run_id"]
    assert exc.summary["counts"]["fail"] >= 1 and exc.summary["cycle"] == "2026-03-02"
    assert exc.summary["findings"] and "under-forecast by 15" in str(exc)
    assert str(exc).startswith("Forecast gate failed: FAIL")
    again = pickle.loads(pickle.dumps(exc))
    assert type(again) is GateFailed and str(again) == str(exc)
    assert again.summary == exc.summary
    assert len(pickle.dumps(exc)) < 5_000  # a summary, not the results


def test_fail_on_warn_fails_a_warning(make_project: Make) -> None:
    project = make_project(earlier=earlier_with_bias(WARN))
    with disable_run_logger():
        exc = gate_failed(check_forecast.fn(project.config, fail_on="warn", snapshot=False))
    assert "fail_on=warn" in str(exc) and exc.summary["status"] == "warn"


def test_usage_errors_fail_with_the_clis_message(make_project: Make,
                                                 capsys: pytest.CaptureFixture[str]) -> None:
    project = make_project(extra="  segmnts: {}\n")  # an unknown key: exit 2 in the CLI
    assert cli_main(["run", "--config", str(project.config), "-q"]) == 2
    cli_line = capsys.readouterr().err.strip()
    with disable_run_logger():
        state = check_forecast.fn(project.config)
    assert state.is_failed() and state.message == cli_line
    assert cli_line.startswith("accuracy-checks: error: ") and "segmnts" in cli_line
    assert isinstance(state.result(raise_on_failure=False), ConfigError)
    with pytest.raises(ConfigError):
        state.result()

    (project.data / "actuals.csv").unlink()
    project.config.write_text(CONFIG.format(extra=""), encoding="utf-8")
    assert cli_main(["run", "--config", str(project.config), "-q"]) == 2
    cli_line = capsys.readouterr().err.strip()
    with disable_run_logger():
        state = check_forecast.fn(project.config)
    assert state.message == cli_line and "actuals.csv" in cli_line
    assert isinstance(state.result(raise_on_failure=False), InputError)
    store_file = sqlite_file(default_store_url(load_config(project.config)))
    assert store_file is not None and not store_file.exists()  # nothing recorded, as the CLI


def test_alert_receives_the_report_on_warn_and_fail_only(make_project: Make,
                                                         run_log: pytest.LogCaptureFixture
                                                         ) -> None:
    seen: list[RunReport] = []
    project = make_project(earlier=earlier_with_bias(PASS))
    check_forecast.fn(project.config, alert=seen.append, snapshot=False)
    assert seen == []
    project = make_project(earlier=earlier_with_bias(FAIL))

    def broken(_: RunReport) -> None:
        raise RuntimeError("pager is down")

    # the broken alert does not hide the verdict
    gate_failed(check_forecast.fn(project.config, alert=[broken, seen.append], snapshot=False))
    assert [r.status for r in seen] == ["fail"]
    assert any("pager is down" in rec.getMessage() and rec.levelno == logging.WARNING
               for rec in run_log.records)
    seen.clear()
    gate_failed(check_forecast.fn(project.config, alert=seen.append, alert_on=(),
                                  snapshot=False))
    assert seen == []


def test_bad_parameters_are_programming_errors(make_project: Make) -> None:
    project = make_project()
    with disable_run_logger():
        with pytest.raises(ValueError, match="artifact_key"):
            check_forecast.fn(project.config, artifact_key="Gate Results")
        with pytest.raises(ValueError, match="fail_on"):
            check_forecast.fn(project.config, fail_on="error")  # type: ignore[arg-type]
        with pytest.raises(TypeError, match="alert"):
            check_forecast.fn(project.config, alert=["not callable"])  # type: ignore[list-item]


def test_findings_table_lists_what_needs_attention(make_project: Make) -> None:
    project = make_project(earlier=earlier_with_bias(FAIL))
    with disable_run_logger():
        gate_failed(check_forecast.fn(project.config, snapshot=False))
    from accuracy_checks.engine import run_checks

    report = run_checks(load_config(project.config), snapshot=False)
    rows = findings_table(report)
    attention = [r for r in report.results if r.status in ("fail", "error", "warn", "waived")]
    assert len(rows) == len(attention) > 0
    assert rows[0]["status"] == "FAIL"  # failures first
    assert {row["status"] for row in rows} <= {"FAIL", "ERROR", "WARN", "WAIVED"}
    json.dumps(rows)  # JSON-safe cells
    bias = next(row for row in rows if row["measure"] == "bias_pct")
    assert bias["value"].startswith("under-forecast by 15")  # the sign in words
    assert findings_table(report, limit=1) == rows[:1]


def test_first_failure_turns_a_failed_step_into_the_flows_state() -> None:
    assert first_failure(Completed(data=1), Completed()) is None
    gate = GateFailed("Forecast gate failed: FAIL — 1 failed", counts={"fail": 1})
    state = first_failure(Completed(), Failed(message="task message", data=gate))
    assert state is not None and state.is_failed()
    assert state.message == str(gate) and state.result(raise_on_failure=False) is gate
    usage = InputError("The actuals file a.csv does not exist.")
    state = first_failure(Failed(data=usage), Failed(data=gate))
    assert state is not None
    assert state.message == "accuracy-checks: error: The actuals file a.csv does not exist."


# --------------------------------------------------------------------------- the forecaster


def reference_seasonal_naive(y: np.ndarray, horizon: int, m: int,
                             taus: list[float]) -> tuple[np.ndarray, dict[float, np.ndarray]]:
    """Hyndman & Athanasopoulos, FPP3 (2021), §5.2 (seasonal naive: ŷ[T+h] = y[T+h−m(k+1)],
    k = ⌊(h−1)/m⌋) and §5.5 (benchmark intervals: σ_h = σ̂√(k+1)), row by row in plain
    Python; σ̂ is the root mean square of the in-sample residuals y[t] − y[t−m]."""
    n, t_last = y.shape[0], y.shape[1] - 1
    point = np.zeros((n, horizon))
    qs = {tau: np.zeros((n, horizon)) for tau in taus}
    for i in range(n):
        res = [y[i, t] - y[i, t - m] for t in range(m, y.shape[1])]
        sigma = math.sqrt(sum(r * r for r in res) / len(res))
        for h in range(1, horizon + 1):
            k = (h - 1) // m
            point[i, h - 1] = y[i, t_last + h - m * (k + 1)]
            for tau in taus:
                z = NormalDist().inv_cdf(tau)
                qs[tau][i, h - 1] = max(0.0, point[i, h - 1] + z * sigma * math.sqrt(k + 1))
    return np.clip(point, 0, None), qs


def test_seasonal_naive_matches_the_textbook_formulas() -> None:
    rng = np.random.default_rng(3)
    y = rng.gamma(2.0, 5.0, size=(6, 12))
    for m, horizon in ((4, 3), (4, 9), (1, 5)):  # within a season, beyond it, naive
        got = seasonal_naive(y, horizon, m, [0.1, 0.5, 0.9])
        point, qs = reference_seasonal_naive(y, horizon, m, [0.1, 0.5, 0.9])
        np.testing.assert_allclose(got.point, point, rtol=1e-12)
        for tau in (0.1, 0.5, 0.9):
            np.testing.assert_allclose(got.quantiles[tau], qs[tau], rtol=1e-12, atol=1e-12)
        assert got.seasonal.all()


def test_seasonal_naive_falls_back_and_clips() -> None:
    y = np.array([
        [np.nan, np.nan, 3.0, 5.0],   # no seasonal value for h = 1 (m = 3): naive
        [0.0, 0.0, 0.0, 0.0],         # all zero: spread 0, forecasts 0
        [9.0, 1.0, 9.0, 1.0],         # strong swings: q0.1 clipped at 0
    ])
    fc = seasonal_naive(y, horizon=2, season=3, quantiles=[0.1, 0.9])
    assert fc.seasonal.tolist() == [False, True, True]
    assert fc.point[0].tolist() == [5.0, 5.0]      # the last observed value
    sigma1 = math.sqrt(((5.0 - 3.0) ** 2) / 1)      # one residual only: below 2 → spread 0
    assert sigma1 > 0 and fc.quantiles[0.9][0].tolist() == [5.0, 5.0]
    assert fc.point[1].tolist() == [0.0, 0.0] and fc.quantiles[0.9][1].tolist() == [0.0, 0.0]
    assert fc.quantiles[0.1][2].min() == 0.0
    assert (fc.quantiles[0.1] <= fc.point).all() and (fc.point <= fc.quantiles[0.9]).all()


def test_next_cycle_covers_every_active_series_and_passes_the_output_checks(
        make_project: Make, tmp_path: Path) -> None:
    actuals = actuals_frame(CURRENT)
    stale = (actuals["store"] == "S2") & (actuals["product"] == "P3") & (
        pd.to_datetime(actuals["week"]) >= pd.Timestamp("2026-01-19"))
    project = make_project(actuals=actuals.loc[~stale])  # S2/P3 sold last before the window
    config = load_config(project.config)
    cycle = forecast_next_cycle(config)
    assert cycle.issued == CURRENT and cycle.n_series == 5
    frame = cycle.frame
    assert list(frame.columns) == ["store", "product", "week", "units", "p10", "p90",
                                   "issued_on"]
    assert len(frame) == 5 * HORIZON
    assert not ((frame["store"] == "S2") & (frame["product"] == "P3")).any()
    weeks = pd.date_range(CURRENT, periods=HORIZON, freq="W-MON")
    assert (frame.groupby(["store", "product"])["week"].apply(list)
            .map(lambda w: w == list(weeks)).all())
    assert (frame["p10"] <= frame["units"]).all() and (frame["units"] <= frame["p90"]).all()
    assert (frame[["units", "p10", "p90"]] >= 0).all().all()
    path = write_forecast(cycle, config, tmp_path / "staging")
    assert path.name == "forecast_2026-03-02.csv"
    results = evaluate(config, load_inputs(config, forecast_path=path,
                                           archive=archived_cycles(config)))
    statuses: dict[str, set[str]] = {}
    for r in results:
        statuses.setdefault(r.check, set()).add(r.status)
    for check in ("output.duplicate_rows", "output.invalid_values", "output.negative_values",
                  "output.quantile_order", "output.issue_dates", "coverage.missing_series",
                  "coverage.horizon", "coverage.unexpected_series"):
        assert statuses[check] == {"pass"}, check


def test_next_cycle_carries_segment_columns_from_the_latest_earlier_cycle(
        make_project: Make) -> None:
    earlier = earlier_with_bias(PASS)
    earlier["category"] = earlier["product"].map({"P1": "tools", "P2": "plants", "P3": "plants"})
    later = earlier["issued_on"] == EARLIER[-1].date().isoformat()
    earlier.loc[later & (earlier["product"] == "P1"), "category"] = "hand-tools"  # renamed
    text = CONFIG.format(extra="").replace("  mapping: data/products.csv\n", "")
    project = make_project(earlier=earlier, config_text=text)
    cycle = forecast_next_cycle(load_config(project.config))
    assert "category" in cycle.frame.columns
    got = cycle.frame.drop_duplicates("product").set_index("product")["category"].to_dict()
    assert got == {"P1": "hand-tools", "P2": "plants", "P3": "plants"}
    assert cycle.latest_earlier == EARLIER[-1]


# --------------------------------------------------------------------------- the CI step


def test_ci_gate_publishes_only_what_passes(make_project: Make, tmp_path: Path,
                                           capsys: pytest.CaptureFixture[str]) -> None:
    project = make_project(earlier=earlier_with_bias(WARN))
    published = tmp_path / "published"
    reports = tmp_path / "reports"
    code = ci_gate.main(["--config", str(project.config), "--publish-dir", str(published),
                         "--reports", str(reports), "--label", "build 7"])
    assert code == 0
    assert [p.name for p in published.iterdir()] == ["forecast_2026-03-02.csv"]
    assert json.loads((reports / "accuracy.json").read_text())["status"] == "warn"
    assert recorded(project)[-1]["label"] == "build 7"

    project = make_project(earlier=earlier_with_bias(FAIL))
    published = tmp_path / "published-2"
    assert ci_gate.main(["--config", str(project.config), "--publish-dir",
                         str(published)]) == 1
    assert not published.exists()
    assert recorded(project)[-1]["status"] == "fail"

    project.config.write_text(CONFIG.format(extra="  segmnts: {}\n"), encoding="utf-8")
    capsys.readouterr()
    assert ci_gate.main(["--config", str(project.config), "--publish-dir",
                         str(published)]) == 2
    assert "segmnts" in capsys.readouterr().err and not published.exists()


def test_forecaster_doctests() -> None:
    import doctest

    import flows.forecasting

    outcome = doctest.testmod(flows.forecasting)
    assert outcome.attempted > 0 and outcome.failed == 0
