"""Both engines on the same scenarios give the same results: the demo, the test project's
fixtures and hypothesis-generated frames, on a real multi-process local cluster (one per
module)."""

from __future__ import annotations

from collections.abc import Callable
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from accuracy_checks import load_config, run_checks
from accuracy_checks.demo.scenario import generate_scenario
from tests.dask.support import both, compare, refusals
from tests.support.project import CURRENT, Project, actuals_frame, forecast_frame


@pytest.fixture(scope="module")
def demo(tmp_path_factory: pytest.TempPathFactory) -> Path:
    out = tmp_path_factory.mktemp("demo") / "demo"
    generate_scenario(out)
    return out


def test_demo_final_cycle(demo: Path, cluster: str) -> None:
    config = demo / "accuracy-checks.yaml"
    forecast = sorted((demo / "data" / "forecasts").iterdir())[-1]
    compare(*both(config, cluster, forecast_path=forecast,
                  actuals_path=demo / "data" / "actuals.csv"))


def test_demo_as_written(demo: Path, cluster: str) -> None:
    compare(*both(demo / "accuracy-checks.yaml", cluster))


def test_clean_project(make_project: Callable[..., Project], cluster: str) -> None:
    compare(*both(make_project().config, cluster))


def test_problems_of_every_family(make_project: Callable[..., Project], cluster: str) -> None:
    """Missing and unexpected series, a horizon gap, duplicates, invalid and negative values,
    crossing quantiles, two issue dates, infinite and missing actuals, a threshold for an
    unknown segment."""
    forecast = forecast_frame(CURRENT)
    forecast = forecast[~((forecast["store"] == "S2") & (forecast["product"] == "P3"))]
    forecast = forecast.drop(index=forecast.index[2])  # a gap in S1/P1's horizon
    extra = forecast.iloc[[0, 1]].assign(store="S9")  # unknown series
    dup = forecast.iloc[[3]]
    bad = forecast.iloc[[4, 5, 6]].copy()
    bad["units"] = [np.nan, -3.0, np.inf]
    bad["p10"] = [1.0, 50.0, 2.0]
    bad["p90"] = [0.5, 10.0, 3.0]
    bad["issued_on"] = ["2026-02-23", "2026-03-02", "2026-02-16"]
    forecast = pd.concat([forecast, extra, dup, bad], ignore_index=True)
    actuals = actuals_frame(CURRENT)
    actuals.loc[3, "units_sold"] = np.inf
    actuals.loc[7, "units_sold"] = np.nan
    project = make_project(forecast=forecast, actuals=actuals,
                           extra="  segments:\n    tols:\n      wape: {warn: 1, fail: 2}\n")
    pandas_report, dask_report = both(project.config, cluster)
    assert pandas_report.status == "fail"
    compare(pandas_report, dask_report)


def test_overflow_is_judged_the_same_way(make_project: Callable[..., Project],
                                        cluster: str) -> None:
    """Sums beyond the float64 range: ``value: null``, reason ``overflow``, on both engines."""
    earlier = pd.concat([forecast_frame(pd.Timestamp(d)) for d in ("2026-02-16", "2026-02-23")],
                        ignore_index=True)
    hit = (earlier["store"] == "S1") & (earlier["product"] == "P1") & \
        (earlier["week"] == earlier["issued_on"])
    earlier.loc[hit, "units"] = 1.5e308
    pandas_report, dask_report = both(make_project(earlier=earlier).config, cluster)
    assert any(r.reason == "overflow" for r in pandas_report.results)
    compare(pandas_report, dask_report)


def test_archive_cycles_and_series_count(make_project: Callable[..., Project],
                                         cluster: str) -> None:
    """Earlier cycles from the archive (recorded by pandas runs), the previous cycle's series
    count."""
    project = make_project(earlier=forecast_frame(pd.Timestamp("2026-02-09")))
    config = load_config(project.config)
    for day in ("2026-02-16", "2026-02-23"):
        path = project.write(f"f_{day}.csv", forecast_frame(pd.Timestamp(day)))
        run_checks(config, forecast_path=path)
    compare(*both(project.config, cluster))


def test_snapshot_from_the_workers(make_project: Callable[..., Project], cluster: str) -> None:
    """The dask engine's snapshot is a partitioned dataset under the attempt's name, holding
    the forecast's rows; nothing is left in the staging folder."""
    project = make_project()
    config = load_config(project.config)
    report = run_checks(config, engine="dask", scheduler=cluster)
    assert report.attempt == 1 and report.snapshot
    folder = Path(report.snapshot)
    assert folder.is_dir() and folder.name == "attempt-0001.parquet"
    assert sorted(p.name for p in folder.iterdir())[0].startswith("part-")
    rows = pd.read_parquet(folder)
    expected = run_checks(config, engine="pandas", snapshot=False)
    assert len(rows) == expected.inputs["forecast"]["rows"]  # type: ignore[index]
    incoming = project.root / "archive" / ".incoming"
    assert not incoming.exists() or not any(incoming.iterdir())


# --------------------------------------------------------------------------- generated frames

_STORES = ["A", "B", "C", "D"]
_WEEKS = pd.date_range("2026-01-05", periods=12, freq="W-MON")


@st.composite
def messy_project(draw: st.DrawFn) -> tuple[pd.DataFrame, pd.DataFrame]:
    """A forecast and actuals of a few series with every kind of flaw, drawn."""
    series = draw(st.lists(st.tuples(st.sampled_from(_STORES), st.sampled_from(["P1", "P2",
                                                                                  "P3"])),
                           min_size=1, max_size=8, unique=True))
    value = st.one_of(st.floats(-5, 200, allow_nan=False), st.just(np.nan), st.just(np.inf))
    rows = []
    for store, product in series:
        n = draw(st.integers(2, 5))
        for w in _WEEKS[8:8 + n]:
            v = draw(value)
            rows.append({"store": store, "product": product, "week": w.date().isoformat(),
                         "units": v, "p10": draw(value), "p90": draw(value),
                         "issued_on": draw(st.sampled_from(["2026-03-02"] * 5 + ["2026-02-23"]))})
    forecast = pd.DataFrame(rows)
    forecast = pd.concat([forecast, forecast.iloc[:draw(st.integers(0, 2))]], ignore_index=True)
    actual_series = draw(st.lists(st.sampled_from([*series, ("Z", "P9")]), min_size=1,
                                  max_size=6, unique=True))
    arows = [{"store": s, "product": p, "week": w.date().isoformat(),
              "units_sold": draw(value)}
             for s, p in actual_series for w in _WEEKS[:8] if draw(st.booleans())]
    actuals = pd.DataFrame(arows, columns=["store", "product", "week", "units_sold"])
    if actuals.empty:
        actuals = pd.DataFrame([{"store": "Z", "product": "P9", "week": "2026-01-05",
                                 "units_sold": 1.0}])
    return forecast, actuals


@settings(max_examples=6, deadline=None,
          suppress_health_check=[HealthCheck.function_scoped_fixture, HealthCheck.too_slow])
@given(frames=messy_project())
def test_generated_frames(frames: tuple[pd.DataFrame, pd.DataFrame],
                          make_project: Callable[..., Project], cluster: str) -> None:
    forecast, actuals = frames
    project = make_project(forecast=forecast, actuals=actuals)
    compare(*both(project.config, cluster))


def test_parquet_inputs_with_older_actuals(make_project: Callable[..., Project],
                                           cluster: str) -> None:
    """Parquet inputs (timestamps): the actuals cut to the recent periods, a forecast series
    known only from older actuals rows, an unknown one; pieces by row group."""
    forecast = forecast_frame(CURRENT)
    # products outside the mapping: S9/P9 unknown everywhere, S7/P8 known from old actuals
    extra = forecast.iloc[:4].assign(store="S9", product="P9")
    old = forecast.iloc[4:8].assign(store="S7", product="P8")
    forecast = pd.concat([forecast, extra, old], ignore_index=True)
    actuals = actuals_frame(CURRENT)
    actuals = pd.concat([actuals, actuals.iloc[:2].assign(store="S7", product="P8")],
                        ignore_index=True)
    project = make_project(forecast=forecast, actuals=actuals)
    for name in ("forecast", "actuals", "earlier"):
        frame = pd.read_csv(project.data / f"{name}.csv", dtype={"store": str, "product": str})
        for col in ("week", "issued_on"):
            if col in frame.columns:
                frame[col] = pd.to_datetime(frame[col])
        frame.to_parquet(project.data / f"{name}.parquet", index=False, row_group_size=7)
    text = project.config.read_text(encoding="utf-8")
    for name in ("forecast", "actuals", "earlier"):
        text = text.replace(f"data/{name}.csv", f"data/{name}.parquet")
    project.config.write_text(text, encoding="utf-8")
    pandas_report, dask_report = both(project.config, cluster)
    unexpected = next(r for r in pandas_report.results
                  if r.check == "coverage.unexpected_series" and r.segment == "*")
    assert unexpected.value == 1 and unexpected.examples[0]["store"] == "S9"
    compare(pandas_report, dask_report)


def test_frames_in_memory_are_read_on_the_client(make_project: Callable[..., Project],
                                                 cluster: str) -> None:
    """Frames given to run_checks (not local files): read by the pandas readers on the client,
    then sharded; the same results."""
    project = make_project()
    frames = {"forecast": pd.read_csv(project.data / "forecast.csv"),
              "actuals": pd.read_csv(project.data / "actuals.csv")}
    compare(*both(project.config, cluster, **frames))


def test_demo_with_every_measure(demo: Path, cluster: str, tmp_path: Path) -> None:
    """Every registered measure (``evaluation.measures: [all]``): sMAPE, MASE, tracking
    signals, FVA, intervals, pinball, interval scores, with worst offenders."""
    text = (demo / "accuracy-checks.yaml").read_text(encoding="utf-8")
    text = text.replace("  min_obs: 20\n", "  min_obs: 20\n  measures: [all]\n")
    assert "measures: [all]" in text
    text = text.replace(".accuracy_checks/", f"{tmp_path}/state/")
    config = demo / "accuracy-checks-all.yaml"
    config.write_text(text, encoding="utf-8")
    forecast = sorted((demo / "data" / "forecasts").iterdir())[-1]
    compare(*both(config, cluster, forecast_path=forecast,
                  actuals_path=demo / "data" / "actuals.csv"))


def test_an_unusable_input_is_the_same_exit_2_message(make_project: Callable[..., Project],
                                                      cluster: str) -> None:
    """A date that does not parse, read on a worker: the same InputError as the pandas
    engine's, raised on the client (exit 2)."""
    forecast = forecast_frame(CURRENT)
    forecast.loc[5, "week"] = "2026-13-40"
    messages = refusals(make_project(forecast=forecast).config, cluster)
    assert messages[0] == messages[1] and "line 7" in messages[0]
