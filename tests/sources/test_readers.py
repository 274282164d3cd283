"""The forecast and actuals readers (:mod:`accuracy_checks.sources.readers`): canonical column
names, actuals key columns named as the forecast's, the periods asked for, one actual per series
and period."""

from __future__ import annotations

from pathlib import Path

import pandas as pd

from accuracy_checks import sources
from accuracy_checks.sources.readers import forecast_columns
from tests.support.sources import config, forecast_text, read_error


def test_the_forecast_comes_back_with_canonical_names_and_quantiles(tmp_path: Path) -> None:
    text = forecast_text(["P1", "P2"]).replace("issued_on\n", "issued_on,p10\n")
    (tmp_path / "f.csv").write_text(text.replace("2026-03-02\n", "2026-03-02,8\n"))
    cfg = config(tmp_path, forecast_more={"quantiles": "{0.1: p10}"})
    assert [c.canonical for c in forecast_columns(cfg)] == [
        None, None, "period", "issued", "forecast", "q0.1"]
    frame = sources.read_forecast(cfg)
    assert list(frame.columns) == ["store", "product", "period", "issued", "forecast", "q0.1"]
    assert frame["q0.1"].tolist() == [8.0, 8.0]
    assert isinstance(frame["product"].dtype, pd.CategoricalDtype)


def test_actuals_keys_of_other_names_are_renamed_to_the_forecast_keys(tmp_path: Path) -> None:
    (tmp_path / "a.csv").write_text("shop,item,week,units_sold\nS1,P1,2026-02-23,3\n")
    cfg = config(tmp_path, actuals_more={"keys": "[shop, item]"})
    actuals = sources.read_actuals(cfg)
    assert list(actuals.columns) == ["store", "product", "period", "actual"]
    assert actuals[["store", "product"]].to_numpy().tolist() == [["S1", "P1"]]


def test_actuals_of_the_periods_asked_only(tmp_path: Path) -> None:
    (tmp_path / "a.csv").write_text("store,product,week,units_sold\n"
                                    "S1,P1,2026-02-16,1\nS1,P1,2026-02-23,2\n")
    actuals = sources.read_actuals(config(tmp_path), periods=[pd.Timestamp("2026-02-23")])
    assert actuals["actual"].tolist() == [2.0] and actuals.index.tolist() == [0]


def test_two_actuals_of_one_series_and_period_are_refused(tmp_path: Path) -> None:
    (tmp_path / "a.csv").write_text("store,product,week,units_sold\n"
                                    "S1,P1,2026-02-23,1\nS1,P1,2026-02-23,2\nS1,P2,2026-02-23,2\n")
    msg = read_error(sources.read_actuals, config(tmp_path))
    assert "hold 2 rows that repeat a series and period" in msg
    assert "store=S1, product=P1, 2026-02-23" in msg and "aggregate them first" in msg
