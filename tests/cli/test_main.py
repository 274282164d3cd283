"""The command line: exit codes 0/1/2 and the one-paragraph messages for bad input."""

from __future__ import annotations

import json
import subprocess
import sys
from collections.abc import Callable
from pathlib import Path

import pandas as pd
import pytest

from accuracy_checks.cli.main import main
from tests.support.cli import refused, run
from tests.support.paths import REPO
from tests.support.project import CURRENT, EARLIER, Project, forecast_frame


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


def test_missing_file(make_project: Callable[..., Project],
                      capsys: pytest.CaptureFixture[str]) -> None:
    project = make_project()
    (project.data / "actuals.csv").unlink()
    err = refused(project, capsys)
    assert "actuals.csv" in err and "does not exist" in err and "actuals.path" in err


def test_empty_file_and_header_only(make_project: Callable[..., Project],
                                    capsys: pytest.CaptureFixture[str]) -> None:
    project = make_project()
    (project.data / "forecast.csv").write_text("")
    assert "is empty" in refused(project, capsys)
    (project.data / "forecast.csv").write_text("store,product,week,units,p10,p90,issued_on\n")
    assert "no rows" in refused(project, capsys)


def test_missing_column_lists_the_existing_ones(make_project: Callable[..., Project],
                                                capsys: pytest.CaptureFixture[str]) -> None:
    project = make_project(forecast=forecast_frame(CURRENT).rename(columns={"units": "qty"}))
    err = refused(project, capsys)
    assert "no column 'units'" in err and "forecast.value" in err and "qty" in err
    assert "forecast.csv" in err


def test_non_numeric_values_name_the_lines(make_project: Callable[..., Project],
                                           capsys: pytest.CaptureFixture[str]) -> None:
    forecast = forecast_frame(CURRENT).astype({"units": object})
    forecast.loc[3, "units"] = "twelve"
    project = make_project(forecast=forecast)
    err = refused(project, capsys)
    assert "'units'" in err and "1 value that is not a number" in err and "line 5: 'twelve'" in err


def test_unparseable_dates(make_project: Callable[..., Project],
                           capsys: pytest.CaptureFixture[str]) -> None:
    forecast = forecast_frame(CURRENT)
    forecast.loc[0, "week"] = "next monday"
    project = make_project(forecast=forecast)
    err = refused(project, capsys)
    assert "'week'" in err and "1 value that is not a date" in err
    assert "line 2: 'next monday'" in err


def test_config_errors_exit_2(make_project: Callable[..., Project],
                              capsys: pytest.CaptureFixture[str]) -> None:
    project = make_project()
    text = project.config.read_text()
    project.config.write_text(text.replace("window: 2", "windows: 2"))
    err = refused(project, capsys)
    assert "unknown key `evaluation.windows`" in err and "did you mean 'window'" in err
    project.config.write_text(text.replace("wape: {warn: 25, fail: 40}",
                                           "wape: {warn: 40, fail: 25}"))
    assert "warn 40 is beyond fail 25" in refused(project, capsys)
    project.config.write_text(text.replace("horizon: 4", "horizon: -1"))
    assert "horizon" in refused(project, capsys)


def test_segment_column_in_neither_file(make_project: Callable[..., Project],
                                        capsys: pytest.CaptureFixture[str]) -> None:
    project = make_project()
    project.config.write_text(project.config.read_text().replace("[category]", "[department]"))
    err = refused(project, capsys)
    assert "'department'" in err and "neither" in err and "segments.columns" in err


def test_mapping_with_two_segments_for_one_series(make_project: Callable[..., Project],
                                                  capsys: pytest.CaptureFixture[str]) -> None:
    project = make_project()
    project.write("products.csv", pd.DataFrame(
        {"product": ["P1", "P2", "P3", "P2"], "category": ["tools", "plants", "plants", "tools"]}))
    err = refused(project, capsys)
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
        capture_output=True, text=True, cwd=REPO, check=False)
    assert proc.returncode == 0, proc.stderr
    assert "read forecast" in proc.stderr  # progress lines go to stderr


def test_mixed_time_zones_are_named_without_library_noise(
        make_project: Callable[..., Project], capsys: pytest.CaptureFixture[str]) -> None:
    forecast = forecast_frame(CURRENT)
    forecast["week"] = forecast["week"] + "T00:00:00+01:00"
    forecast.loc[3, "week"] = forecast.loc[3, "week"].replace("+01:00", "+02:00")
    project = make_project(forecast=forecast)
    err = refused(project, capsys)
    assert "'week'" in err and "mixes time zones" in err and "utc=True" not in err


def test_version(capsys: pytest.CaptureFixture[str]) -> None:
    with pytest.raises(SystemExit) as info:
        main(["--version"])
    assert info.value.code == 0
    assert capsys.readouterr().out.strip() == "accuracy-checks 0.1.0"


# ------------------------------------------------ issue 10: the input readers' rules (H1)


def _rename_products(frame: pd.DataFrame, names: dict[str, str]) -> pd.DataFrame:
    return frame.assign(product=frame["product"].map(names))


def test_keys_007_and_7_are_two_series(make_project: Callable[..., Project],
                                       capsys: pytest.CaptureFixture[str]) -> None:
    from tests.support.project import PRODUCTS, actuals_frame

    names = {"P1": "007", "P2": "7", "P3": "07"}  # all numeric-looking: still three products
    earlier = pd.concat([forecast_frame(d) for d in EARLIER], ignore_index=True)
    project = make_project(forecast=_rename_products(forecast_frame(CURRENT), names),
                           earlier=_rename_products(earlier, names),
                           actuals=_rename_products(actuals_frame(CURRENT), names))
    project.write("products.csv", pd.DataFrame({"product": [names[p] for p in PRODUCTS],
                                                "category": list(PRODUCTS.values())}))
    out = project.root / "r.json"
    assert run(project, "--no-snapshot", "--json", str(out)) == 0, capsys.readouterr().err
    doc = json.loads(out.read_text())
    assert doc["inputs"]["forecast"]["series"] == 6  # 2 stores × 3 products
    by_segment = {r["segment"]: r["n_series"] for r in doc["results"]
                  if r["check"] == "accuracy" and r["measure"] == "wape"}
    assert by_segment == {"*": 6, "tools": 2, "plants": 4}


def test_a_period_column_mixing_date_formats_is_refused(
        make_project: Callable[..., Project], capsys: pytest.CaptureFixture[str]) -> None:
    forecast = forecast_frame(CURRENT)
    forecast.loc[5, "week"] = pd.Timestamp(forecast.loc[5, "week"]).strftime("%d/%m/%Y")
    project = make_project(forecast=forecast)
    err = refused(project, capsys)
    # 9 March written day first; a guess per value reads it as 3 September
    assert "forecast.csv" in err and "'week'" in err and "line 7: '09/03/2026'" in err
    assert "forecast.date_formats" in err and '"%d/%m/%Y"' in err


def test_day_month_year_dates_read_with_their_configured_format(
        make_project: Callable[..., Project], capsys: pytest.CaptureFixture[str]) -> None:
    def dmy(frame: pd.DataFrame) -> pd.DataFrame:
        return frame.assign(week=pd.to_datetime(frame["week"]).dt.strftime("%d/%m/%Y"))

    earlier = pd.concat([forecast_frame(d) for d in EARLIER], ignore_index=True)
    base = make_project()
    out = base.root / "iso.json"
    assert run(base, "--no-snapshot", "--json", str(out)) == 0
    iso = json.loads(out.read_text())
    project = make_project(forecast=dmy(forecast_frame(CURRENT)), earlier=dmy(earlier))
    project.config.write_text(project.config.read_text().replace(
        "  issued: issued_on\n", '  issued: issued_on\n  date_formats: {week: "%d/%m/%Y"}\n'))
    out = project.root / "dmy.json"
    assert run(project, "--no-snapshot", "--json", str(out)) == 0, capsys.readouterr().err
    dmy_doc = json.loads(out.read_text())
    # the same dates written another way: the same figures
    assert [(r["check"], r["segment"], r["measure"], r["value"]) for r in dmy_doc["results"]] \
        == [(r["check"], r["segment"], r["measure"], r["value"]) for r in iso["results"]]


def test_a_column_named_twice_is_refused(make_project: Callable[..., Project],
                                        capsys: pytest.CaptureFixture[str]) -> None:
    project = make_project()
    path = project.data / "actuals.csv"
    lines = path.read_text().splitlines()
    lines = [lines[0] + ",units_sold"] + [line + ",0" for line in lines[1:]]
    path.write_text("\n".join(lines) + "\n")
    err = refused(project, capsys)
    assert "actuals.csv" in err and "2 columns named 'units_sold'" in err


@pytest.mark.parametrize("name", ["*", "unassigned"])
def test_a_reserved_segment_name_in_the_mapping_is_refused(
        make_project: Callable[..., Project], capsys: pytest.CaptureFixture[str],
        name: str) -> None:
    project = make_project()
    project.write("products.csv", pd.DataFrame({"product": ["P1", "P2", "P3"],
                                                "category": ["tools", name, "plants"]}))
    err = refused(project, capsys)
    assert "products.csv" in err and "'category'" in err and f"line 3: '{name}'" in err
    assert "reserved segment name" in err


def test_actuals_keys_of_another_length_are_a_config_error(
        make_project: Callable[..., Project], capsys: pytest.CaptureFixture[str]) -> None:
    project = make_project()
    project.config.write_text(project.config.read_text().replace(
        "  value: units_sold\n", "  value: units_sold\n  keys: [store]\n"))
    err = refused(project, capsys)
    assert "actuals.keys ['store'] has 1 column(s)" in err
    assert "forecast.keys ['store', 'product'] has 2" in err


def test_a_horizon_past_the_calendar_is_refused(make_project: Callable[..., Project],
                                                capsys: pytest.CaptureFixture[str]) -> None:
    project = make_project()
    project.config.write_text(project.config.read_text().replace("horizon: 4",
                                                                 "horizon: 100000"))
    assert "at most 1000" in refused(project, capsys)
    # a weekly forecast issued in the calendar's last week: its horizon runs past 2262-04-11
    last = pd.Timestamp("2262-04-07")  # a Monday
    forecast = forecast_frame(last)
    project = make_project(forecast=forecast.loc[forecast["week"] == "2262-04-07"])
    err = refused(project, capsys)
    assert "run past the calendar" in err and "`horizon`" in err


def test_a_spreadsheet_serial_date_is_named_plainly(make_project: Callable[..., Project],
                                                   capsys: pytest.CaptureFixture[str]) -> None:
    from tests.support.project import actuals_frame

    # every date written as a spreadsheet serial (days since 1899-12-30): 2026-01-05 → 46027
    actuals = actuals_frame(CURRENT)
    serial = (pd.to_datetime(actuals["week"]) - pd.Timestamp("1899-12-30")).dt.days
    project = make_project(actuals=actuals.assign(week=serial))
    err = refused(project, capsys)
    assert "line 2: '46027'" in err and "np.int64" not in err


def test_an_unquoted_decimal_comma_is_refused(make_project: Callable[..., Project],
                                              capsys: pytest.CaptureFixture[str]) -> None:
    project = make_project()
    path = project.data / "actuals.csv"
    lines = path.read_text().splitlines()
    lines[2] = lines[2].replace(".0", ",5")  # 110,5 written with a decimal comma, unquoted
    path.write_text("\n".join(lines) + "\n")
    err = refused(project, capsys)
    assert "actuals.csv" in err and "5 fields on line 3" in err and "decimal" in err


def test_unusual_separators_and_encodings_are_named(make_project: Callable[..., Project],
                                                    capsys: pytest.CaptureFixture[str]) -> None:
    project = make_project()
    path = project.data / "forecast.csv"
    text = path.read_text()
    path.write_text(text.replace(",", ";"))
    assert "seems separated by semicolons" in refused(project, capsys)
    path.write_text(text.replace("S1", "Sö1"), encoding="latin-1")
    err = refused(project, capsys)
    assert "forecast.csv" in err and "it is not UTF-8 text" in err
    # a BOM and Windows line ends are read as the same file: the same results as the plain one
    def results(name: str) -> list[tuple[object, ...]]:
        out = project.root / f"{name}.json"
        assert run(project, "--no-snapshot", "--json", str(out)) == 0
        return [(r["check"], r["segment"], r["lag"], r["measure"], r["value"], r["status"],
                 r["n_obs"], r["message"]) for r in json.loads(out.read_text())["results"]]

    path.write_text(text)
    plain = results("plain")
    path.write_text(text.replace("\n", "\r\n"), encoding="utf-8-sig", newline="")
    assert path.read_bytes().startswith(b"\xef\xbb\xbf") and b"\r\n" in path.read_bytes()
    assert results("bom-crlf") == plain


def test_forecast_and_actuals_options_take_urls(make_project: Callable[..., Project],
                                                capsys: pytest.CaptureFixture[str]) -> None:
    import fsspec

    project = make_project()
    err = refused(project, capsys, "--forecast", "ftp://host/forecast.csv")
    assert "--forecast ftp://host/forecast.csv" in err and "s3" in err
    memory = fsspec.filesystem("memory")
    memory.pipe("/cli-test/forecast.csv", (project.data / "forecast.csv").read_bytes())
    (project.data / "forecast.csv").unlink()  # only the URL holds the forecast now
    try:
        assert run(project, "--forecast", "memory://cli-test/forecast.csv") == 0
    finally:
        memory.rm("/cli-test", recursive=True)
