"""Loading every input of a run (:func:`accuracy_checks.sources.load.load_inputs`): shared
categories, segments, the earlier cycles of the history files, the Parquet shortcuts (rows cut
while reading) that must give the same numbers as reading everything.

Figures are compared with the CSV path, which reads every row; counts are recomputed from the
files of the small project (tests/support/project.py) with pandas.
"""

from __future__ import annotations

from collections.abc import Callable

import pandas as pd

from accuracy_checks import load_config, run_checks
from accuracy_checks.results import CheckResult, RunReport
from accuracy_checks.sources import frames as F
from accuracy_checks.sources.load import Inputs, load_inputs
from tests.support.project import CURRENT, EARLIER, Project, actuals_frame, forecast_frame


def find(report: RunReport, check: str, segment: str = "*") -> CheckResult:
    hits = [r for r in report.results if r.check == check and r.segment == segment]
    assert len(hits) == 1, (check, segment, [r.check for r in report.results])
    return hits[0]


def test_every_frame_shares_the_key_categories_and_has_its_segment(
        make_project: Callable[..., Project]) -> None:
    project = make_project()
    inputs = load_inputs(load_config(project.config))
    assert isinstance(inputs, Inputs)
    frames = [inputs.forecast, inputs.actuals, inputs.earlier]
    for key in ("store", "product"):
        first = frames[0][key].cat.categories
        assert all(f[key].cat.categories.equals(first) for f in frames)
    mapping = pd.read_csv(project.data / "products.csv")
    want = dict(zip(mapping["product"], mapping["category"], strict=True))
    for frame in frames:
        assert (frame["segment"].astype(str) == frame["product"].astype(str).map(want)).all()
    assert inputs.issued == CURRENT and inputs.notes == [] and inputs.previous is None


def test_the_earlier_cycles_without_an_archive_are_the_history_files_cut_to_the_window(
        make_project: Callable[..., Project]) -> None:
    project = make_project()
    inputs = load_inputs(load_config(project.config))  # no archive reader: history only
    earlier = pd.read_csv(project.data / "earlier.csv")
    # lag 1 (the cycle's first week) in the 2 most recent weeks with actuals
    lag1 = earlier[earlier["week"] == earlier["issued_on"]]
    assert len(inputs.earlier) == len(lag1) == 12
    assert set(inputs.earlier[F.SOURCE]) == {"history"}
    assert inputs.earlier[F.ATTEMPT].isna().all()
    assert inputs.info == {
        "forecast": {"path": str(project.data / "forecast.csv"),
                     "rows": len(pd.read_csv(project.data / "forecast.csv")), "series": 6},
        "actuals": {"path": str(project.data / "actuals.csv"),
                    "rows": len(pd.read_csv(project.data / "actuals.csv"))},
        "earlier": {"rows": 12, "history_rows": 12, "archive_rows": 0},
    }


def test_a_row_repeated_across_history_files_is_kept_once_the_last(
        make_project: Callable[..., Project]) -> None:
    project = make_project()
    second = forecast_frame(EARLIER[1]).assign(units=1.0)
    project.write("earlier2.csv", second)
    text = project.config.read_text().replace(
        "history: data/earlier.csv\n", "history: [data/earlier.csv, data/earlier2.csv]\n")
    project.config.write_text(text)
    said: list[str] = []
    inputs = load_inputs(load_config(project.config), progress=said.append)
    assert len(inputs.earlier) == 12
    latest = inputs.earlier[inputs.earlier[F.ISSUED] == EARLIER[1]]
    assert (latest[F.FORECAST] == 1.0).all()  # the later file's rows
    assert any("6 repeated rows dropped" in line for line in said)


def test_parquet_history_filtered_at_read_gives_the_same_numbers(
        make_project: Callable[..., Project]) -> None:
    """Earlier forecasts in Parquet are cut to the evaluation span while reading (the cycle's
    first period read separately): every figure must equal the whole-file CSV path."""
    earlier = pd.concat([forecast_frame(d, bias=b) for d, b in zip(EARLIER, (0.9, 1.2),
                                                                      strict=True)])
    project = make_project(earlier=earlier)
    config = load_config(project.config)
    by_csv = run_checks(config, snapshot=False)
    as_parquet = earlier.assign(week=pd.to_datetime(earlier["week"]),
                                issued_on=pd.to_datetime(earlier["issued_on"]))
    as_parquet.to_parquet(project.data / "earlier.parquet", index=False)
    project.config.write_text(project.config.read_text().replace("earlier.csv", "earlier.parquet"))
    by_parquet = run_checks(load_config(project.config), snapshot=False)

    def figures(report: RunReport) -> dict[tuple[object, ...], object]:
        return {(r.check, r.segment, r.lag, r.measure): (r.value, r.n_obs, r.status)
                for r in report.results if r.check == "accuracy"}

    assert figures(by_parquet) == figures(by_csv)
    assert by_parquet.inputs["earlier"]["rows"] == 12  # lag 1 in the 2-week window only


def test_parquet_actuals_read_recent_periods_only_same_verdict(
        make_project: Callable[..., Project]) -> None:
    """Parquet actuals are read for the recent periods the checks use; a series known only
    from older actuals is still known (not 'unexpected'), and every figure equals the CSV
    path, which reads everything."""
    actuals = actuals_frame(CURRENT)
    # an old series: actuals long ago only, forecast again now
    old = actuals[(actuals["store"] == "S1") & (actuals["product"] == "P1")].head(2)
    actuals = pd.concat([actuals, old.assign(store="S9")], ignore_index=True)
    forecast = forecast_frame(CURRENT)
    forecast = pd.concat([forecast, forecast.head(4).assign(store="S9")], ignore_index=True)
    project = make_project(actuals=actuals, forecast=forecast)
    by_csv = run_checks(load_config(project.config), snapshot=False)
    actuals.assign(week=pd.to_datetime(actuals["week"])).to_parquet(
        project.data / "actuals.parquet", index=False)
    project.config.write_text(project.config.read_text().replace("actuals.csv", "actuals.parquet"))
    progress: list[str] = []
    by_parquet = run_checks(load_config(project.config), snapshot=False, progress=progress.append)
    assert any("of the last 4 periods" in line for line in progress)
    assert by_parquet.inputs["actuals"]["rows"] == 6 * 4  # not the 8 weeks + 2 old rows
    unexpected = find(by_parquet, "coverage.unexpected_series")
    assert unexpected.value == 0, unexpected.message

    def figures(report: RunReport) -> dict[tuple[object, ...], object]:
        return {(r.check, r.segment, r.lag, r.measure): (r.value, r.n_obs, r.status)
                for r in report.results}

    assert figures(by_parquet) == figures(by_csv)
