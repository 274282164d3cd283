"""Datasets and URLs (accuracy_checks/sources/datasets.py): the small project as Parquet, history
partitioned by issue date (the issue date only in the folder names), read from a local folder,
``file://``, ``memory://`` and an S3-compatible server on loopback (moto), each giving the
results of the CSV files; partitions outside the span never opened; bad places exit 2."""

from __future__ import annotations

import copy
import io
import socket
import time
from collections.abc import Callable, Iterator
from pathlib import Path
from typing import Any

import pandas as pd
import pyarrow as pa
import pyarrow.parquet as pq
import pytest
from moto.server import ThreadedMotoServer

from accuracy_checks.errors import InputError
from accuracy_checks.sources import datasets
from accuracy_checks.sources.columns import Column
from tests.sources.test_sql import BREACHED, assert_same_results, results_of
from tests.support.cli import run
from tests.support.project import Project

#: a cycle issued long before the evaluation span (its partition is never needed)
OLD_CYCLE = "2025-06-02"
#: a cycle whose rows reach into the span (its partition must be read)
IN_SPAN_CYCLE = "2026-02-09"


def _csv(project: Project, name: str) -> pd.DataFrame:
    return pd.read_csv(project.data / f"{name}.csv", dtype=str, keep_default_na=False)


def _parquet(frame: pd.DataFrame, dates: dict[str, str]) -> bytes:
    """``frame`` (text) as Parquet bytes: ``dates`` columns as date32 or timestamp[us],
    numbers as float64, the rest as text."""
    cols: dict[str, pa.Array] = {}
    for name in frame.columns:
        if name in dates:
            values = pd.to_datetime(frame[name])
            cols[name] = (pa.array(values.dt.date, pa.date32()) if dates[name] == "date"
                          else pa.array(values.astype("datetime64[us]"), pa.timestamp("us")))
        elif name in ("units", "p10", "p90", "units_sold"):
            cols[name] = pa.array(pd.to_numeric(frame[name]), pa.float64())
        else:
            cols[name] = pa.array(frame[name], pa.string())
    sink = io.BytesIO()
    pq.write_table(pa.table(cols), sink)
    return sink.getvalue()


def lake(project: Project) -> dict[str, bytes]:
    """The project's data as a lake: relative path → file bytes. History partitioned by
    ``issued_on=…/`` (no issue-date column in the files), one file per partition."""
    files = {
        "forecast.parquet": _parquet(_csv(project, "forecast"),
                                     {"week": "date", "issued_on": "date"}),
        "actuals/part-0.parquet": _parquet(_csv(project, "actuals"), {"week": "timestamp"}),
        "products.parquet": _parquet(_csv(project, "products"), {}),
    }
    earlier = _csv(project, "earlier")
    for issued, rows in earlier.groupby("issued_on"):
        files[f"earlier/issued_on={issued}/part-0.parquet"] = _parquet(
            rows.drop(columns="issued_on"), {"week": "date"})
    return files


def point_config(project: Project, base: str) -> None:
    """The project's config with every input read from ``base`` (a folder or a URL)."""
    text = project.config.read_text()
    for old, new in (("path: data/forecast.csv", f"path: {base}/forecast.parquet"),
                     ("path: data/actuals.csv", f"path: {base}/actuals/"),
                     ("history: data/earlier.csv", f"history: {base}/earlier"),
                     ("mapping: data/products.csv", f"mapping: {base}/products.parquet")):
        assert old in text
        text = text.replace(old, new)
    project.config.write_text(text)


def write_local(root: Path, files: dict[str, bytes]) -> None:
    for rel, data in files.items():
        (root / rel).parent.mkdir(parents=True, exist_ok=True)
        (root / rel).write_bytes(data)


@pytest.fixture
def breached(make_project: Callable[..., Project]) -> tuple[Project, dict[str, Any]]:
    """The small project with failures and examples, and its results from the CSV files."""
    project = make_project(**BREACHED)
    return project, results_of(project, "csv")


def test_a_local_partitioned_folder_and_file_urls_give_the_results_of_the_csv_files(
        breached: tuple[Project, dict[str, Any]], tmp_path: Path) -> None:
    project, expected = breached
    write_local(tmp_path / "lake", lake(project))
    text = project.config.read_text()
    point_config(project, str(tmp_path / "lake"))
    assert_same_results(results_of(project, "local"), copy.deepcopy(expected))
    project.config.write_text(text)
    point_config(project, (tmp_path / "lake").as_uri())
    assert_same_results(results_of(project, "file_url"), expected)


def test_memory_urls_give_the_results_of_the_csv_files(
        breached: tuple[Project, dict[str, Any]]) -> None:
    import fsspec

    project, expected = breached
    memory = fsspec.filesystem("memory")
    for rel, data in lake(project).items():
        memory.pipe(f"/lake-{id(project)}/{rel}", data)
    try:
        point_config(project, f"memory://lake-{id(project)}")
        assert_same_results(results_of(project, "memory"), expected)
    finally:
        memory.rm(f"/lake-{id(project)}", recursive=True)


def test_a_damaged_partition_outside_the_span_is_never_opened(
        breached: tuple[Project, dict[str, Any]], tmp_path: Path) -> None:
    project, expected = breached
    files = lake(project)
    files[f"earlier/issued_on={OLD_CYCLE}/part-0.parquet"] = b"garbage, not Parquet"
    write_local(tmp_path / "lake", files)
    point_config(project, str(tmp_path / "lake"))
    assert_same_results(results_of(project, "damaged_old"), expected)
    # the same damage in a cycle the span needs is read, and refused (so the test can fail)
    (tmp_path / "lake" / f"earlier/issued_on={IN_SPAN_CYCLE}").mkdir()
    (tmp_path / "lake" / f"earlier/issued_on={IN_SPAN_CYCLE}/part-0.parquet").write_bytes(
        b"garbage, not Parquet")
    assert run(project, "--no-snapshot") == 2


def test_partition_values_are_text_through_the_converters(tmp_path: Path) -> None:
    # "07" stays "07" (a key is text as written), the issue date parses as a date
    write_local(tmp_path, {"store=07/issued_on=2026-03-02/x.parquet": _parquet(
        pd.DataFrame({"units": ["1.5"]}), {})})
    frame = datasets.read_dataset_columns(
        tmp_path, [Column("store", "key", "forecast.keys"),
                   Column("issued_on", "date", "forecast.issued"),
                   Column("units", "number", "forecast.value")], role="forecast", key="k")
    assert frame["store"].tolist() == ["07"]
    assert frame["issued_on"].tolist() == [pd.Timestamp("2026-03-02")]
    assert frame["units"].tolist() == [1.5]


def test_a_missing_column_or_an_empty_prefix_is_an_input_error(tmp_path: Path) -> None:
    write_local(tmp_path, {"a/x.parquet": _parquet(pd.DataFrame({"units": ["1"]}), {})})
    with pytest.raises(InputError, match=r"no column 'week' \(config key `forecast.period`\)"):
        datasets.read_dataset_columns(tmp_path / "a", [Column("week", "date",
                                                              "forecast.period")],
                                      role="forecast", key="forecast.path")
    (tmp_path / "b" / "k=1").mkdir(parents=True)
    with pytest.raises(InputError, match=r"holds no \.csv or \.parquet files"):
        datasets.open_dataset(tmp_path / "b", "actuals", "k")


def test_the_columns_come_from_the_newest_file_the_filters_keep(tmp_path: Path) -> None:
    """A newer partition outside the filters (damaged here) is not opened for the header."""
    write_local(tmp_path, {
        "week=2026-03-02/x.parquet": _parquet(pd.DataFrame({"units": ["1.5"]}), {}),
        "week=2026-03-09/x.parquet": b"garbage, not Parquet"})
    columns = [Column("week", "date", "actuals.period", "period"),
               Column("units", "number", "actuals.value", "actual")]
    only = datasets.DateFilter("week", (pd.Timestamp("2026-03-02"),))
    frame = datasets.read_dataset_columns(tmp_path, columns, role="actuals", key="k",
                                          filters=[only])
    assert frame["period"].tolist() == [pd.Timestamp("2026-03-02")]
    assert frame["actual"].tolist() == [1.5]
    with pytest.raises(InputError, match=r"week=2026-03-09/x.parquet .* cannot be read"):
        datasets.read_dataset_columns(tmp_path, columns, role="actuals", key="k")


@pytest.mark.parametrize("week_kind", ["date", "timestamp"])
def test_the_pairs_open_only_their_cycles_and_read_only_their_rows(
        tmp_path: Path, week_kind: str) -> None:
    """``pairs`` (issue date → periods): the partition of a cycle outside them is never
    opened (damaged here), and of the cycles inside only the rows of their periods are read
    (a missing week passes, and the converters name it); without the pairs the damaged file
    is read and refused (so the test can fail)."""
    weeks = ["2026-03-02", "2026-03-09", "2026-03-16"]
    rows = pd.DataFrame({"store": ["S1", "S1", "S1"], "units": ["1", "2", "3"],
                         "week": weeks})

    def part(frame: pd.DataFrame) -> bytes:
        sink = io.BytesIO()
        week = pd.to_datetime(frame["week"])
        pq.write_table(pa.table({
            "store": pa.array(frame["store"], pa.string()),
            "units": pa.array(pd.to_numeric(frame["units"]), pa.float64()),
            "week": (pa.array(week.dt.date, pa.date32()) if week_kind == "date"
                     else pa.array(week.astype("datetime64[us]"), pa.timestamp("us")))}), sink)
        return sink.getvalue()

    write_local(tmp_path, {"issued_on=2026-02-23/x.parquet": part(rows),
                           "issued_on=2026-03-02/x.parquet": part(rows),
                           "issued_on=2026-02-16/x.parquet": b"garbage, not Parquet"})
    columns = [Column("store", "key", "forecast.keys"),
               Column("week", "date", "forecast.period", "period"),
               Column("issued_on", "date", "forecast.issued", "issued"),
               Column("units", "number", "forecast.value", "forecast")]
    day = pd.Timestamp
    span = datasets.DateFilter("week", tuple(day(w) for w in weeks))
    pairs = datasets.PairFilter("issued_on", "week", {
        day("2026-02-23"): [day("2026-03-02")],
        day("2026-03-02"): [day("2026-03-09"), day("2026-03-16")]})
    frame = datasets.read_dataset_columns(tmp_path, columns, role="history", key="history",
                                          filters=[span], pairs=pairs)
    got = sorted(zip(frame["issued"].astype(str), frame["period"].astype(str),
                     frame["forecast"], strict=True))
    assert got == [("2026-02-23", "2026-03-02", 1.0),
                   ("2026-03-02", "2026-03-09", 2.0),
                   ("2026-03-02", "2026-03-16", 3.0)]
    assert frame["store"].tolist() == ["S1"] * 3
    with pytest.raises(InputError, match=r"cannot be read"):
        datasets.read_dataset_columns(tmp_path, columns, role="history", key="history",
                                      filters=[span])
    # a missing week in a cycle of the pairs is read, and named
    write_local(tmp_path, {"issued_on=2026-02-23/x.parquet": part(pd.concat(
        [rows, pd.DataFrame({"store": ["S1"], "units": ["4"], "week": [None]})]))})
    with pytest.raises(InputError, match=r"date column 'week' .* is empty in 1 rows"):
        datasets.read_dataset_columns(tmp_path, columns, role="history", key="history",
                                      filters=[span], pairs=pairs)


def test_actuals_partitioned_by_period_give_the_results_of_the_csv_files(
        breached: tuple[Project, dict[str, Any]], tmp_path: Path) -> None:
    """Actuals in one folder per week (the week only in the folder names): the pre-reads
    group while scanning (periods with an actual, the series known) and the run gives the
    CSV results."""
    project, expected = breached
    files = {k: v for k, v in lake(project).items() if not k.startswith("actuals/")}
    for week, rows in _csv(project, "actuals").groupby("week"):
        files[f"actuals/week={week}/part-0.parquet"] = _parquet(rows.drop(columns="week"), {})
    write_local(tmp_path / "lake", files)
    point_config(project, str(tmp_path / "lake"))
    got = results_of(project, "by_week")
    assert got["inputs"]["actuals"]["rows"] < expected["inputs"]["actuals"]["rows"]
    assert_same_results(got, expected)


@pytest.mark.parametrize("fmt", ["parquet", "csv"])
def test_distinct_reads_group_over_the_rows_with_a_value(tmp_path: Path, fmt: str) -> None:
    """``distinct=True, present=…``: the distinct periods over the rows whose value is a
    number (missing and NaN values left out), the same from Parquet (grouped while scanning)
    and from CSV (read, then grouped); the distinct keys with blanks stripped."""
    frame = pd.DataFrame({"store": ["S1", "S1 ", "S2", "S2", "S3"],
                          "units": [1.5, 2.0, None, float("nan"), 4.0]})
    weeks = ["2026-03-02", "2026-03-02", "2026-03-09", "2026-03-16", "2026-03-23"]
    for week, part in frame.groupby(pd.Series(weeks)):
        if fmt == "parquet":
            sink = io.BytesIO()
            units = pa.array(part["units"].tolist(), pa.float64(),
                             from_pandas=week == "2026-03-09")
            pq.write_table(pa.table({"store": pa.array(part["store"], pa.string()),
                                     "units": units}), sink)
            data = sink.getvalue()  # 03-09: a missing value; 03-16: NaN
        else:
            data = part.to_csv(index=False, na_rep="NaN").encode()
        write_local(tmp_path, {f"week={week}/x.{fmt}": data})
    week = Column("week", "date", "actuals.period", "period")
    value = Column("units", "number", "actuals.value", "actual")
    periods = datasets.read_dataset_columns(tmp_path, [week], role="actuals", key="k",
                                            distinct=True, present=value)
    assert sorted(periods["period"]) == [pd.Timestamp("2026-03-02"), pd.Timestamp("2026-03-23")]
    keys = datasets.read_dataset_columns(tmp_path, [Column("store", "key", "actuals.keys")],
                                         role="actuals", key="k", distinct=True)
    assert sorted(keys["store"]) == ["S1", "S2", "S3"]
    with pytest.raises(InputError, match=r"no column 'sold' \(config key `actuals.value`\)"):
        datasets.read_dataset_columns(tmp_path, [week], role="actuals", key="k", distinct=True,
                                      present=Column("sold", "number", "actuals.value"))


@pytest.fixture
def http_root(tmp_path: Path) -> Iterator[tuple[Path, str]]:
    """A folder served over HTTP on loopback (Python's own server, one thread per request)."""
    import functools
    import threading
    from http.server import SimpleHTTPRequestHandler, ThreadingHTTPServer

    root = tmp_path / "web"
    root.mkdir()

    class Quiet(SimpleHTTPRequestHandler):
        def log_message(self, *args: Any) -> None:
            pass

    server = ThreadingHTTPServer(("127.0.0.1", 0),
                                 functools.partial(Quiet, directory=str(root)))
    threading.Thread(target=server.serve_forever, daemon=True).start()
    try:
        yield root, f"http://127.0.0.1:{server.server_address[1]}"
    finally:
        server.shutdown()
        server.server_close()


def test_one_file_over_http_gives_the_results_of_the_csv_files(
        breached: tuple[Project, dict[str, Any]], http_root: tuple[Path, str], tmp_path: Path,
        capsys: pytest.CaptureFixture[str], monkeypatch: pytest.MonkeyPatch) -> None:
    """The forecast and the mapping as single files over HTTP (https:// is the same code with
    TLS); the actuals and history from a local lake. A missing file or a silent server is
    exit 2 within the timeout, a token in the URL never shown."""
    project, expected = breached
    root, base = http_root
    files = lake(project)
    write_local(root, {k: v for k, v in files.items() if "/" not in k})
    write_local(tmp_path / "lake", files)
    point_config(project, str(tmp_path / "lake"))
    text = project.config.read_text()
    for name in ("forecast", "products"):
        text = text.replace(f"{tmp_path / 'lake'}/{name}.parquet",
                            f"{base}/{name}.parquet?token=t0p-secret")
    project.config.write_text(text)
    assert_same_results(results_of(project, "http"), expected)
    assert "t0p-secret" not in (project.root / "http.json").read_text()
    project.config.write_text(text.replace("/forecast.parquet", "/missing.parquet"))
    assert run(project, "--no-snapshot") == 2
    err = capsys.readouterr().err
    assert "Cannot read" in err and "404" in err and "forecast.path" in err
    assert "t0p-secret" not in err
    monkeypatch.setattr(datasets, "REQUEST_TIMEOUT_S", 1)
    with socket.socket() as silent:
        silent.bind(("127.0.0.1", 0))
        silent.listen(0)
        port = silent.getsockname()[1]
        project.config.write_text(text.replace(base, f"http://127.0.0.1:{port}"))
        t0 = time.perf_counter()
        assert run(project, "--no-snapshot") == 2
        assert time.perf_counter() - t0 < 8
    err = capsys.readouterr().err
    assert "Cannot read" in err and "t0p-secret" not in err


# ----------------------------------------------------------------------- object storage


def _free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return int(s.getsockname()[1])


@pytest.fixture
def s3(monkeypatch: pytest.MonkeyPatch) -> Iterator[str]:
    """An S3-compatible server on loopback (moto) and the standard AWS variables pointing at
    it; yields the endpoint."""
    port = _free_port()
    server = ThreadedMotoServer(ip_address="127.0.0.1", port=port, verbose=False)
    server.start()
    endpoint = f"http://127.0.0.1:{port}"
    for name, value in (("AWS_ENDPOINT_URL", endpoint), ("AWS_ACCESS_KEY_ID", "testing"),
                        ("AWS_SECRET_ACCESS_KEY", "s3cr3t-key"),
                        ("AWS_DEFAULT_REGION", "us-east-1")):
        monkeypatch.setenv(name, value)
    try:
        yield endpoint
    finally:
        server.stop()


def _upload(bucket: str, files: dict[str, bytes]) -> None:
    import pyarrow.fs as pafs

    fs = pafs.S3FileSystem(allow_bucket_creation=True, **datasets.s3_environment())
    fs.create_dir(bucket)
    for rel, data in files.items():
        with fs.open_output_stream(f"{bucket}/{rel}") as out:
            out.write(data)


def test_s3_gives_the_results_of_the_csv_files_and_skips_a_damaged_old_partition(
        breached: tuple[Project, dict[str, Any]], s3: str,
        capsys: pytest.CaptureFixture[str]) -> None:
    project, expected = breached
    files = lake(project)
    files[f"earlier/issued_on={OLD_CYCLE}/part-0.parquet"] = b"garbage, not Parquet"
    _upload("lake", files)
    point_config(project, "s3://lake")
    got = results_of(project, "s3")
    assert_same_results(got, expected)
    out = capsys.readouterr()
    assert "s3cr3t-key" not in out.out + out.err


def test_env_names_in_a_url_are_expanded(breached: tuple[Project, dict[str, Any]], s3: str,
                                         monkeypatch: pytest.MonkeyPatch) -> None:
    project, expected = breached
    _upload("lake2", lake(project))
    monkeypatch.setenv("LAKE_BUCKET", "lake2")
    point_config(project, "s3://${LAKE_BUCKET}")
    assert_same_results(results_of(project, "s3_env"), expected)


def test_bad_places_on_s3_are_exit_2_within_seconds(
        make_project: Callable[..., Project], s3: str, capsys: pytest.CaptureFixture[str],
        monkeypatch: pytest.MonkeyPatch) -> None:
    project = make_project()
    _upload("lake3", lake(project))
    text = project.config.read_text()
    for base, words in (("s3://no-such-bucket", "does not exist"),
                        ("s3://lake3/nothing-here", "does not exist")):
        project.config.write_text(text)
        point_config(project, base)
        assert run(project, "--no-snapshot") == 2
        assert words in capsys.readouterr().err
    # an endpoint that refuses connections, and one that accepts them but never answers:
    # refused within the timeouts (shortened here), the secret never shown
    monkeypatch.setattr(datasets, "CONNECT_TIMEOUT_S", 1)
    monkeypatch.setattr(datasets, "REQUEST_TIMEOUT_S", 1)
    project.config.write_text(text)
    point_config(project, "s3://lake3")
    with socket.socket() as silent:
        silent.bind(("127.0.0.1", 0))
        silent.listen(0)
        for port in (_free_port(), silent.getsockname()[1]):
            monkeypatch.setenv("AWS_ENDPOINT_URL", f"http://127.0.0.1:{port}")
            t0 = time.perf_counter()
            assert run(project, "--no-snapshot") == 2
            elapsed = time.perf_counter() - t0
            err = capsys.readouterr().err
            assert "Cannot reach" in err and "s3cr3t-key" not in err, err
            assert elapsed < 8, elapsed  # two attempts of 1 s each, and the run around them


def test_an_unknown_scheme_is_exit_2_naming_the_schemes(
        make_project: Callable[..., Project], capsys: pytest.CaptureFixture[str]) -> None:
    project = make_project()
    point_config(project, "ftp://host/lake")
    assert run(project, "--no-snapshot") == 2
    err = capsys.readouterr().err
    assert "'ftp' is not supported" in err and "s3://" in err and "memory://" in err
    assert not (project.root / "ftp:").exists()
