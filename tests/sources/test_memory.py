"""Frames as inputs (accuracy_checks/sources/memory.py): the same results as the files of the
same data, the same errors naming the frame and the column, a fingerprint without a path.

The reference of every comparison is the local-file run of the same project (CSV files), whose
figures tests/test_engine.py recomputes with numpy.
"""

from __future__ import annotations

import math
import re
import shutil
from collections.abc import Callable
from pathlib import Path
from typing import Any

import pandas as pd
import pyarrow as pa
import pytest

from accuracy_checks import InputError, UsageError, load_config, run_checks
from accuracy_checks.results import RunReport
from accuracy_checks.sources import frames as F
from accuracy_checks.sources.memory import (
    Given,
    actuals_from_frame,
    forecast_from_frame,
    frame_info,
)
from accuracy_checks.store import open_store
from tests.support.project import CURRENT, EARLIER, Project, forecast_frame

KEY_COLUMNS = ["store", "product"]


def a_project(make_project: Callable[..., Project]) -> Project:
    """The small project with findings of several kinds: plants under-forecast in the earlier
    cycles (an accuracy failure), one series missing from the forecast (coverage)."""
    earlier = pd.concat([forecast_frame(d) for d in EARLIER], ignore_index=True)
    plants = earlier["product"].isin(["P2", "P3"])
    earlier.loc[plants, "units"] *= 0.8
    forecast = forecast_frame(CURRENT)
    forecast = forecast.loc[~((forecast["store"] == "S2") & (forecast["product"] == "P3"))]
    return make_project(earlier=earlier, forecast=forecast)


def copy_of(project: Project, name: str) -> Path:
    """A fresh copy of the project (its own archive and audit store): the config's path."""
    root = project.root.parent / name
    shutil.copytree(project.root, root)
    return root / project.config.name


def read_text_frames(project: Project) -> dict[str, pd.DataFrame]:
    """The project's four inputs as pandas frames of text, as written in the files."""
    def read(name: str) -> pd.DataFrame:
        return pd.read_csv(project.data / name, dtype=str, keep_default_na=False).astype(
            {c: "float64" for c in ("units", "p10", "p90", "units_sold")
             if c in pd.read_csv(project.data / name, nrows=0).columns})
    return {"forecast": read("forecast.csv"), "actuals": read("actuals.csv"),
            "history": read("earlier.csv"), "mapping": read("products.csv")}


def typed(frame: pd.DataFrame) -> pd.DataFrame:
    """Dates as timestamps (the Parquet-like path of the converters)."""
    return frame.astype({c: "datetime64[ns]" for c in ("week", "issued_on") if c in frame})


def comparable(report: RunReport) -> list[dict[str, Any]]:
    out = []
    for r in report.results:
        d = r.to_dict()
        d["details"] = {k: v for k, v in d["details"].items() if k != "path"}
        out.append(d)
    return sorted(out, key=lambda d: (d["check"], str(d["segment"]), str(d["lag"]),
                                      str(d["measure"])))


def assert_same(got: RunReport, want: RunReport) -> None:
    """Same checks, statuses, counts, examples, messages; values equal to 1e-9 relative."""
    a, b = comparable(got), comparable(want)
    assert [(d["check"], d["segment"], d["lag"], d["measure"]) for d in a] == \
        [(d["check"], d["segment"], d["lag"], d["measure"]) for d in b]
    for x, y in zip(a, b, strict=True):
        vx, vy = x.pop("value"), y.pop("value")
        assert (vx is None) == (vy is None), (x["check"], vx, vy)
        if vx is not None:
            assert math.isclose(vx, vy, rel_tol=1e-9, abs_tol=1e-12), (x["check"], vx, vy)
        assert x == y
    assert got.status == want.status and got.counts() == want.counts()
    assert got.cycle == want.cycle


@pytest.mark.parametrize("kind", ["pandas text", "pandas dates", "pyarrow"])
def test_frames_give_the_results_of_the_files(make_project: Callable[..., Project],
                                              kind: str) -> None:
    project = a_project(make_project)
    want = run_checks(load_config(copy_of(project, "files")))
    assert want.status == "fail"  # findings to compare: the plants' bias, the missing series
    assert {r.check for r in want.results if r.status == "fail"} >= {
        "accuracy", "coverage.missing_series"}

    frames = read_text_frames(project)
    if kind != "pandas text":
        frames = {k: typed(v) for k, v in frames.items()}
    if kind == "pyarrow":
        frames = {k: pa.Table.from_pandas(v, preserve_index=False)  # type: ignore[misc]
                  for k, v in frames.items()}
    config = load_config(copy_of(project, "frames"))
    got = run_checks(config, forecast=frames["forecast"], actuals=frames["actuals"],
                     history=[frames["history"]], mapping=frames["mapping"])
    assert_same(got, want)
    assert got.inputs["earlier"] == want.inputs["earlier"]
    assert got.inputs["forecast"]["rows"] == want.inputs["forecast"]["rows"] == 20
    assert got.inputs["forecast"]["frame"] == (
        "pyarrow.Table" if kind == "pyarrow" else "pandas.DataFrame")
    assert "path" not in got.inputs["forecast"]


def test_a_frame_replaces_only_its_own_input(make_project: Callable[..., Project]) -> None:
    project = a_project(make_project)
    want = run_checks(load_config(copy_of(project, "files")))
    frames = read_text_frames(project)
    got = run_checks(load_config(copy_of(project, "frames")), forecast=frames["forecast"])
    assert_same(got, want)
    assert got.inputs["actuals"]["path"] == want.inputs["actuals"]["path"].replace(
        "/files/", "/frames/")


def test_the_audit_store_records_the_frames_fingerprints(
        make_project: Callable[..., Project]) -> None:
    project = a_project(make_project)
    frames = read_text_frames(project)
    config = load_config(project.config)
    report = run_checks(config, forecast=frames["forecast"], history=frames["history"],
                        mapping=frames["mapping"])
    with open_store(f"sqlite:///{project.root / 'audit.db'}") as store:
        [run] = store.history()
    inputs = run["inputs"]
    assert run["run_id"] == report.run_id
    assert inputs["forecast"]["frame"] == "pandas.DataFrame" and "path" not in inputs["forecast"]
    assert inputs["forecast"]["rows"] == 20 and len(inputs["forecast"]["sha256"]) == 64
    assert [h["frame"] for h in inputs["history"]] == ["pandas.DataFrame"]
    assert inputs["mapping"]["rows"] == 3 and inputs["mapping"]["columns"] == [
        "product", "category"]
    assert inputs["actuals"]["path"].endswith("actuals.csv") and inputs["actuals"]["bytes"] > 0


def test_fingerprint_follows_the_content_not_the_object() -> None:
    frame = pd.DataFrame({"k": ["a", "b"], "v": [1.0, 2.0]})
    cols = ["k", "v"]
    same = frame_info(frame.copy(), cols, "pandas.DataFrame")["sha256"]
    assert frame_info(frame, cols, "pandas.DataFrame")["sha256"] == same
    changed = frame.assign(v=[1.0, 2.5])
    assert frame_info(changed, cols, "pandas.DataFrame")["sha256"] != same
    assert frame_info(frame.iloc[::-1], cols, "pandas.DataFrame")["sha256"] != same
    # a column the tool does not read does not count
    assert frame_info(frame.assign(note="x"), cols, "pandas.DataFrame")["sha256"] == same


# ------------------------------------------------------------------------ bad frames


def file_and_frame_errors(make_project: Callable[..., Project],
                          forecast: pd.DataFrame) -> tuple[str, str, Path]:
    """The message of the run on ``forecast`` written as the forecast file, and of the run on
    the same frame; and the file's path."""
    project = make_project(forecast=forecast)
    with pytest.raises(InputError) as from_file:
        run_checks(load_config(project.config))
    config = load_config(project.config)
    with pytest.raises(InputError) as from_frame:
        run_checks(config, forecast=forecast)
    return str(from_file.value), str(from_frame.value), project.data / "forecast.csv"


def as_frame_message(message: str, file: Path) -> str:
    """A file's message as the frame's: the frame's label, rows by position from 0."""
    text = message.replace(f"forecast file {file}", "forecast frame (argument `forecast`)")
    return re.sub(r"line (\d+)", lambda m: f"row {int(m.group(1)) - 2}", text)


@pytest.mark.parametrize("damage, column, key, rows", [
    (lambda f: f.drop(columns=["units"]), "'units'", "forecast.value", None),
    (lambda f: f.assign(units=f["units"].astype(object).where(f.index != 3, "12,5")),
     "'units'", "forecast.value", "row 3: '12,5'"),
    (lambda f: f.assign(week=f["week"].where(f.index != 5, "09/03/2026")),
     "'week'", "forecast.period", "row 5: '09/03/2026'"),
    (lambda f: f.assign(store=f["store"].where(f.index != 2, None)),
     "'store'", "forecast.keys", "row 2"),
])
def test_a_bad_frame_gets_the_error_of_a_bad_file(make_project: Callable[..., Project],
                                                  damage: Callable[[pd.DataFrame], pd.DataFrame],
                                                  column: str, key: str,
                                                  rows: str | None) -> None:
    bad = damage(forecast_frame(CURRENT))
    from_file, from_frame, path = file_and_frame_errors(make_project, bad)
    assert "forecast frame (argument `forecast`)" in from_frame
    assert column in from_frame and f"`{key}`" in from_frame
    if rows is not None:
        assert rows in from_frame
        # the same paragraph as the file's, but for the label and the row numbers
        assert from_frame == as_frame_message(from_file, path)
    assert str(path) not in from_frame


def test_keys_are_text_integers_match_their_decimal_text() -> None:
    """An integer key 7 is the series "7", never "007" (leading zeros exist in text only)."""
    config = _config()
    as_int = forecast_frame(CURRENT).assign(store=7)
    as_text = forecast_frame(CURRENT).assign(store="007")
    as_float = forecast_frame(CURRENT).assign(store=7.0)
    got = {name: forecast_from_frame(config, Given("forecast", frame))["store"]
           for name, frame in (("int", as_int), ("text", as_text), ("float", as_float))}
    assert list(got["int"].cat.categories) == ["7"] == list(got["float"].cat.categories)
    assert list(got["text"].cat.categories) == ["007"]
    with pytest.raises(InputError, match=r"forecast frame \(argument `forecast`\), key column "
                                         r"'store' .*not whole \(row 0: 7\.5"):
        forecast_from_frame(config, Given("forecast", forecast_frame(CURRENT).assign(
            store=7.5)))


def test_a_column_named_twice_is_refused() -> None:
    frame = forecast_frame(CURRENT)
    frame = pd.concat([frame, frame[["units"]]], axis=1)
    with pytest.raises(InputError, match=r"forecast frame \(argument `forecast`\) has 2 "
                                         r"columns named 'units' \(config key `forecast.value`"):
        forecast_from_frame(_config(), Given("forecast", frame))


def test_an_empty_frame_and_a_value_that_is_no_frame_are_refused() -> None:
    with pytest.raises(InputError, match=r"forecast frame \(argument `forecast`\) has no rows"):
        forecast_from_frame(_config(), Given("forecast", forecast_frame(CURRENT).iloc[:0]))
    with pytest.raises(InputError, match=r"argument `forecast` is a builtins.dict; give a "
                                         "pandas DataFrame or a pyarrow Table"):
        Given("forecast", {"store": ["S1"]})


def test_a_frame_and_a_path_for_one_input_is_a_usage_error(
        make_project: Callable[..., Project]) -> None:
    project = make_project()
    with pytest.raises(UsageError, match="Both a forecast frame"):
        run_checks(load_config(project.config), forecast=forecast_frame(CURRENT),
                   forecast_path=project.data / "forecast.csv")


def test_actuals_frame_keeps_the_recent_periods_and_the_older_series() -> None:
    """Reading only what is used: the actuals' older periods are cut, their series kept."""
    config = _config()
    weeks = pd.date_range("2025-06-02", periods=30, freq="W-MON")
    actuals = pd.DataFrame({"store": "S1", "product": [f"P{i % 40}" for i in range(30)],
                            "week": weeks, "units_sold": 1.0})
    frame, older = actuals_from_frame(config, Given("actuals", actuals), needed=4)
    assert list(frame[F.PERIOD]) == list(weeks[-4:])
    assert older is not None and len(older) == 30
    # an error in a kept row names its position in the whole frame
    bad = actuals.assign(units_sold=actuals["units_sold"].astype(object).where(
        actuals.index != 28, "x"))
    with pytest.raises(InputError, match=r"actuals frame \(argument `actuals`\), column "
                                         r"'units_sold'.*row 28: 'x'"):
        actuals_from_frame(config, Given("actuals", bad), needed=4)


def test_repeated_actuals_name_the_frame() -> None:
    actuals = pd.DataFrame({"store": ["S1", "S1"], "product": ["P1", "P1"],
                            "week": ["2026-01-05", "2026-01-05"], "units_sold": [1.0, 2.0]})
    with pytest.raises(InputError, match=r"The actuals frame \(argument `actuals`\) hold 2 "
                                         "rows that repeat"):
        actuals_from_frame(_config(), Given("actuals", actuals), needed=None)


def _config() -> Any:
    from accuracy_checks.measures.catalogue import parse_config

    return parse_config(
        "version: 1\n"
        "forecast: {path: f.csv, keys: [store, product], period: week, value: units,\n"
        "           issued: issued_on, quantiles: {0.1: p10, 0.9: p90}}\n"
        "actuals: {path: a.csv, period: week, value: units_sold}\n"
        "frequency: W-MON\nhorizon: 4\n")


def test_history_frame_is_cut_to_the_lags_and_span_before_conversion(
        make_project: Callable[..., Project]) -> None:
    """Reading only what is used: a history row whose target period lies outside the
    evaluation span (no actual yet) is never converted, so text in its number column changes
    nothing; damage in a used row is the file's error, naming the rows by their position in
    the whole frame (the unused one too, as a file's message would)."""
    project = a_project(make_project)
    frames = read_text_frames(project)
    history = frames["history"]
    unused = int(((history["week"] > history["issued_on"])
                  & (history["week"] == "2026-03-02")).to_numpy().argmax())
    used = int((history["week"] == history["issued_on"]).to_numpy()[::-1].argmax())
    used = len(history) - 1 - used
    damaged = history.astype({"units": object})
    damaged.loc[unused, "units"] = "x"
    want = run_checks(load_config(copy_of(project, "clean")), history=history)
    got = run_checks(load_config(copy_of(project, "damaged")), history=damaged)
    assert_same(got, want)
    damaged.loc[used, "units"] = "y"
    with pytest.raises(InputError, match=rf"history frame \(argument `history`\), column "
                                         rf"'units'.*\(row {unused}: 'x', row {used}: 'y'\)"):
        run_checks(load_config(copy_of(project, "used")), history=damaged)
