"""The dask engine with its archive on object storage (an S3-compatible server on loopback,
moto's, reached by pyarrow's S3 filesystem through the standard AWS variables, which the
workers inherit): the workers upload the snapshot's parts, the store's transaction claims the
attempt, the parts are published after the commit with their manifest last; later runs of
either engine read that cycle (the dask engine on its workers) and agree; an upload cut
after the commit is finished by the next run, and never read half done."""

from __future__ import annotations

import uuid
from collections.abc import Callable, Iterator
from pathlib import Path

import boto3
import pandas as pd
import pytest

from accuracy_checks import load_config, run_checks
from accuracy_checks.config import Config
from accuracy_checks.dask.snapshot import RemoteParts
from accuracy_checks.engine import archived_cycles
from accuracy_checks.sources.load import load_inputs
from accuracy_checks.store import open_store
from accuracy_checks.store.archive import Archive, ArchiveError, Snapshot
from accuracy_checks.store.remote_archive import RemoteArchive, open_archive
from tests.dask.support import compare, local_cluster
from tests.support.project import EARLIER, Project, forecast_frame
from tests.support.s3 import finals, keys, s3_server

FIRST, SECOND = (f"{d:%Y-%m-%d}" for d in EARLIER)


@pytest.fixture(scope="module")
def s3_env() -> Iterator[str]:
    """The server and the standard AWS variables, set before the module's cluster starts
    (its worker processes inherit them)."""
    with s3_server("testing-secret") as endpoint:
        yield endpoint


@pytest.fixture(scope="module")
def cluster(s3_env: str) -> Iterator[str]:
    """The module's cluster, started once the AWS variables are set."""
    with local_cluster() as address:
        yield address


@pytest.fixture
def bucket(s3_env: str) -> str:
    name = f"b-{uuid.uuid4().hex[:12]}"
    boto3.client("s3").create_bucket(Bucket=name)
    return name


def s3_project(make_project: Callable[..., Project], bucket: str,
               tmp_path: Path) -> tuple[Project, Config]:
    """The small project, its earlier cycles only in the archive on the bucket."""
    project = make_project()
    text = project.config.read_text().replace("history: data/earlier.csv\n", "")
    text = text.replace("archive: archive\n", f"archive: s3://{bucket}/archive\n"
                        f"store: sqlite:///{tmp_path / 'audit.db'}\n")
    project.config.write_text(text)
    return project, load_config(project.config)


def _cycle(project: Project, config: Config, day: pd.Timestamp, cluster: str | None,
           **kwargs: object) -> object:
    path = project.write(f"f_{day:%Y%m%d}.csv", forecast_frame(day))
    return run_checks(config, forecast_path=path, engine="dask" if cluster else "pandas",
                      scheduler=cluster, **kwargs)  # type: ignore[arg-type]


def _parts_of(bucket: str, cycle: str) -> list[str]:
    return [k for k in finals(bucket) if k.startswith(f"cycle={cycle}/attempt-0001.parquet/")]


def test_dask_snapshots_on_s3_read_by_both_engines(
        make_project: Callable[..., Project], bucket: str, tmp_path: Path, cluster: str,
        monkeypatch: pytest.MonkeyPatch) -> None:
    project, config = s3_project(make_project, bucket, tmp_path)
    first = _cycle(project, config, EARLIER[0], cluster)
    assert getattr(first, "snapshot", "").endswith(f"cycle={FIRST}/attempt-0001.parquet")
    parts = _parts_of(bucket, FIRST)
    assert parts[0].endswith("/_parts.json") and len(parts) > 2  # the manifest, then parts
    assert [k for k in keys(bucket) if k.startswith(".incoming/")] == []
    # the second cycle (dask) reads the first from the bucket on its workers
    with monkeypatch.context() as m:
        for cls in (Archive, RemoteArchive):
            m.setattr(cls, "read", lambda *a, **k: pytest.fail("read on the client"))
        _cycle(project, config, EARLIER[1], cluster)
    assert _parts_of(bucket, SECOND)
    got_rows = open_archive(config.archive).read(Snapshot(FIRST, 1, ""))
    assert len(got_rows) == len(forecast_frame(EARLIER[0]))
    # the checked cycle: the pandas engine, then the dask engine reading on its workers
    expected = run_checks(config, engine="pandas", snapshot=False)
    with monkeypatch.context() as m:
        for cls in (Archive, RemoteArchive):
            m.setattr(cls, "read", lambda *a, **k: pytest.fail("read on the client"))
        got = run_checks(config, engine="dask", scheduler=cluster, snapshot=False)
    compare(expected, got)
    assert got.evaluated_cycles == [{"cycle": FIRST, "attempt": 1, "source": "archive"},
                                    {"cycle": SECOND, "attempt": 1, "source": "archive"}]
    assert not [r for r in got.results if r.check == "archive.snapshot"]


def test_upload_cut_after_the_commit_is_finished_by_the_next_run(
        make_project: Callable[..., Project], bucket: str, tmp_path: Path, cluster: str,
        monkeypatch: pytest.MonkeyPatch) -> None:
    """The publish fails after one part is copied: the run is recorded and says so; the
    half-copied prefix has no manifest, so no reader takes it for a snapshot (a read-only
    reader sees "recorded but missing"); the next run (pandas engine) finishes it from the
    claim and measures that cycle."""
    project, config = s3_project(make_project, bucket, tmp_path)
    real = RemoteArchive.publish_parts

    def cut(self: RemoteArchive, staged: str, parts: list[str], cycle: str,
            attempt: int) -> str:
        final = self._key(self._rel(cycle, attempt))
        self.fs.copy_file(self._key(f".incoming/{staged}/{parts[0]}"), f"{final}/{parts[0]}")
        raise ArchiveError("the bucket said no")

    said: list[str] = []
    with monkeypatch.context() as m:
        m.setattr(RemoteArchive, "publish_parts", cut)
        done = _cycle(project, config, EARLIER[0], cluster, progress=said.append)
    assert getattr(done, "attempt", None) == 1
    assert any("could not be written yet" in s and "next run" in s for s in said)
    half = _parts_of(bucket, FIRST)
    assert len(half) == 1 and "_parts.json" not in half[0]
    with open_store(config) as store:
        assert [(r["cycle"], r["attempt"]) for r in store.history()] == [(FIRST, 1)]
    inputs = load_inputs(config, archive=archived_cycles(config))
    assert [n.details["problem"] for n in inputs.notes
            if n.check == "archive.snapshot"] == ["missing"]
    assert RemoteArchive.publish_parts is real
    said.clear()
    later = _cycle(project, config, EARLIER[1], None, progress=said.append)
    assert any("wrote 1 snapshot(s) of recorded runs" in s for s in said)
    assert _parts_of(bucket, FIRST)[0].endswith("/_parts.json")
    assert {"cycle": FIRST, "attempt": 1, "source": "archive"} in getattr(
        later, "evaluated_cycles", [])
    assert [k for k in keys(bucket) if k.startswith(".incoming/")] == []
    got = open_archive(config.archive).read(Snapshot(FIRST, 1, ""))
    assert len(got) == len(forecast_frame(EARLIER[0]))


def test_a_failed_run_leaves_no_parts(make_project: Callable[..., Project], bucket: str,
                                      tmp_path: Path, cluster: str,
                                      monkeypatch: pytest.MonkeyPatch) -> None:
    """The store refuses the record: the staged parts and the claim are deleted, nothing is
    under a final name."""
    project, config = s3_project(make_project, bucket, tmp_path)

    def refused(self: RemoteParts, attempt: int, run_id: str = "") -> str:
        raise ArchiveError("the bucket said no")

    monkeypatch.setattr(RemoteParts, "place", refused)
    with pytest.raises(ArchiveError):
        _cycle(project, config, EARLIER[0], cluster)
    assert finals(bucket) == []
    assert [k for k in keys(bucket) if k.startswith(".incoming/")] == []


def test_parts_published_listed_and_retired_as_one_snapshot(bucket: str) -> None:
    """A snapshot of parts is listed once its manifest is there, read as one table, and
    moved aside whole (manifest first) when its number was never recorded."""
    frame = forecast_frame(EARLIER[0]).rename(columns={"units": "forecast"})
    staged = RemoteParts.start(f"s3://{bucket}/archive", EARLIER[0])
    staged.write_part(0, frame.iloc[:10])
    staged.write_part(1, frame.iloc[10:])
    archive = staged.archive
    assert archive.snapshots() == []
    assert staged.place(1, run_id="r1").endswith(f"cycle={FIRST}/attempt-0001.parquet")
    assert archive.snapshots() == []  # claimed, not published
    staged.publish()
    assert [(s.cycle, s.attempt) for s in archive.snapshots()] == [(FIRST, 1)]
    got = archive.read(archive.snapshots()[0])
    assert got["forecast"].tolist() == frame["forecast"].tolist()
    moved = archive.retire_unrecorded(FIRST, 1)
    assert len(moved) == 1 and ".orphans/" in moved[0]
    assert archive.snapshots() == [] and finals(bucket) == []
    assert sorted(k.rsplit("/", 1)[-1] for k in keys(bucket) if k.startswith(".orphans/")) \
        == ["_parts.json", "part-00000.parquet", "part-00001.parquet"]


def test_an_archive_in_memory_is_read_on_the_client_and_not_written(
        make_project: Callable[..., Project], tmp_path: Path, cluster: str) -> None:
    """``memory://`` lives in the client's process: the dask engine reads its cycles there
    (the same results) and refuses to write its snapshot there (exit 2, saying why)."""
    from accuracy_checks.errors import ConfigError

    project = make_project()
    name = f"m{uuid.uuid4().hex[:8]}"
    text = project.config.read_text().replace("history: data/earlier.csv\n", "")
    project.config.write_text(text.replace(
        "archive: archive\n", f"archive: memory://{name}/archive\n"
        f"store: sqlite:///{tmp_path / 'audit.db'}\n"))
    config = load_config(project.config)
    for day in EARLIER:
        _cycle(project, config, day, None)
    expected = run_checks(config, engine="pandas", snapshot=False)
    got = run_checks(config, engine="dask", scheduler=cluster, snapshot=False)
    compare(expected, got)
    assert len(got.evaluated_cycles) == 2
    with pytest.raises(ConfigError, match="memory of one process"):
        run_checks(config, engine="dask", scheduler=cluster)
