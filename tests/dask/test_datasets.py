"""Hive-partitioned datasets read in pieces on the workers give the pandas engine's results: the
demo and the test project written as a lake (the forecast and the earlier cycles partitioned by
issue date, the actuals by period), Parquet in several row groups and CSV, a damaged partition
outside the span never opened by either engine, a damaged file inside it refused with the same
message; the rows are read on the workers, never on the client (a real multi-process local
cluster, both engines)."""

from __future__ import annotations

import io
import itertools
from collections.abc import Callable, Iterator
from pathlib import Path

import pandas as pd
import pyarrow as pa
import pyarrow.parquet as pq
import pytest

from accuracy_checks import load_config, run_checks
from accuracy_checks.dask import client_read
from accuracy_checks.dask import read as R
from accuracy_checks.demo.scenario import generate_scenario
from tests.dask.support import both, compare, refusals
from tests.sources.test_sql import BREACHED
from tests.support.project import Project

#: text columns of the CSV files read as numbers in the lake's Parquet files
NUMBERS = ("units", "p10", "p90", "units_sold")
#: a cycle issued long before any evaluation span: its partition is never opened
OLD = "2020-01-06"
GARBAGE = b"garbage, not Parquet"


def _csv(path: Path) -> pd.DataFrame:
    return pd.read_csv(path, dtype=str, keep_default_na=False)


def part(frame: pd.DataFrame, kind: str = "parquet", row_group: int = 200) -> bytes:
    """``frame`` (text, as in the CSV files) as one file of a lake: Parquet (dates as
    timestamps, numbers as float64, the rest as text; row groups of ``row_group`` rows) or
    CSV."""
    if kind == "csv":
        return frame.to_csv(index=False).encode()
    cols: dict[str, pa.Array] = {}
    for name in frame.columns:
        if name in ("week", "issued_on"):
            cols[name] = pa.array(pd.to_datetime(frame[name]).astype("datetime64[us]"),
                                  pa.timestamp("us"))
        elif name in NUMBERS:
            cols[name] = pa.array(pd.to_numeric(frame[name]), pa.float64())
        else:
            cols[name] = pa.array(frame[name], pa.string())
    sink = io.BytesIO()
    pq.write_table(pa.table(cols), sink, row_group_size=row_group)
    return sink.getvalue()


def lake(forecast: pd.DataFrame, history: pd.DataFrame, actuals: pd.DataFrame,
         kind: str = "parquet", row_group: int = 200, split: int = 2,
         forecast_by: tuple[str, ...] = ("issued_on",)) -> dict[str, bytes]:
    """The inputs as a lake (relative path → bytes): the forecast partitioned by
    ``forecast_by`` (issue date, and a key column too), the earlier cycles by issue date, the
    actuals by period (the partition columns only in the folder names), each partition in
    ``split`` files; a damaged file in a partition of a cycle issued long before the span."""
    ext = "csv" if kind == "csv" else "parquet"
    files: dict[str, bytes] = {}
    for name, frame, by in (("forecast", forecast, list(forecast_by)),
                            ("history", history, ["issued_on"]), ("actuals", actuals, ["week"])):
        for values, rows in frame.groupby(by, sort=False):
            folder = "/".join(f"{n}={v}" for n, v in zip(by, values, strict=True))
            rows = rows.drop(columns=by)
            cuts = [len(rows) * i // split for i in range(split + 1)]
            for i, chunk in enumerate(rows.iloc[a:b] for a, b in itertools.pairwise(cuts)):
                if len(chunk):
                    files[f"{name}/{folder}/part-{i}.{ext}"] = part(chunk, kind, row_group)
    files[f"history/issued_on={OLD}/part-0.{ext}"] = GARBAGE
    return files


def write(root: Path, files: dict[str, bytes]) -> None:
    for rel, data in files.items():
        (root / rel).parent.mkdir(parents=True, exist_ok=True)
        (root / rel).write_bytes(data)


def point(config: Path, paths: dict[str, str], base: str) -> Path:
    """A copy of ``config`` beside it with the places ``paths`` (old text → lake folder)
    read from ``base``."""
    text = config.read_text()
    for old, name in paths.items():
        assert old in text
        text = text.replace(old, f"{base}/{name}")
    out = config.with_name("lake.yaml")
    out.write_text(text)
    return out


@pytest.fixture(autouse=True)
def small_pieces(monkeypatch: pytest.MonkeyPatch) -> None:
    """Parquet pieces of a few row groups (several pieces per file)."""
    monkeypatch.setattr(R, "PIECE_ROWS", 6)


@pytest.fixture(scope="module")
def demo(tmp_path_factory: pytest.TempPathFactory) -> Path:
    out = tmp_path_factory.mktemp("demo") / "demo"
    generate_scenario(out)
    return out


def demo_lake(demo: Path) -> dict[str, bytes]:
    """The demo's final cycle as a lake: its forecast; the earlier cycles of the history file
    and the demo's other cycles as history; every actual."""
    forecasts = sorted((demo / "data" / "forecasts").iterdir())
    history = pd.concat([_csv(demo / "data" / "earlier_forecasts.csv"),
                         *(_csv(f) for f in forecasts[:-1])], ignore_index=True)
    return lake(_csv(forecasts[-1]), history, _csv(demo / "data" / "actuals.csv"),
                row_group=500, split=1)


DEMO_PATHS = {"data/forecasts/forecast_2025-04-07.csv": "forecast",
              "data/actuals/actuals_2025-04-07.csv": "actuals",
              "data/earlier_forecasts.csv": "history"}
PROJECT_PATHS = {"data/forecast.csv": "forecast", "data/actuals.csv": "actuals",
                 "data/earlier.csv": "history"}


def test_the_demo_as_a_partitioned_lake(demo: Path, cluster: str,
                                        monkeypatch: pytest.MonkeyPatch) -> None:
    """Both engines agree on the demo's final cycle read from a Hive-partitioned lake whose
    old partition is damaged (never opened), and the dask engine reads the rows on the
    workers (the client's reading path would raise)."""
    monkeypatch.setattr(R, "PIECE_ROWS", 1_000_000)  # (each small file one piece)
    write(demo / "lake", demo_lake(demo))
    config = point(demo / "accuracy-checks.yaml", DEMO_PATHS, str(demo / "lake"))
    pandas_report = run_checks(load_config(config), engine="pandas", snapshot=False)

    def refused(*args: object, **kwargs: object) -> None:
        raise AssertionError("the inputs were read on the client")

    monkeypatch.setattr(client_read, "from_client", refused)
    lines: list[str] = []
    dask_report = run_checks(load_config(config), engine="dask", scheduler=cluster,
                             snapshot=False, progress=lines.append)
    compare(pandas_report, dask_report)
    assert "dask engine: inputs read in pieces on the workers" in lines
    assert not any("read on the client" in line for line in lines)
    assert pandas_report.status == "fail"
    assert any(r.get("lag") == 4 for r in pandas_report.to_dict()["results"])


@pytest.mark.parametrize("kind", ["parquet", "csv"])
def test_the_test_project_as_a_lake(make_project: Callable[..., Project], cluster: str,
                                    kind: str) -> None:
    """The forecast partitioned by issue date and store (a key read from the folder names, as
    text), in files of several pieces."""
    project = make_project(**BREACHED)
    data = project.data
    write(project.root / "lake", lake(_csv(data / "forecast.csv"), _csv(data / "earlier.csv"),
                                      _csv(data / "actuals.csv"), kind, row_group=3,
                                      forecast_by=("issued_on", "store")))
    assert (project.root / "lake/forecast/issued_on=2026-03-02/store=S1").is_dir()
    config = point(project.config, PROJECT_PATHS, str(project.root / "lake"))
    pandas_report, dask_report = both(config, cluster)
    assert pandas_report.status == "fail"
    compare(pandas_report, dask_report)
    # the lake gives the CSV files' results (only the places differ)
    csv_report = run_checks(load_config(project.config), engine="pandas", snapshot=False)
    assert [(r.check, r.segment, r.status, r.value) for r in csv_report.results] == \
        [(r.check, r.segment, r.status, r.value) for r in pandas_report.results]


@pytest.fixture
def project_lake(make_project: Callable[..., Project]) -> Iterator[tuple[Project, Path, Path]]:
    """The test project as a local Parquet lake: (project, lake folder, config)."""
    project = make_project(**BREACHED)
    data = project.data
    root = project.root / "lake"
    write(root, lake(_csv(data / "forecast.csv"), _csv(data / "earlier.csv"),
                     _csv(data / "actuals.csv"), row_group=3))
    yield project, root, point(project.config, PROJECT_PATHS, str(root))


def test_a_damaged_file_in_the_span_is_refused_with_the_same_message(
        project_lake: tuple[Project, Path, Path], cluster: str) -> None:
    _, root, config = project_lake
    for damaged in ("history/issued_on=2026-02-16/part-1.parquet",
                    "forecast/issued_on=2026-03-02/part-0.parquet",
                    "actuals/week=2026-02-16/part-1.parquet"):
        good = (root / damaged).read_bytes()
        (root / damaged).write_bytes(GARBAGE)
        pandas_message, dask_message = refusals(config, cluster)
        assert damaged in pandas_message, pandas_message
        assert dask_message == pandas_message
        (root / damaged).write_bytes(good)


def test_a_bad_value_is_refused_with_the_dataset_readers_message(
        project_lake: tuple[Project, Path, Path], cluster: str) -> None:
    """A number column stored as text in one file of several pieces, with a value that is no
    number: the dataset's scan (the first file's schema) refuses the cast, with the same
    message on both engines."""
    _, root, config = project_lake
    file = root / "forecast/issued_on=2026-03-02/part-1.parquet"
    table = pq.read_table(file)
    units = table["units"].to_pandas().astype(str)
    units.iloc[-2] = "twelve"
    at = table.schema.get_field_index("units")
    pq.write_table(table.set_column(at, "units", pa.array(units, pa.string())), file,
                   row_group_size=3)
    pandas_message, dask_message = refusals(config, cluster)
    assert "twelve" in pandas_message
    assert dask_message == pandas_message


def test_mixed_utc_offsets_across_the_files_of_a_dataset(
        make_project: Callable[..., Project], cluster: str) -> None:
    """A CSV dataset whose files each carry one UTC offset in the period column, but not the
    same one: the pandas engine converts the dataset's column as one and refuses it; so does
    the dask engine, with the same message."""
    project = make_project(**BREACHED)
    data = project.data
    forecast = _csv(data / "forecast.csv")
    files = lake(forecast, _csv(data / "earlier.csv"), _csv(data / "actuals.csv"), "csv")
    first = forecast.iloc[: len(forecast) // 2].drop(columns="issued_on")
    rest = forecast.iloc[len(forecast) // 2:].drop(columns="issued_on")
    issued = forecast["issued_on"].iloc[0]
    files[f"forecast/issued_on={issued}/part-0.csv"] = part(
        first.assign(week=first["week"] + "T00:00:00+01:00"), "csv")
    files[f"forecast/issued_on={issued}/part-1.csv"] = part(
        rest.assign(week=rest["week"] + "T00:00:00+02:00"), "csv")
    write(project.root / "lake", files)
    config = point(project.config, PROJECT_PATHS, str(project.root / "lake"))
    pandas_message, dask_message = refusals(config, cluster)
    assert "mixes time zones" in pandas_message, pandas_message
    assert dask_message == pandas_message


def test_a_memory_url_stays_on_the_client(make_project: Callable[..., Project],
                                          cluster: str) -> None:
    """A memory file system lives in one process: its inputs are read on the client (the
    progress says so), with the same results."""
    import fsspec

    project = make_project(**BREACHED)
    data = project.data
    memory = fsspec.filesystem("memory")
    base = f"lake-{id(project)}"
    for rel, blob in lake(_csv(data / "forecast.csv"), _csv(data / "earlier.csv"),
                          _csv(data / "actuals.csv")).items():
        memory.pipe(f"/{base}/{rel}", blob)
    try:
        config = point(project.config, PROJECT_PATHS, f"memory://{base}")
        lines: list[str] = []
        pandas_report = run_checks(load_config(config), engine="pandas", snapshot=False)
        dask_report = run_checks(load_config(config), engine="dask", scheduler=cluster,
                                 snapshot=False, progress=lines.append)
        compare(pandas_report, dask_report)
        assert any("inputs read on the client" in line for line in lines)
    finally:
        memory.rm(f"/{base}", recursive=True)


def test_a_bad_actual_in_a_csv_dataset_is_refused_with_the_same_message(
        make_project: Callable[..., Project], cluster: str) -> None:
    """A text value among the actuals of a CSV dataset partitioned by period: refused by the
    pandas engine's pre-read of the periods, numbering the rows of its whole scan; the dask
    engine's piece asks a worker for that message."""
    project = make_project(**BREACHED)
    data = project.data
    actuals = _csv(data / "actuals.csv")
    actuals.loc[len(actuals) - 3, "units_sold"] = "twelve"
    write(project.root / "lake", lake(_csv(data / "forecast.csv"), _csv(data / "earlier.csv"),
                                      actuals, "csv"))
    config = point(project.config, PROJECT_PATHS, str(project.root / "lake"))
    pandas_message, dask_message = refusals(config, cluster)
    assert "twelve" in pandas_message, pandas_message
    assert dask_message == pandas_message


def test_a_missing_key_is_refused_naming_the_rows_of_the_whole_scan(
        project_lake: tuple[Project, Path, Path], cluster: str) -> None:
    """A missing key in the second file of a partition (a piece of several): the pandas
    engine's message numbers the rows of its scan of every file; the dask engine's piece asks
    a worker for it."""
    _, root, config = project_lake
    file = root / "forecast/issued_on=2026-03-02/part-1.parquet"
    table = pq.read_table(file)
    product = table["product"].to_pylist()
    product[-2] = None
    at = table.schema.get_field_index("product")
    pq.write_table(table.set_column(at, "product", pa.array(product, pa.string())), file,
                   row_group_size=3)
    pandas_message, dask_message = refusals(config, cluster)
    assert "row " in pandas_message and "product" in pandas_message, pandas_message
    assert dask_message == pandas_message


def test_mixed_utc_offsets_across_the_partitions_of_a_history_dataset(
        make_project: Callable[..., Project], cluster: str) -> None:
    """Earlier cycles partitioned by an issue date written with a time and a UTC offset, not
    the same in every partition: refused by both engines with the same message (each
    partition alone converts)."""
    project = make_project(**BREACHED)
    data = project.data
    earlier = _csv(data / "earlier.csv")
    offsets = {d: f"{d}T00:00:00+0{i + 1}:00"
               for i, d in enumerate(sorted(earlier["issued_on"].unique()))}
    earlier["issued_on"] = earlier["issued_on"].map(offsets)
    files = lake(_csv(data / "forecast.csv"), earlier, _csv(data / "actuals.csv"))
    del files[f"history/issued_on={OLD}/part-0.parquet"]  # (a date without offset)
    write(project.root / "lake", files)
    config = point(project.config, PROJECT_PATHS, str(project.root / "lake"))
    pandas_message, dask_message = refusals(config, cluster)
    assert "mixes time zones" in pandas_message, pandas_message
    assert dask_message == pandas_message


def test_a_dataset_without_rows_is_refused_with_the_same_message(
        project_lake: tuple[Project, Path, Path], cluster: str) -> None:
    _, root, config = project_lake
    for file in (root / "forecast").rglob("*.parquet"):
        table = pq.read_table(file)
        pq.write_table(table.slice(0, 0), file)
    pandas_message, dask_message = refusals(config, cluster)
    assert "has no rows" in pandas_message, pandas_message
    assert dask_message == pandas_message
