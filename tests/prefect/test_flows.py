"""Flow-level tests against one local Prefect server (``prefect_test_harness``, started once).

The nightly flow (forecast → gate → publish) on small projects and on the invented demo: a
failed gate fails the flow and the publish task never runs; a warning lets it run and the flow
ends Completed; the audit record exists for pass, warn and fail; artifacts and run logs are
read back through Prefect's client; a config or input error fails the step that read it with
the CLI's message. The Dask fan-out equals the single-process figures.
"""

from __future__ import annotations

import json
import os
import subprocess
import sys
from collections.abc import Callable, Iterator
from pathlib import Path
from typing import Any
from uuid import UUID

import pandas as pd
import pyarrow as pa
import pytest
from prefect import flow, get_client
from prefect.client.schemas.filters import (
    FlowRunFilter,
    FlowRunFilterId,
    LogFilter,
    LogFilterFlowRunId,
)
from prefect.logging.handlers import APILogHandler
from prefect.states import State
from prefect.testing.utilities import prefect_test_harness

from accuracy_checks.cli.main import main as cli_main
from accuracy_checks.engine import run_checks
from accuracy_checks.errors import GateFailed, InputError
from accuracy_checks.measures.catalogue import load_config
from accuracy_checks.prefect import WARNED_STATE_NAME, check_forecast
from accuracy_checks.store import open_store
from flows.forecasting import forecast_next_cycle, write_forecast
from flows.nightly_forecast import main as nightly_main
from flows.nightly_forecast import run_nightly
from tests.support.project import EARLIER, Project, forecast_frame

Make = Callable[..., Project]
from tests.support.paths import REPO  # noqa: E402


@pytest.fixture(scope="session", autouse=True)
def prefect_server() -> Iterator[None]:
    """One temporary Prefect server (SQLite) for every test here: it starts in ~15 s.
    Analytics off: its heartbeat can otherwise log "database is locked" on SQLite."""
    before = os.environ.get("PREFECT_SERVER_ANALYTICS_ENABLED")
    os.environ["PREFECT_SERVER_ANALYTICS_ENABLED"] = "false"
    try:
        with prefect_test_harness(server_startup_timeout=120):
            yield
    finally:
        if before is None:
            os.environ.pop("PREFECT_SERVER_ANALYTICS_ENABLED", None)
        else:
            os.environ["PREFECT_SERVER_ANALYTICS_ENABLED"] = before


def project_with_bias(make_project: Make, bias: float) -> Project:
    return make_project(earlier=pd.concat([forecast_frame(d, bias=bias) for d in EARLIER],
                                          ignore_index=True))


def flow_run_id(state: State) -> UUID:
    run_id = state.state_details.flow_run_id
    assert run_id is not None
    return run_id


def task_states(state: State) -> dict[str, str]:
    """Task name (without Prefect's run suffix) → final state name, read from the server."""
    with get_client(sync_client=True) as client:
        runs = client.read_task_runs(
            flow_run_filter=FlowRunFilter(id=FlowRunFilterId(any_=[flow_run_id(state)])))
    return {r.name.rsplit("-", 1)[0]: (r.state.name if r.state else "") for r in runs}


def artifacts(state: State) -> dict[str, Any]:
    with get_client(sync_client=True) as client:
        found = client.read_artifacts(
            flow_run_filter=FlowRunFilter(id=FlowRunFilterId(any_=[flow_run_id(state)])))
    return {a.key: a for a in found}


def logs(state: State) -> list[tuple[int, str]]:
    APILogHandler().flush()  # logs reach the server in batches
    with get_client(sync_client=True) as client:
        found = client.read_logs(
            log_filter=LogFilter(flow_run_id=LogFilterFlowRunId(any_=[flow_run_id(state)])))
    return [(log.level, log.message) for log in found]


def audit(config: Path) -> list[dict[str, Any]]:
    with open_store(load_config(config), create=False) as store:
        return store.history()


def test_pass_publishes_and_records(make_project: Make, tmp_path: Path) -> None:
    project = project_with_bias(make_project, 0.97)
    publish = tmp_path / "published"
    code, state = run_nightly(project.config, publish)
    assert code == 0 and state.is_completed() and state.name == "Completed"
    summary = state.result()
    assert summary["status"] == "pass" and summary["cycle"] == "2026-03-02"
    assert Path(summary["published"]) == publish / "forecast_2026-03-02.csv"
    assert [p.name for p in publish.iterdir()] == ["forecast_2026-03-02.csv"]
    assert task_states(state) == {"make-forecast": "Completed", "accuracy-gate": "Completed",
                                  "publish-forecast": "Completed"}
    (record,) = audit(project.config)
    assert record["status"] == "pass" and record["run_id"] == summary["run_id"]
    assert str(flow_run_id(state)) in record["label"]  # the flow run, for the audit trail
    # the gate read the forecast frame in memory: no file was written before the gate
    assert record["inputs"]["forecast"]["frame"] == "pandas.DataFrame"
    assert record["inputs"]["forecast"]["rows"] == 24
    published = pd.read_csv(publish / "forecast_2026-03-02.csv")
    assert len(published) == 24 and set(published["week"]) == {
        "2026-03-02", "2026-03-09", "2026-03-16", "2026-03-23"}


@flow(name="gate-a-frame")
def gate_frames(config: str, forecast: Any, actuals: Any) -> dict[str, Any]:
    """The gate task on frames: its state's name, message and data (report or error)."""
    state = check_forecast(config, forecast=forecast, actuals=actuals, return_state=True)
    return {"name": state.name, "message": state.message, "failed": state.is_failed(),
            "data": state.result(raise_on_failure=False)}


def test_check_forecast_takes_frames_in_a_flow(make_project: Make) -> None:
    """The task with a pandas forecast and a pyarrow actuals table gives the file run's
    verdict and figures; a bad frame fails it with the message naming the frame."""
    project = project_with_bias(make_project, 0.93)
    forecast = pd.read_csv(project.data / "forecast.csv")
    actuals = pa.Table.from_pandas(pd.read_csv(project.data / "actuals.csv"))
    got = gate_frames(str(project.config), forecast, actuals)
    assert got["name"] == WARNED_STATE_NAME and not got["failed"]
    from_files = run_checks(load_config(project.config), snapshot=False)
    report = got["data"]
    assert report.status == from_files.status == "warn"
    assert [(r.check, r.segment, r.status, r.value) for r in report.results] == [
        (r.check, r.segment, r.status, r.value) for r in from_files.results]
    assert report.inputs["actuals"]["frame"] == "pyarrow.Table"

    got = gate_frames(str(project.config), forecast.drop(columns=["units"]), actuals)
    assert got["failed"] and isinstance(got["data"], InputError)
    assert "forecast frame (argument `forecast`) has no column 'units'" in got["message"]


def test_warning_publishes_logs_and_leaves_artifacts(make_project: Make,
                                                     tmp_path: Path) -> None:
    project = project_with_bias(make_project, 0.93)
    publish = tmp_path / "published"
    code, state = run_nightly(project.config, publish)
    assert code == 0 and state.is_completed()  # the flow completes …
    assert task_states(state) == {"make-forecast": "Completed",
                                  "accuracy-gate": WARNED_STATE_NAME,  # … the gate says so
                                  "publish-forecast": "Completed"}
    assert (publish / "forecast_2026-03-02.csv").exists()
    assert [r["status"] for r in audit(project.config)] == ["warn"]

    found = artifacts(state)
    table, summary = found["accuracy-gate-findings"], found["accuracy-gate-summary"]
    assert table.type == "table" and summary.type == "markdown"
    rows = json.loads(table.data)
    assert rows and {row["status"] for row in rows} == {"WARN"}
    assert any(row["measure"] == "bias_pct" and row["value"].startswith("under-forecast by 7")
               for row in rows)
    assert str(summary.data).startswith("## accuracy-checks: WARN")
    warned = [text for level, text in logs(state) if level == 30]
    assert len(warned) == len(rows) and all(text.startswith("WARN ") for text in warned)


def test_failed_gate_fails_the_flow_and_never_publishes(make_project: Make,
                                                        tmp_path: Path) -> None:
    project = project_with_bias(make_project, 0.85)
    publish = tmp_path / "published"
    code, state = run_nightly(project.config, publish)
    assert code == 1 and state.is_failed()
    error = state.result(raise_on_failure=False)
    assert isinstance(error, GateFailed) and state.message == str(error)
    assert error.summary["counts"]["fail"] >= 1
    states = task_states(state)
    assert states == {"make-forecast": "Completed", "accuracy-gate": "Failed",
                      "publish-forecast": "NotReady"}  # the publish task never ran
    assert not publish.exists()
    (record,) = audit(project.config)  # recorded although the gate failed
    assert record["status"] == "fail" and record["run_id"] == error.summary["run_id"]
    found = artifacts(state)  # the artifacts are published on failure too
    assert {"accuracy-gate-findings", "accuracy-gate-summary"} <= set(found)


def test_a_failed_gate_is_a_verdict_in_the_logs_not_a_traceback(make_project: Make,
                                                                tmp_path: Path) -> None:
    # The gate task returns a Failed state instead of raising GateFailed: Prefect then logs
    # the verdict, no traceback (and no "NoneType: None" under its "Task run failed" line).
    project = project_with_bias(make_project, 0.85)
    code, state = run_nightly(project.config, tmp_path / "published")
    assert code == 1 and state.is_failed()
    error = state.result(raise_on_failure=False)
    assert isinstance(error, GateFailed)
    assert state.message == str(error)
    assert state.message.startswith("Forecast gate failed: FAIL — 3 failed")
    assert "under-forecast by 15 %" in state.message
    with get_client(sync_client=True) as client:
        (gate,) = [r for r in client.read_task_runs(
            flow_run_filter=FlowRunFilter(id=FlowRunFilterId(any_=[flow_run_id(state)])))
            if r.name.startswith("accuracy-gate")]
    assert gate.state is not None and gate.state.is_failed()
    assert gate.state.message == state.message  # the task's own state says the verdict
    found = logs(state)
    assert any(level >= 40 and text.startswith("FAIL — 3 failed") for level, text in found)
    dumps = [text for _, text in found if "Traceback" in text or "NoneType: None" in text]
    assert dumps == []


def test_unusable_config_fails_the_first_step_with_the_clis_message(
        make_project: Make, tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    project = make_project(extra="  segmnts: {}\n")
    assert cli_main(["run", "--config", str(project.config), "-q"]) == 2
    cli_line = capsys.readouterr().err.strip()
    publish = tmp_path / "published"
    assert nightly_main(["--config", str(project.config), "--publish-dir", str(publish)]) == 2
    assert cli_line in capsys.readouterr().err
    assert not publish.exists()


def test_unusable_input_fails_the_check_task_with_the_clis_message(
        make_project: Make, tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    # the forecaster needs no mapping, the gate does: a mapping without the segment column
    project = make_project()
    project.write("products.csv", pd.DataFrame({"product": ["P1", "P2", "P3"],
                                                "family": ["a", "b", "b"]}))
    publish = tmp_path / "published"
    code, state = run_nightly(project.config, publish)
    assert code == 2 and state.is_failed()
    # the same forecast as a file, through the command line: the same message
    cycle = forecast_next_cycle(load_config(project.config))
    staged = write_forecast(cycle, load_config(project.config), tmp_path / "staged")
    assert cli_main(["run", "--config", str(project.config), "--forecast", str(staged),
                     "-q"]) == 2
    cli_line = capsys.readouterr().err.strip()
    assert state.message == cli_line and "category" in cli_line
    assert isinstance(state.result(raise_on_failure=False), InputError)
    assert task_states(state) == {"make-forecast": "Completed", "accuracy-gate": "Failed",
                                  "publish-forecast": "NotReady"}
    assert not publish.exists()
    errors = [text for level, text in logs(state) if level >= 40]
    assert cli_line in errors
    assert not any("Traceback" in text for text in errors)  # Prefect's own lines only


def test_demo_nights_publish_one_cycle_and_stop_the_other(tmp_path: Path) -> None:
    # the README's first quick-start command, as a user runs it (against this session's
    # server instead of a temporary one): the stopped night reads as the gate's verdict in
    # the script's whole output, Prefect's console log included, never as a crash
    from prefect.settings import get_current_settings

    out = tmp_path / "demo-run"
    env = {**os.environ, "PREFECT_API_URL": str(get_current_settings().api.url),
           "PREFECT_SERVER_ANALYTICS_ENABLED": "false", "PYTHONIOENCODING": "utf-8"}
    done = subprocess.run([sys.executable, str(REPO / "flows" / "nightly_forecast.py"),
                           "--demo", str(out)], capture_output=True, text=True, env=env,
                          timeout=300, check=False, encoding="utf-8")
    assert done.returncode == 0, done.stderr[-3000:]
    text, both = done.stdout, done.stdout + done.stderr
    assert "Traceback" not in both and "NoneType: None" not in both
    assert "Task run failed with state: Failed(message='Forecast gate failed: FAIL" in both
    assert "Night 1" in text and "Night 2" in text
    assert "Published: published/forecast_2025-04-07.csv" in text
    assert "pet-care: Bias: under-forecast" in text and "Published: nothing" in text
    night2 = text[text.index("Night 2"):]
    assert "  Gate: FAIL — 1 failed" in night2
    assert [p.name for p in (out / "published").iterdir()] == ["forecast_2025-04-07.csv"]
    assert not (out / ".accuracy_checks" / "staging").exists()  # frames, not files
    runs = audit(out / "nightly-latest.yaml")
    assert [(r["cycle"], r["status"]) for r in runs] == [("2025-04-07", "warn"),
                                                        ("2025-05-12", "fail")]
    # the gate read each forecast from memory, and archived both (the stopped one too)
    assert all(r["inputs"]["forecast"]["frame"] == "pandas.DataFrame" for r in runs)
    assert all(r["snapshot"] for r in runs)
    published = pd.read_csv(out / "published" / "forecast_2025-04-07.csv")
    assert list(published.columns) == ["store", "product", "week", "units", "p10", "p90",
                                       "issued_on"]
    assert len(published) == 13 * published.groupby(["store", "product"]).ngroups


def test_the_gate_runs_on_the_flows_dask_cluster(tmp_path: Path) -> None:
    """check_forecast(engine="dask") on DaskTaskRunner: the shards are checked on the flow's
    cluster (the snapshot is the dask engine's partitioned one), with the pandas verdict."""
    from accuracy_checks.demo.scenario import generate_scenario
    from flows.dask_gate import dask_gate
    from flows.demo_nightly import LATEST_CONFIG, latest_config_text

    scenario = generate_scenario(tmp_path / "demo")
    config = scenario.out_dir / LATEST_CONFIG
    config.write_text(latest_config_text(scenario), encoding="utf-8")
    expected = run_checks(load_config(config), snapshot=False)
    state = dask_gate(str(config), return_state=True)
    assert state.is_failed() == (expected.status == "fail")
    snapshots = list((scenario.out_dir / ".accuracy_checks" / "archive").glob("cycle=*/*"))
    assert snapshots and all(s.is_dir() and any(s.glob("part-*.parquet")) for s in snapshots)


def test_the_readme_deployment_schedules_the_flow_every_night() -> None:
    from prefect.schedules import Cron

    from flows.nightly_forecast import nightly_forecast

    deployment = nightly_forecast.to_deployment(
        name="nightly-forecast", schedules=[Cron("30 2 * * *", timezone="Europe/Berlin")],
        parameters={"config": "/srv/forecast/accuracy-checks.yaml",
                    "publish_dir": "/srv/forecast/published"})
    (schedule,) = deployment.schedules
    assert schedule.schedule.cron == "30 2 * * *"
    assert schedule.schedule.timezone == "Europe/Berlin"
    assert deployment.parameters["publish_dir"] == "/srv/forecast/published"


def test_retries_never_repeat_a_verdict(make_project: Make) -> None:
    from prefect import flow

    from accuracy_checks.prefect import check_forecast, first_failure

    @flow
    def gate_with_retries(config: str) -> Any:
        check = check_forecast.with_options(retries=2, retry_delay_seconds=0).submit(config)
        check.wait()
        return first_failure(check)

    project = project_with_bias(make_project, 0.85)
    state = gate_with_retries(str(project.config), return_state=True)
    assert state.is_failed()
    assert isinstance(state.result(raise_on_failure=False), GateFailed)
    assert len(audit(project.config)) == 1  # one verdict, one record: not retried
