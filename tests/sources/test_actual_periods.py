"""The periods that hold an actual, from a Parquet file's row-group statistics
(:func:`accuracy_checks.sources.prereads.actual_periods`): the same periods as reading the
period and value columns of every row, whatever the layout."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pandas as pd
import pyarrow as pa
import pyarrow.compute as pc
import pyarrow.parquet as pq
import pytest

from accuracy_checks.sources.prereads import actual_periods
from tests.support.sources import config

WEEKS = pd.date_range("2026-01-05", periods=6, freq="W-MON")


def actuals(by_week: bool) -> pa.Table:
    """3 products × 6 weeks; week 2 has no value at all, week 4 one value of three."""
    rows = [(p, w, None if i == 2 or (i == 4 and p != "P2") else float(i))
            for p in ("P1", "P2", "P3") for i, w in enumerate(WEEKS)]
    frame = pd.DataFrame(rows, columns=["product", "week", "units_sold"]).assign(store="S1")
    if by_week:
        frame = frame.sort_values(["week", "product"], kind="stable")
    table = pa.Table.from_pandas(frame, preserve_index=False)
    return table.set_column(table.schema.get_field_index("week"), "week",
                            table["week"].cast(pa.timestamp("us")))


def brute_force(path: Path) -> list[pd.Timestamp]:
    table = pq.read_table(path)
    present = pc.unique(pc.filter(table["week"], pc.is_valid(table["units_sold"])))
    return sorted(pd.Timestamp(v) for v in present.to_pylist())


@pytest.mark.parametrize(("by_week", "row_group_size"), [
    (True, 3),  # one week per row group: statistics only
    (True, 4),  # row groups straddling two weeks: those read
    (False, 5),  # by product: every row group read
])
def test_actual_periods_from_statistics_equal_the_full_read(
        tmp_path: Path, by_week: bool, row_group_size: int) -> None:
    path = tmp_path / "a.parquet"
    pq.write_table(actuals(by_week), path, row_group_size=row_group_size)
    periods = actual_periods(config(tmp_path, actuals="a.parquet"))
    assert periods is not None and list(periods) == brute_force(path)
    assert WEEKS[2] not in periods and WEEKS[4] in periods
    assert periods.dtype == "datetime64[ns]"


def test_one_week_per_row_group_reads_no_row(tmp_path: Path,
                                             monkeypatch: pytest.MonkeyPatch) -> None:
    path = tmp_path / "a.parquet"
    pq.write_table(actuals(by_week=True), path, row_group_size=3)
    want = brute_force(path)

    def no_rows(*args: object, **kwargs: object) -> None:
        raise AssertionError("rows read although the statistics tell the periods")

    monkeypatch.setattr(pq.ParquetFile, "read_row_groups", no_rows)
    monkeypatch.setattr(pq, "read_table", no_rows)
    periods = actual_periods(config(tmp_path, actuals="a.parquet"))
    assert periods is not None and list(periods) == want


def test_a_missing_period_in_a_row_group_is_read_not_trusted(tmp_path: Path) -> None:
    table = actuals(by_week=True)
    week = table["week"].to_numpy(zero_copy_only=False).astype("datetime64[us]")
    mask = np.zeros(len(week), dtype=bool)
    mask[-1] = True  # a row of the last week without its week, but with a value
    table = table.set_column(table.schema.get_field_index("week"), "week",
                             pa.array(week, mask=mask))
    path = tmp_path / "a.parquet"
    pq.write_table(table, path, row_group_size=3)
    whole = pq.read_table(path)
    present = pc.unique(pc.filter(whole["week"], pc.is_valid(whole["units_sold"]))).to_pandas()
    want = pd.DatetimeIndex(present.unique()).sort_values().as_unit("ns")  # NaT kept, as read
    periods = actual_periods(config(tmp_path, actuals="a.parquet"))
    assert periods is not None and periods.equals(want) and periods.hasnans
