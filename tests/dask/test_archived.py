"""The archived earlier cycles read on the workers: the dask engine uses the snapshots the
pandas engine uses (the last recorded attempt of each cycle, pandas files and dask folders
mixed), reads their rows in pieces on the workers, never on the client, and gives the pandas
engine's results (warnings of unusable snapshots included)."""

from __future__ import annotations

from collections.abc import Callable
from pathlib import Path

import pandas as pd
import pyarrow.parquet as pq
import pytest

from accuracy_checks import load_config, run_checks
from accuracy_checks.config import Config
from accuracy_checks.results import RunReport
from accuracy_checks.store.archive import Archive
from tests.dask.support import compare
from tests.support.project import CONFIG, Project, forecast_frame

#: the cycles recorded before the checked one: (issue date, engine, bias), in run order
RECORDED = [("2026-02-09", "pandas", 0.5), ("2026-02-09", "dask", 0.9),
            ("2026-02-16", "dask", 1.3), ("2026-02-16", "pandas", 1.05),
            ("2026-02-23", "dask", 0.95)]


def _project(make_project: Callable[..., Project]) -> Project:
    """The small project with lags 1–3 over 3 periods; the history file holds only the
    cycle of 2026-02-02, so the later cycles come from the archive."""
    text = CONFIG.format(extra="").replace("lags: [1]", "lags: [1, 2, 3]").replace(
        "window: 2", "window: 3")
    return make_project(earlier=forecast_frame(pd.Timestamp("2026-02-02")), config_text=text)


def _record(project: Project, config: Config, cluster: str) -> None:
    for i, (day, engine, bias) in enumerate(RECORDED):
        path = project.write(f"f_{i}.csv", forecast_frame(pd.Timestamp(day), bias=bias))
        done = run_checks(config, forecast_path=path, engine=engine,
                          scheduler=cluster if engine == "dask" else None)
        assert done.snapshot


def _no_client_read(monkeypatch: pytest.MonkeyPatch) -> None:
    def refused(self: Archive, *args: object, **kwargs: object) -> pd.DataFrame:
        raise AssertionError("the dask engine read archived rows on the client")

    monkeypatch.setattr(Archive, "read", refused)


def _both(config: Config, cluster: str, monkeypatch: pytest.MonkeyPatch
          ) -> tuple[RunReport, RunReport]:
    expected = run_checks(config, engine="pandas", snapshot=False)
    with monkeypatch.context() as m:
        _no_client_read(m)
        got = run_checks(config, engine="dask", scheduler=cluster, snapshot=False)
    return expected, got


def test_mixed_snapshots_and_attempts_read_on_the_workers(
        make_project: Callable[..., Project], cluster: str,
        monkeypatch: pytest.MonkeyPatch) -> None:
    """Pandas files and dask folders, two attempts of a cycle each way: the dask engine
    measures the same last attempts as the pandas engine, with the same results, its rows
    read in pieces (a file of several row groups in several pieces) on the workers."""
    project = _project(make_project)
    config = load_config(project.config)
    _record(project, config, cluster)
    # the pandas engine's snapshot of 2026-02-16 rewritten with row groups of 5 rows, read
    # in pieces of at most 10 rows (the same table: the same results)
    snap = project.root / "archive" / "cycle=2026-02-16" / "attempt-0002.parquet"
    assert snap.is_file()
    pq.write_table(pq.read_table(snap), snap, row_group_size=5)
    monkeypatch.setattr("accuracy_checks.dask.archived.PIECE_ROWS", 10)
    expected, got = _both(config, cluster, monkeypatch)
    compare(expected, got)
    cycles = {(c["cycle"], c["attempt"], c["source"]) for c in got.evaluated_cycles}
    assert {("2026-02-09", 2, "archive"), ("2026-02-16", 2, "archive"),
            ("2026-02-23", 1, "archive"), ("2026-02-02", None, "history")} <= cycles
    count = [r for r in got.results if r.check == "coverage.series_count"]
    assert count and "2026-02-23 (attempt 1)" in str(count[0].details)


def test_unusable_snapshots_give_the_same_warnings(
        make_project: Callable[..., Project], cluster: str,
        monkeypatch: pytest.MonkeyPatch) -> None:
    """A recorded snapshot that is missing and one that is damaged: both engines leave those
    cycles out with the same ``archive.snapshot`` warnings, and skip the series count when the
    previous cycle is one of them."""
    project = _project(make_project)
    config = load_config(project.config)
    _record(project, config, cluster)
    archive = project.root / "archive"
    (archive / "cycle=2026-02-16" / "attempt-0002.parquet").write_bytes(b"not parquet")
    for part in (archive / "cycle=2026-02-23" / "attempt-0001.parquet").iterdir():
        part.unlink()
    (archive / "cycle=2026-02-23" / "attempt-0001.parquet").rmdir()
    expected = run_checks(config, engine="pandas", snapshot=False)
    got = run_checks(config, engine="dask", scheduler=cluster, snapshot=False)
    compare(expected, got)
    problems = sorted(r.details["problem"] for r in got.results if r.check == "archive.snapshot")
    assert problems == ["missing", "unreadable"]


def test_a_lacking_column_is_the_same_warning(make_project: Callable[..., Project],
                                              cluster: str, tmp_path: Path) -> None:
    """A snapshot without its forecast column: the same warning (read from its footer)."""
    project = _project(make_project)
    config = load_config(project.config)
    path = project.write("f.csv", forecast_frame(pd.Timestamp("2026-02-23")))
    done = run_checks(config, forecast_path=path)
    snap = Path(str(done.snapshot))
    table = pq.read_table(snap)
    pq.write_table(table.drop_columns(["forecast"]), snap)
    expected = run_checks(config, engine="pandas", snapshot=False)
    got = run_checks(config, engine="dask", scheduler=cluster, snapshot=False)
    compare(expected, got)
    assert [r.details["problem"] for r in got.results
            if r.check == "archive.snapshot"] == ["unreadable"]


def test_a_damaged_page_is_the_same_warning(make_project: Callable[..., Project],
                                            cluster: str) -> None:
    """A snapshot whose footer reads but whose period column's page does not: the workers
    fail to read it, and the cycle is left out with the pandas engine's warning."""
    project = _project(make_project)
    config = load_config(project.config)
    for day in ("2026-02-16", "2026-02-23"):
        path = project.write(f"f_{day}.csv", forecast_frame(pd.Timestamp(day)))
        run_checks(config, forecast_path=path)
    snap = project.root / "archive" / "cycle=2026-02-16" / "attempt-0001.parquet"
    meta = pq.ParquetFile(snap).metadata.row_group(0)
    names = [meta.column(i).path_in_schema for i in range(meta.num_columns)]
    offset = meta.column(names.index("period")).data_page_offset
    data = bytearray(snap.read_bytes())
    data[offset:offset + 16] = b"\xff" * 16
    snap.write_bytes(bytes(data))
    expected = run_checks(config, engine="pandas", snapshot=False)
    got = run_checks(config, engine="dask", scheduler=cluster, snapshot=False)
    compare(expected, got)
    assert [(r.details["cycle"], r.details["problem"]) for r in got.results
            if r.check == "archive.snapshot"] == [("2026-02-16", "unreadable")]
