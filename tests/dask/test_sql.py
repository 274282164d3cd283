"""Tables read in partitions on the workers (:mod:`accuracy_checks.dask.sql_parts`): SQLite,
DuckDB and PostgreSQL tables give the pandas engine's results, refusals and examples, in runs
of tables only and mixed with Parquet files, and the client never reads a table's rows."""

from __future__ import annotations

import sqlite3
from collections.abc import Callable, Iterator
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd
import pytest
import sqlalchemy as sa

from accuracy_checks import load_config, run_checks
from accuracy_checks.dask import sql_parts, sql_run
from accuracy_checks.errors import InputError
from accuracy_checks.sources import sql
from tests.dask.support import compare
from tests.support.project import CURRENT, EARLIER, Project, actuals_frame, forecast_frame
from tests.support.store import pg_url_fixture  # noqa: F401  (fixture)

TABLES = {"forecast": "forecast.csv", "earlier": "earlier.csv", "actuals": "actuals.csv"}
NUMBERS = ("units", "p10", "p90", "units_sold")
DATES = ("week", "issued_on")


def _frames(project: Project) -> dict[str, pd.DataFrame]:
    out = {}
    for table, name in TABLES.items():
        frame = pd.read_csv(project.data / name, dtype=str, keep_default_na=False)
        out[table] = frame.assign(**{c: pd.to_numeric(frame[c].mask(frame[c] == ""))
                                     for c in NUMBERS if c in frame.columns})
    return out


def load_tables(project: Project, kind: str, pg_url: str | None = None) -> str:
    """The project's forecast, earlier cycles and actuals as tables (SQLite: dates as text;
    DuckDB and PostgreSQL: DATE columns); the URL."""
    frames = _frames(project)
    if kind == "duckdb":
        import duckdb

        file = project.data / "warehouse.duckdb"
        con = duckdb.connect(str(file))
        for table, frame in frames.items():
            typed = frame.astype(  # noqa: F841  (read by DuckDB by its name)
                {c: "datetime64[ns]" for c in DATES if c in frame.columns})
            con.execute(f"CREATE TABLE {table} AS SELECT * REPLACE ("
                        + ", ".join(f"CAST({c} AS DATE) AS {c}" for c in DATES
                                    if c in frame.columns) + ") FROM typed")
        con.close()
        return f"duckdb:///{file}"
    if kind == "sqlite":
        file = project.data / "warehouse.db"
        with sqlite3.connect(file) as con:
            for table, frame in frames.items():
                frame.to_sql(table, con, index=False)
        return f"sqlite:///{file}"
    assert pg_url is not None
    engine = sa.create_engine(pg_url, poolclass=sa.pool.NullPool)
    with engine.begin() as conn:
        for table, frame in frames.items():
            frame.astype({c: "datetime64[ns]" for c in DATES if c in frame.columns}).to_sql(
                table, conn, index=False,
                dtype={c: sa.Date() for c in DATES if c in frame.columns})
    engine.dispose()
    return pg_url


def point_at(project: Project, url: str, inputs: tuple[str, ...] = ("forecast", "actuals",
                                                                     "earlier")) -> None:
    """The project's config reading ``inputs`` from tables of ``url``."""
    text = project.config.read_text()
    place = "sql: {{url: '{url}', table: {table}}}"
    lines = {"forecast": "path: data/forecast.csv", "actuals": "path: data/actuals.csv"}
    for name in inputs:
        if name == "earlier":
            text = text.replace("history: data/earlier.csv", "history: {" + place.format(
                url=url, table="earlier") + "}")
        else:
            text = text.replace(lines[name], place.format(url=url, table=name))
    project.config.write_text(text)


@pytest.fixture
def counted(monkeypatch: pytest.MonkeyPatch) -> Iterator[list[int]]:
    """Small partitions (a few dates each), their count per table planned; a table's rows read
    on the client (the pandas reader) fail the test."""
    monkeypatch.setattr(sql_parts, "PART_ROWS", 20)
    planned: list[int] = []
    plan = sql_run.plan_parts

    def spy(*args: Any, **kwargs: Any) -> Any:
        found = plan(*args, **kwargs)
        planned.append(len(found[0]))
        return found

    monkeypatch.setattr(sql_run, "plan_parts", spy)
    yield planned


def _dask(config: Path, cluster: str, monkeypatch: pytest.MonkeyPatch) -> Any:
    """The dask engine's report; the client may not read a table's rows."""
    def refuse(*_: Any, **__: Any) -> Any:
        raise AssertionError("a table's rows were read on the client")

    with monkeypatch.context() as patch:
        patch.setattr(sql, "read_sql_columns", refuse)
        return run_checks(load_config(config), engine="dask", scheduler=cluster,
                          snapshot=False)


def _pandas(config: Path) -> Any:
    return run_checks(load_config(config), engine="pandas", snapshot=False)


def _breached() -> dict[str, pd.DataFrame]:
    """Earlier cycles biased, a series missing, repeated forecast rows, invalid and negative
    values: failed results with examples; the forecast's rows written latest week first and
    the earlier cycles' shuffled, so the reading order (the tables' row ids) is not the
    partitions' (by date)."""
    forecast = forecast_frame(CURRENT).iloc[4:]
    forecast = pd.concat([forecast, forecast.iloc[[5, 1, 12]]], ignore_index=True)
    forecast.loc[[7, 2, 15, 16, 8, 1], "units"] = [np.nan, -1.0, np.nan, np.nan, -2.0, np.nan]
    earlier = pd.concat([forecast_frame(d, bias=0.85) for d in EARLIER], ignore_index=True)
    return {"earlier": earlier.sample(frac=1.0, random_state=5),
            "forecast": forecast.sort_values("week", ascending=False, kind="stable")}


@pytest.mark.parametrize("kind", ["sqlite", "duckdb"])
def test_tables_give_the_pandas_results_read_in_partitions_on_the_workers(
        kind: str, make_project: Callable[..., Project], cluster: str,
        counted: list[int], monkeypatch: pytest.MonkeyPatch) -> None:
    project = make_project(**_breached())
    point_at(project, load_tables(project, kind))
    expected = _pandas(project.config)
    got = _dask(project.config, cluster, monkeypatch)
    compare(expected, got)
    assert expected.status == "fail"
    assert counted and max(counted) > 1  # tables read in several partitions


@pytest.mark.parametrize("driver", ["adbc", "sqlalchemy"])
def test_postgresql_tables_give_the_pandas_results(
        driver: str, make_project: Callable[..., Project], cluster: str, counted: list[int],
        pg_url: str, monkeypatch: pytest.MonkeyPatch) -> None:
    import distributed

    def _without_adbc(on: bool) -> None:
        """PostgreSQL read through SQLAlchemy (as without ADBC) in this process, or through
        ADBC again (a nested function: pickled by value for ``Client.run`` on the workers)."""
        from accuracy_checks.sources import sql as module

        original = module.__dict__.setdefault("_adbc_original", module._adbc)
        module._adbc = (lambda: None) if on else original  # type: ignore[assignment]

    project = make_project(**_breached())
    point_at(project, load_tables(project, "postgresql", pg_url))
    with distributed.Client(cluster) as client:
        client.run(_without_adbc, driver == "sqlalchemy")
        _without_adbc(driver == "sqlalchemy")
        try:
            expected = _pandas(project.config)
            got = _dask(project.config, cluster, monkeypatch)
        finally:
            client.run(_without_adbc, False)
            _without_adbc(False)
    compare(expected, got)
    assert counted and max(counted) > 1
    password = sa.engine.make_url(pg_url).password
    assert password and password not in str(got.to_dict())


def test_parquet_forecast_and_table_actuals(make_project: Callable[..., Project],
                                            cluster: str, counted: list[int],
                                            monkeypatch: pytest.MonkeyPatch) -> None:
    project = make_project(**_breached())
    url = load_tables(project, "sqlite")
    frame = _frames(project)["forecast"]
    frame.to_parquet(project.data / "forecast.parquet", row_group_size=5)
    point_at(project, url, ("actuals",))
    text = project.config.read_text().replace("data/forecast.csv", "data/forecast.parquet")
    project.config.write_text(text)
    compare(_pandas(project.config), _dask(project.config, cluster, monkeypatch))
    assert counted and max(counted) > 1  # the actuals' table, in partitions


def _refusal(run: Callable[[], Any]) -> str:
    with pytest.raises(InputError) as caught:
        run()
    return str(caught.value)


@pytest.mark.parametrize("bad", ["date", "repeated", "offsets", "number"])
def test_a_table_with_bad_rows_is_refused_with_the_pandas_message(
        bad: str, make_project: Callable[..., Project], cluster: str, counted: list[int],
        monkeypatch: pytest.MonkeyPatch) -> None:
    forecast = forecast_frame(CURRENT)
    actuals = actuals_frame(CURRENT)
    if bad == "date":  # in a late partition: the message numbers the rows of the whole read
        forecast.loc[17, "week"] = "2026-13-45"
    elif bad == "repeated":
        actuals = pd.concat([actuals, actuals.iloc[[40, 3]]], ignore_index=True)
    elif bad == "offsets":  # each partition alone holds one UTC offset
        forecast["issued_on"] = "2026-03-02T00:00:00+01:00"
        forecast.loc[20:, "issued_on"] = "2026-03-02T00:00:00+02:00"
    project = make_project(forecast=forecast, actuals=actuals)
    point_at(project, load_tables(project, "sqlite"))
    if bad == "number":  # in the first rows (the dataframes' types are taken from no row)
        with sqlite3.connect(project.data / "warehouse.db") as con:
            con.execute("UPDATE forecast SET units = 'n/a' WHERE rowid IN (1, 22)")
    expected = _refusal(lambda: _pandas(project.config))
    assert _refusal(lambda: _dask(project.config, cluster, monkeypatch)) == expected
    assert "table" in expected


def test_an_empty_table_is_refused_with_the_pandas_message(
        make_project: Callable[..., Project], cluster: str) -> None:
    project = make_project(forecast=forecast_frame(CURRENT).iloc[:0])
    point_at(project, load_tables(project, "sqlite"))
    cfg = load_config(project.config)
    expected = _refusal(lambda: run_checks(cfg, engine="pandas", snapshot=False))
    got = _refusal(lambda: run_checks(cfg, engine="dask", scheduler=cluster, snapshot=False))
    assert got == expected and "has no rows" in expected


def test_a_query_or_a_view_is_read_on_the_client_with_the_same_results(
        make_project: Callable[..., Project], cluster: str) -> None:
    """A query has no row ids to order its rows by: the run reads its inputs on the client."""
    project = make_project(**_breached())
    url = load_tables(project, "duckdb")
    import duckdb

    con = duckdb.connect(url.removeprefix("duckdb:///"))
    con.execute("CREATE VIEW actuals_view AS SELECT * FROM actuals")
    con.close()
    point_at(project, url, ("forecast",))
    text = project.config.read_text().replace("path: data/actuals.csv", (
        f"sql: {{url: '{url}', table: actuals_view}}")).replace(
        "history: data/earlier.csv",
        f"history: {{sql: {{url: '{url}', query: 'select * from earlier'}}}}")
    project.config.write_text(text)
    assert sql_parts.order_kind(load_config(project.config).actuals.place,  # type: ignore
                                "actuals", "actuals.sql") is None
    compare(_pandas(project.config), run_checks(load_config(project.config), engine="dask",
                                                scheduler=cluster, snapshot=False))


def test_history_from_a_table_and_a_file_rows_repeated_across_them(
        make_project: Callable[..., Project], cluster: str, counted: list[int],
        monkeypatch: pytest.MonkeyPatch) -> None:
    """Two history entries, a table then a Parquet file, sharing a cycle's rows with other
    values: the pandas engine keeps the last place's row, so must the dask engine (the
    entries' order in ``__order``)."""
    project = make_project(**_breached())
    url = load_tables(project, "duckdb")
    later = forecast_frame(EARLIER[1], bias=1.1)
    later.to_parquet(project.data / "later.parquet", row_group_size=7)
    point_at(project, url, ("forecast", "actuals"))
    text = project.config.read_text().replace(
        "history: data/earlier.csv",
        f"history: [{{sql: {{url: '{url}', table: earlier}}}}, data/later.parquet]")
    project.config.write_text(text)
    compare(_pandas(project.config), _dask(project.config, cluster, monkeypatch))
    assert counted and max(counted) > 1


def test_only_plain_postgresql_tables_are_read_in_partitions(pg_url: str) -> None:
    """A partitioned table's (or a parent's) rows come from several relations whose ctids
    repeat: no reading order to give them, so they are read on the client."""
    from accuracy_checks.config import SqlSource

    engine = sa.create_engine(pg_url, poolclass=sa.pool.NullPool)
    with engine.begin() as conn:
        conn.execute(sa.text("CREATE TABLE plain (week DATE, units FLOAT)"))
        conn.execute(sa.text("CREATE TABLE split (week DATE, units FLOAT) PARTITION BY RANGE "
                             "(week)"))
        conn.execute(sa.text("CREATE TABLE split_a PARTITION OF split FOR VALUES FROM "
                             "('2026-01-01') TO ('2027-01-01')"))
        conn.execute(sa.text("CREATE TABLE parent (week DATE)"))
        conn.execute(sa.text("CREATE TABLE child () INHERITS (parent)"))
        conn.execute(sa.text("CREATE VIEW shown AS SELECT * FROM plain"))
    engine.dispose()
    kinds = {t: sql_parts.order_kind(SqlSource(url=pg_url, table=t), "forecast", "forecast.sql")
             for t in ("plain", "split", "split_a", "parent", "child", "shown")}
    assert kinds == {"plain": "ctid", "split": None, "split_a": "ctid", "parent": None,
                     "child": "ctid", "shown": None}


def test_an_empty_forecast_file_beside_table_actuals_is_refused_alike(
        make_project: Callable[..., Project], cluster: str,
        monkeypatch: pytest.MonkeyPatch) -> None:
    """A forecast file with a header and no rows, the actuals in a table: the readers'
    refusal on both engines (the dask engine once crashed here, exit 3)."""
    project = make_project(**_breached())
    url = load_tables(project, "sqlite")
    project.write("forecast.csv", _frames(project)["forecast"].iloc[:0])
    point_at(project, url, ("actuals",))
    pandas = _refusal(lambda: _pandas(project.config))
    assert pandas == _refusal(lambda: _dask(project.config, cluster, monkeypatch))
    assert "forecast.csv (config key `forecast.path`) has a header but no rows" in pandas
