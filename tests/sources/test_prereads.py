"""Parquet pre-reads (:mod:`accuracy_checks.sources.prereads`): the cycles' first periods, the
periods that hold actuals, the series the actuals know; they give up (``None``) on anything the
full read must name."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pandas as pd
import pyarrow as pa
import pyarrow.parquet as pq

from accuracy_checks import sources
from accuracy_checks.sources.prereads import actual_periods, actual_series, cycle_starts
from tests.support.sources import config, read_error

WEEKS = [pd.Timestamp(d) for d in ("2026-02-16", "2026-02-23", "2026-03-02")]


def write_actuals(path: Path) -> None:
    pq.write_table(pa.table({
        "store": ["S1", "S1", "S1", "S2", "S2"],
        "product": pa.array([7, 7, 7, 8, 8], pa.int64()),
        "week": pa.array([WEEKS[0], WEEKS[1], WEEKS[2], WEEKS[0], WEEKS[2]]),
        "units_sold": [1.0, 2.0, None, 4.0, None]}), path)


def test_actual_periods_are_the_sorted_periods_with_an_actual(tmp_path: Path) -> None:
    write_actuals(tmp_path / "a.parquet")
    periods = actual_periods(config(tmp_path, actuals="a.parquet"))
    assert periods is not None and list(periods) == WEEKS[:2]  # 2026-03-02 holds no value
    assert periods.dtype == "datetime64[ns]"


def test_actual_series_are_the_distinct_keys_as_text(tmp_path: Path) -> None:
    write_actuals(tmp_path / "a.parquet")
    series = actual_series(config(tmp_path, actuals="a.parquet"))
    assert sorted(map(tuple, series[["store", "product"]].to_numpy().tolist())) == [
        ("S1", "7"), ("S2", "8")]  # integers as their decimal text, as the full read


def test_cycle_starts_are_the_first_period_of_each_cycle(tmp_path: Path) -> None:
    issued = [WEEKS[0], WEEKS[0], WEEKS[1], WEEKS[1]]
    week = [WEEKS[1], WEEKS[0], WEEKS[2], WEEKS[1]]
    pq.write_table(pa.table({"store": ["S1"] * 4, "product": ["P1"] * 4, "week": week,
                             "units": [1.0] * 4, "issued_on": issued}), tmp_path / "h.parquet")
    starts = cycle_starts(tmp_path / "h.parquet", config(tmp_path))
    assert starts is not None
    assert starts.to_dict() == {WEEKS[0]: WEEKS[0], WEEKS[1]: WEEKS[1]}


def test_csv_inputs_are_not_pre_read(tmp_path: Path) -> None:
    (tmp_path / "a.csv").write_text("store,product,week,units_sold\nS1,P1,2026-02-23,1\n")
    (tmp_path / "h.csv").write_text("store,product,week,units,issued_on\n")
    cfg = config(tmp_path)
    assert actual_periods(cfg) is None
    assert cycle_starts(tmp_path / "h.csv", cfg) is None


def test_parquet_shortcuts_leave_repeated_or_out_of_calendar_columns_to_the_full_read(
        tmp_path: Path) -> None:
    # the period/cycle pre-reads of Parquet files must not crash: they give up (None) and the
    # full read names the problem
    week = pa.array([np.datetime64("2026-03-02", "us"), np.datetime64("3000-01-01", "us")])
    late = pa.table({"store": ["S1", "S1"], "product": ["P1", "P1"], "week": week,
                     "units_sold": [1.0, 2.0]})
    pq.write_table(late, tmp_path / "a.parquet")
    cfg = config(tmp_path, actuals="a.parquet")
    assert actual_periods(cfg) is None
    assert "3000-01-01" in read_error(sources.read_actuals, cfg)
    twice = late.append_column("week", late["week"])
    pq.write_table(twice, tmp_path / "a.parquet")
    assert actual_periods(cfg) is None
    history = pa.table({"store": ["S1", "S1"], "product": ["P1", "P1"], "week": week,
                        "units": [1.0, 2.0], "issued_on": week})
    pq.write_table(history, tmp_path / "h.parquet")
    assert cycle_starts(tmp_path / "h.parquet", cfg) is None
    pq.write_table(history.append_column("issued_on", history["week"]), tmp_path / "h.parquet")
    assert cycle_starts(tmp_path / "h.parquet", cfg) is None
