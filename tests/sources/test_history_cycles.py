"""The cycles of a Parquet history file from its row groups' statistics
(:func:`accuracy_checks.sources.prereads.cycle_starts`) and the read of only the (issue date,
period) pairs the evaluation uses (:func:`accuracy_checks.evaluation.join.cycle_targets`,
``read_forecast(cycles=…)``): the same starts and the same pruned rows as reading every row."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pandas as pd
import pyarrow as pa
import pyarrow.parquet as pq
import pytest

from accuracy_checks import sources
from accuracy_checks.evaluation.join import cycle_targets, prune_earlier
from accuracy_checks.sources import frames as F
from accuracy_checks.sources.prereads import cycle_starts
from tests.support.sources import config

ISSUES = pd.date_range("2026-01-05", periods=5, freq="W-MON")


def history(shuffle: bool = False, late_start: bool = False) -> pa.Table:
    """5 weekly cycles × 3 products × 4 weeks; ``late_start``: the first cycle's first week
    is missing for every product (its first period is then a week after its issue date)."""
    rows = []
    for c, issued in enumerate(ISSUES):
        for p in ("P1", "P2", "P3"):
            for h in range(4):
                if late_start and c == 0 and h == 0:
                    continue
                rows.append(("S1", p, issued + pd.Timedelta(weeks=h), 10.0 * c + h, issued))
    frame = pd.DataFrame(rows, columns=["store", "product", "week", "units", "issued_on"])
    if shuffle:
        frame = frame.sample(frac=1.0, random_state=1)
    table = pa.Table.from_pandas(frame, preserve_index=False)
    return table.cast(pa.schema([f.with_type(pa.timestamp("us")) if f.name in ("week", "issued_on")
                                 else f for f in table.schema]))


def brute_force(path: Path) -> dict[pd.Timestamp, pd.Timestamp]:
    frame = pq.read_table(path).to_pandas()
    return {pd.Timestamp(k): pd.Timestamp(v)
            for k, v in frame.groupby("issued_on")["week"].min().items()}


@pytest.mark.parametrize(("row_group_size", "shuffle", "late_start"), [
    (12, False, False),  # one cycle per row group: statistics only
    (5, False, True),  # row groups straddling two cycles: those read
    (7, True, False),  # not sorted by issue date: every row group read
])
def test_cycle_starts_from_statistics_equal_the_full_read(
        tmp_path: Path, row_group_size: int, shuffle: bool, late_start: bool) -> None:
    path = tmp_path / "h.parquet"
    pq.write_table(history(shuffle, late_start), path, row_group_size=row_group_size)
    starts = cycle_starts(path, config(tmp_path))
    assert starts is not None and starts.to_dict() == brute_force(path)
    assert starts.dtype == "datetime64[ns]" and starts.index.dtype == "datetime64[ns]"
    assert (starts.name, starts.index.name) == (F.PERIOD, F.ISSUED)


def test_a_file_of_one_cycle_per_row_group_is_not_read(
        tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    path = tmp_path / "h.parquet"
    pq.write_table(history(late_start=True), path, row_group_size=3)
    want = brute_force(path)

    def no_rows(*args: object, **kwargs: object) -> None:
        raise AssertionError("rows read although the statistics tell the cycles")

    monkeypatch.setattr(pq.ParquetFile, "read_row_groups", no_rows)
    monkeypatch.setattr(pq, "read_table", no_rows)
    starts = cycle_starts(path, config(tmp_path))
    assert starts is not None and starts.to_dict() == want
    assert starts[ISSUES[0]] == ISSUES[0] + pd.Timedelta(weeks=1)


def test_missing_issue_dates_in_a_row_group_are_read_not_trusted(tmp_path: Path) -> None:
    table = history()
    issued = table["issued_on"].to_numpy(zero_copy_only=False).astype("datetime64[us]")
    mask = np.zeros(len(issued), dtype=bool)
    mask[0] = True  # the first row of the first cycle (its first week) has no issue date
    table = table.set_column(4, "issued_on", pa.array(issued, mask=mask))
    path = tmp_path / "h.parquet"
    pq.write_table(table, path, row_group_size=12)
    starts = cycle_starts(path, config(tmp_path))
    assert starts is not None and starts.to_dict() == brute_force(path)


@pytest.mark.parametrize("lags", [[1], [2, 4], [3]])
def test_reading_the_cycle_pairs_gives_the_pruned_rows_of_a_full_read(
        tmp_path: Path, lags: list[int]) -> None:
    path = tmp_path / "h.parquet"
    pq.write_table(history(late_start=True), path, row_group_size=12)
    cfg = config(tmp_path)
    span = list(pd.date_range("2026-01-26", periods=3, freq="W-MON"))
    starts = cycle_starts(path, cfg)
    assert starts is not None
    pairs = cycle_targets(starts, periods=span, lags=lags, frequency="W-MON")
    cut = sources.read_forecast(cfg, path, role="history", key="history", periods=span,
                                cycles=pairs)
    whole = sources.read_forecast(cfg, path, role="history", key="history")
    keys = ["store", "product", F.PERIOD, F.ISSUED]

    def pruned(frame: pd.DataFrame) -> pd.DataFrame:
        out = prune_earlier(frame, periods=span, lags=lags, frequency="W-MON", starts=starts)
        out = out.astype({"store": str, "product": str})
        return out.sort_values(keys).reset_index(drop=True)

    assert len(cut) == len(pruned(whole)) > 0
    pd.testing.assert_frame_equal(pruned(cut), pruned(whole))
    assert set(zip(cut[F.ISSUED], cut[F.PERIOD], strict=True)) <= {
        (i, p) for i, ps in pairs.items() for p in ps}
