"""The command line: exit codes 0/1/2 and the one-paragraph messages for bad input."""

from __future__ import annotations

import json
import subprocess
import sys
from collections.abc import Callable
from pathlib import Path

import pandas as pd
import pytest
from conftest import CURRENT, EARLIER, Project, forecast_frame

from accuracy_checks.cli import main


def run(project: Project, *args: str) -> int:
    return main(["run", "--config", str(project.config), "-q", "--no-color", *args])


def archived(project: Project) -> list[Path]:
    return sorted((project.root / "archive").rglob("*.parquet"))


def test_pass_exits_0_and_writes_every_output(make_project: Callable[..., Project],
                                              capsys: pytest.CaptureFixture[str]) -> None:
    project = make_project()
    out = project.root / "out"
    code = run(project, "--json", str(out / "r.json"), "--junit", str(out / "r.xml"),
               "--markdown", str(out / "r.md"))
    assert code == 0
    doc = json.loads((out / "r.json").read_text())
    assert doc["status"] == "pass" and doc["cycle"] == "2026-03-02" and doc["run_id"]
    contract = {"check", "segment", "lag", "measure", "value", "warn", "fail", "status",
                "n_series", "n_obs", "message", "examples"}
    assert all(contract <= set(r) for r in doc["results"])
    assert (out / "r.xml").read_text().startswith("<?xml")
    assert "PASS" in (out / "r.md").read_text().upper()
    assert "PASS" in capsys.readouterr().out
    assert len(archived(project)) == 1


def test_failed_gate_exits_1(make_project: Callable[..., Project]) -> None:
    earlier = pd.concat([forecast_frame(d, bias=0.7) for d in EARLIER], ignore_index=True)
    project = make_project(earlier=earlier)
    assert run(project) == 1
    assert len(archived(project)) == 1  # a failed gate still snapshots what it checked


def test_fail_on_warn(make_project: Callable[..., Project]) -> None:
    earlier = pd.concat([forecast_frame(d, bias=0.93) for d in EARLIER], ignore_index=True)
    project = make_project(earlier=earlier)  # bias 7 %: warn (5) but not fail (10)
    assert run(project, "--no-snapshot") == 0
    assert run(project, "--no-snapshot", "--fail-on", "warn") == 1
    assert archived(project) == []


def bad(project: Project, capsys: pytest.CaptureFixture[str], *args: str) -> str:
    code = run(project, *args)
    err = capsys.readouterr().err
    assert code == 2, err
    assert "Traceback" not in err
    assert archived(project) == [], "nothing may be archived on unusable input"
    return err


def test_missing_file(make_project: Callable[..., Project],
                      capsys: pytest.CaptureFixture[str]) -> None:
    project = make_project()
    (project.data / "actuals.csv").unlink()
    err = bad(project, capsys)
    assert "actuals.csv" in err and "does not exist" in err and "actuals.path" in err


def test_empty_file_and_header_only(make_project: Callable[..., Project],
                                    capsys: pytest.CaptureFixture[str]) -> None:
    project = make_project()
    (project.data / "forecast.csv").write_text("")
    assert "is empty" in bad(project, capsys)
    (project.data / "forecast.csv").write_text("store,product,week,units,p10,p90,issued_on\n")
    assert "no rows" in bad(project, capsys)


def test_missing_column_lists_the_existing_ones(make_project: Callable[..., Project],
                                                capsys: pytest.CaptureFixture[str]) -> None:
    project = make_project(forecast=forecast_frame(CURRENT).rename(columns={"units": "qty"}))
    err = bad(project, capsys)
    assert "no column 'units'" in err and "forecast.value" in err and "qty" in err
    assert "forecast.csv" in err


def test_non_numeric_values_name_the_lines(make_project: Callable[..., Project],
                                           capsys: pytest.CaptureFixture[str]) -> None:
    forecast = forecast_frame(CURRENT).astype({"units": object})
    forecast.loc[3, "units"] = "twelve"
    project = make_project(forecast=forecast)
    err = bad(project, capsys)
    assert "'units'" in err and "1 value that is not a number" in err and "line 5: 'twelve'" in err


def test_unparseable_dates(make_project: Callable[..., Project],
                           capsys: pytest.CaptureFixture[str]) -> None:
    forecast = forecast_frame(CURRENT)
    forecast.loc[0, "week"] = "next monday"
    project = make_project(forecast=forecast)
    err = bad(project, capsys)
    assert "'week'" in err and "1 value that is not a date" in err
    assert "line 2: 'next monday'" in err


def test_config_errors_exit_2(make_project: Callable[..., Project],
                              capsys: pytest.CaptureFixture[str]) -> None:
    project = make_project()
    text = project.config.read_text()
    project.config.write_text(text.replace("window: 2", "windows: 2"))
    err = bad(project, capsys)
    assert "unknown key `evaluation.windows`" in err and "did you mean 'window'" in err
    project.config.write_text(text.replace("wape: {warn: 25, fail: 40}",
                                           "wape: {warn: 40, fail: 25}"))
    assert "warn 40 is beyond fail 25" in bad(project, capsys)
    project.config.write_text(text.replace("horizon: 4", "horizon: -1"))
    assert "horizon" in bad(project, capsys)


def test_segment_column_in_neither_file(make_project: Callable[..., Project],
                                        capsys: pytest.CaptureFixture[str]) -> None:
    project = make_project()
    project.config.write_text(project.config.read_text().replace("[category]", "[department]"))
    err = bad(project, capsys)
    assert "'department'" in err and "neither" in err and "segments.columns" in err


def test_mapping_with_two_segments_for_one_series(make_project: Callable[..., Project],
                                                  capsys: pytest.CaptureFixture[str]) -> None:
    project = make_project()
    project.write("products.csv", pd.DataFrame(
        {"product": ["P1", "P2", "P3", "P2"], "category": ["tools", "plants", "plants", "tools"]}))
    err = bad(project, capsys)
    assert "more than one segment" in err and "product=P2" in err
    assert "plants" in err and "tools" in err


def test_schema_and_validate_commands(make_project: Callable[..., Project],
                                      capsys: pytest.CaptureFixture[str]) -> None:
    assert main(["schema"]) == 0
    schema = json.loads(capsys.readouterr().out)
    assert "forecast" in schema["properties"]
    project = make_project()
    assert main(["validate", "--config", str(project.config)]) == 0
    assert "valid" in capsys.readouterr().out


def test_python_dash_m_runs_the_same_cli(make_project: Callable[..., Project]) -> None:
    project = make_project()
    proc = subprocess.run(
        [sys.executable, "-m", "accuracy_checks", "run", "--config", str(project.config),
         "--no-snapshot"],
        capture_output=True, text=True, cwd=Path(__file__).parent.parent, check=False)
    assert proc.returncode == 0, proc.stderr
    assert "read forecast" in proc.stderr  # progress lines go to stderr


def test_mixed_time_zones_are_named_without_library_noise(
        make_project: Callable[..., Project], capsys: pytest.CaptureFixture[str]) -> None:
    forecast = forecast_frame(CURRENT)
    forecast["week"] = forecast["week"] + "T00:00:00+01:00"
    forecast.loc[3, "week"] = forecast.loc[3, "week"].replace("+01:00", "+02:00")
    project = make_project(forecast=forecast)
    err = bad(project, capsys)
    assert "'week'" in err and "mixes time zones" in err and "utc=True" not in err


def test_version(capsys: pytest.CaptureFixture[str]) -> None:
    with pytest.raises(SystemExit) as info:
        main(["--version"])
    assert info.value.code == 0
    assert capsys.readouterr().out.strip() == "accuracy-checks 0.1.0"
