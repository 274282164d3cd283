"""Datasets on object storage read in pieces on the workers: the test project and the demo as a
lake on an S3-compatible server on loopback (moto), the bucket named by ``${LAKE_BUCKET}``.
The workers start after the AWS variables are set and rebuild the filesystem from the URL and
their own environment (no filesystem or secret travels with a piece). Both engines give the
same results, a damaged partition outside the span is never opened, a damaged file inside it
is refused with the same message, the secret is never shown, and the rows are never read on
the client (a real multi-process local cluster, both engines)."""

from __future__ import annotations

from collections.abc import Callable, Iterator
from pathlib import Path

import pytest

from accuracy_checks import load_config, run_checks
from accuracy_checks.dask import client_read
from accuracy_checks.dask import read as R
from accuracy_checks.demo.scenario import generate_scenario
from accuracy_checks.errors import InputError
from accuracy_checks.sources import datasets
from tests.dask.support import compare, local_cluster
from tests.dask.test_datasets import (
    DEMO_PATHS,
    GARBAGE,
    PROJECT_PATHS,
    _csv,
    demo_lake,
    lake,
    part,
    point,
)
from tests.sources.test_sql import BREACHED
from tests.support.project import Project
from tests.support.s3 import s3_server

SECRET = "s3cr3t-key"


@pytest.fixture(scope="module")
def s3() -> Iterator[str]:
    """An S3-compatible server on loopback and the standard AWS variables pointing at it
    (set before the module's cluster starts: its workers inherit them)."""
    with s3_server(SECRET, LAKE_BUCKET="lake") as endpoint:
        yield endpoint


@pytest.fixture(scope="module")
def cluster(s3: str) -> Iterator[str]:
    """The module's local cluster of 2 worker processes, started with the AWS variables."""
    with local_cluster() as address:
        yield address


@pytest.fixture(scope="module")
def demo(tmp_path_factory: pytest.TempPathFactory) -> Path:
    out = tmp_path_factory.mktemp("demo") / "demo"
    generate_scenario(out)
    return out


def upload(prefix: str, files: dict[str, bytes]) -> None:
    """``files`` (relative path → bytes) under ``s3://lake/<prefix>/``."""
    import pyarrow.fs as pafs

    fs = pafs.S3FileSystem(allow_bucket_creation=True, **datasets.s3_environment())
    fs.create_dir("lake")
    for rel, data in files.items():
        with fs.open_output_stream(f"lake/{prefix}/{rel}") as out:
            out.write(data)


def _on_workers(monkeypatch: pytest.MonkeyPatch) -> None:
    def refused(*args: object, **kwargs: object) -> None:
        raise AssertionError("the inputs were read on the client")

    monkeypatch.setattr(client_read, "from_client", refused)


def _both(config: Path, cluster: str, monkeypatch: pytest.MonkeyPatch) -> None:
    """Both engines' results on ``config`` are the same, the dask engine's inputs read in
    pieces on the workers; no secret in what either says."""
    lines: list[str] = []
    pandas_report = run_checks(load_config(config), engine="pandas", snapshot=False,
                               progress=lines.append)
    with monkeypatch.context() as mp:
        _on_workers(mp)
        dask_report = run_checks(load_config(config), engine="dask", scheduler=cluster,
                                 snapshot=False, progress=lines.append)
    compare(pandas_report, dask_report)
    assert pandas_report.status == "fail"
    assert "dask engine: inputs read in pieces on the workers" in lines
    text = "\n".join(lines) + str(pandas_report.to_dict()) + str(dask_report.to_dict())
    assert SECRET not in text and "s3://${LAKE_BUCKET}/" in text


@pytest.mark.parametrize("kind", ["parquet", "csv"])
def test_the_test_project_on_s3(make_project: Callable[..., Project], cluster: str,
                                kind: str, monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.setattr(R, "PIECE_ROWS", 6)  # (several pieces per file)
    project = make_project(**BREACHED)
    data = project.data
    upload(f"project-{kind}", lake(_csv(data / "forecast.csv"), _csv(data / "earlier.csv"),
                                   _csv(data / "actuals.csv"), kind, row_group=3))
    config = point(project.config, PROJECT_PATHS, f"s3://${{LAKE_BUCKET}}/project-{kind}")
    _both(config, cluster, monkeypatch)


def test_the_demo_on_s3(demo: Path, cluster: str, monkeypatch: pytest.MonkeyPatch) -> None:
    upload("demo", demo_lake(demo))
    _both(point(demo / "accuracy-checks.yaml", DEMO_PATHS, "s3://${LAKE_BUCKET}/demo"),
          cluster, monkeypatch)


def test_a_damaged_file_in_the_span_on_s3(make_project: Callable[..., Project],
                                          cluster: str) -> None:
    project = make_project(**BREACHED)
    data = project.data
    files = lake(_csv(data / "forecast.csv"), _csv(data / "earlier.csv"),
                 _csv(data / "actuals.csv"), row_group=3)
    config = point(project.config, PROJECT_PATHS, "s3://${LAKE_BUCKET}/damaged")
    for damaged in ("history/issued_on=2026-02-16/part-1.parquet",
                    "forecast/issued_on=2026-03-02/part-0.parquet"):
        upload("damaged", {**files, damaged: GARBAGE})
        messages = []
        for engine in ("pandas", "dask"):
            with pytest.raises(InputError) as err:
                run_checks(load_config(config), engine=engine, snapshot=False,
                           scheduler=cluster if engine == "dask" else None)
            messages.append(str(err.value))
        assert damaged in messages[0] and SECRET not in messages[0], messages[0]
        assert messages[1] == messages[0]


def test_single_objects_and_a_flat_prefix_on_s3(make_project: Callable[..., Project],
                                                cluster: str,
                                                monkeypatch: pytest.MonkeyPatch) -> None:
    """No partitions: the forecast one Parquet object (several pieces), the actuals a prefix
    of two objects, the earlier cycles one CSV object."""
    monkeypatch.setattr(R, "PIECE_ROWS", 6)  # (several pieces per file)
    project = make_project(**BREACHED)
    data = project.data
    actuals = _csv(data / "actuals.csv")
    half = len(actuals) // 2
    upload("flat", {"forecast.parquet": part(_csv(data / "forecast.csv"), row_group=3),
                    "actuals/part-0.parquet": part(actuals.iloc[:half], row_group=3),
                    "actuals/part-1.parquet": part(actuals.iloc[half:], row_group=3),
                    "earlier.csv": part(_csv(data / "earlier.csv"), "csv")})
    config = point(project.config, {"data/forecast.csv": "forecast.parquet",
                                    "data/actuals.csv": "actuals/",
                                    "data/earlier.csv": "earlier.csv"},
                   "s3://${LAKE_BUCKET}/flat")
    _both(config, cluster, monkeypatch)
