"""The archive on object storage: an S3-compatible server on loopback (moto's server), reached
over HTTP by pyarrow's S3 filesystem with only the standard AWS variables.

The promise is the disk's: two cycles give the same results as with a local archive (the second
measured from the first's snapshot); no half object under a final name; a run killed before
its commit leaves no record and no final object; a run killed between its commit and the
upload is finished by the next run; no secret in any output. Expected figures: the same run
on a local archive (itself recomputed with numpy in tests/store/test_archive.py).
"""

from __future__ import annotations

import json
import uuid
from collections.abc import Callable, Iterator
from pathlib import Path
from typing import Any

import boto3
import pandas as pd
import pytest

from accuracy_checks import load_config
from accuracy_checks.config import Config
from accuracy_checks.engine import archived_cycles, run_checks
from accuracy_checks.sources import frames as F
from accuracy_checks.sources.load import load_inputs
from accuracy_checks.store import open_store
from accuracy_checks.store import remote_archive as R
from accuracy_checks.store.archive import Archive, ArchiveError, Snapshot, SnapshotUnreadable
from accuracy_checks.store.remote_archive import RemoteArchive, RemoteStaged, open_archive
from tests.support.cli import run
from tests.support.project import CURRENT, EARLIER, Project, forecast_frame
from tests.support.s3 import finals, keys, s3_server
from tests.support.store import pg_password

FIRST, SECOND, THIS = (f"{d:%Y-%m-%d}" for d in (*EARLIER, CURRENT))
SECRET = "wJalrXUtnFEMI-K7MDENG-bPxRfiCYzz9"  # the moto server accepts any key pair


@pytest.fixture(scope="module")
def s3_endpoint() -> Iterator[str]:
    """The server, and the standard AWS variables pointing every client at it."""
    with s3_server(SECRET) as endpoint:
        yield endpoint


@pytest.fixture
def bucket(s3_endpoint: str) -> str:
    """A new empty bucket."""
    name = f"b-{uuid.uuid4().hex[:12]}"
    boto3.client("s3").create_bucket(Bucket=name)
    return name


def point_at(project: Project, archive: str, store: str) -> Config:
    text = project.config.read_text()
    text = text.replace("history: data/earlier.csv\n", "")
    text = text.replace("archive: archive\n", f"archive: {archive}\nstore: {store}\n")
    project.config.write_text(text)
    return load_config(project.config)


def run_cycles(project: Project, config: Config) -> None:
    """Cycle 1 once; cycle 2 twice: attempt 1 badly biased, attempt 2 (its last) good."""
    for name, frame in (("f1.csv", forecast_frame(EARLIER[0])),
                        ("f2_bad.csv", forecast_frame(EARLIER[1], bias=0.5)),
                        ("f2.csv", forecast_frame(EARLIER[1]))):
        run_checks(config, forecast_path=project.write(name, frame))


def figures(doc: dict[str, Any]) -> list[tuple[Any, ...]]:
    """What a run found, without where the archive is."""
    return [(r["check"], r["status"], r.get("segment"), r.get("lag"), r.get("measure"),
             r.get("value"), r.get("n_obs"), r.get("count")) for r in doc["results"]]


def local_twin(make_project: Callable[..., Project], tmp_path: Path) -> dict[str, Any]:
    """The same cycles with a local archive: the JSON of the current cycle's run."""
    project = make_project()
    config = point_at(project, str(tmp_path / "local-archive"),
                      f"sqlite:///{tmp_path / 'local-audit.db'}")
    run_cycles(project, config)
    out = tmp_path / "local.json"
    assert run(project, "--json", str(out)) == 0
    return dict(json.loads(out.read_text()))


# ------------------------------------------------------------------------ the whole run


def test_cycles_on_s3_give_the_local_results(
        make_project: Callable[..., Project], bucket: str, store_url: str,
        tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    want = local_twin(make_project, tmp_path / "twin")
    project = make_project()
    config = point_at(project, f"s3://{bucket}/archive", store_url)
    run_cycles(project, config)
    out = tmp_path / "s3.json"
    assert run(project, "--json", str(out)) == 0
    got = json.loads(out.read_text())
    assert figures(got) == figures(want)
    # the earlier cycles were measured from their snapshots, attempt 2 of SECOND (not 1)
    assert got["evaluated_cycles"] == [{"cycle": FIRST, "attempt": 1, "source": "archive"},
                                       {"cycle": SECOND, "attempt": 2, "source": "archive"}]
    assert finals(bucket) == [f"cycle={FIRST}/attempt-0001.parquet",
                              f"cycle={SECOND}/attempt-0001.parquet",
                              f"cycle={SECOND}/attempt-0002.parquet",
                              f"cycle={THIS}/attempt-0001.parquet"]
    assert [k for k in keys(bucket) if not k.startswith("cycle=")] == []  # nothing staged
    with open_store(store_url) as store:
        [last] = store.history(cycle=THIS)
    assert last["snapshot"] == f"s3://{bucket}/archive/cycle={THIS}/attempt-0001.parquet"
    assert got["snapshot"] == last["snapshot"]
    # the snapshot is the forecast as checked
    frame = open_archive(config.archive).read(Snapshot(THIS, 1, ""))
    assert len(frame) == len(forecast_frame(CURRENT)) and set(frame[F.SOURCE]) == {"archive"}
    capsys.readouterr()


# ------------------------------------------------------------------------- killed runs


def s3_project(make_project: Callable[..., Project], bucket: str,
               tmp_path: Path) -> tuple[Project, Config]:
    project = make_project()
    return project, point_at(project, f"s3://{bucket}/archive",
                             f"sqlite:///{tmp_path / 'audit.db'}")


def test_killed_before_the_commit_leaves_no_record_and_no_final_object(
        make_project: Callable[..., Project], bucket: str, tmp_path: Path,
        monkeypatch: pytest.MonkeyPatch) -> None:
    """Killed inside the transaction, after staging (no clean-up runs, as under SIGKILL):
    no record, no object under a final name; the debris is swept once it is old."""
    project, config = s3_project(make_project, bucket, tmp_path)
    run_checks(config, forecast_path=project.write("f1.csv", forecast_frame(EARLIER[0])))

    place = RemoteStaged.place

    def claimed_then_killed(self: RemoteStaged, attempt: int, run_id: str = "") -> str:
        place(self, attempt, run_id)
        raise KeyboardInterrupt

    with monkeypatch.context() as m, pytest.raises(KeyboardInterrupt):
        m.setattr(RemoteStaged, "place", claimed_then_killed)
        m.setattr(RemoteStaged, "discard", lambda self: None)  # no clean-up on a kill
        run_checks(config, forecast_path=project.write("f2.csv", forecast_frame(EARLIER[1])))
    assert finals(bucket) == [f"cycle={FIRST}/attempt-0001.parquet"]
    debris = [k for k in keys(bucket) if k.startswith(".incoming/")]
    assert len(debris) == 2 and {Path(k).suffix for k in debris} == {".parquet", ".claim"}
    with open_store(config) as store:
        assert [r["cycle"] for r in store.history()] == [FIRST]
    # the next run of the cycle takes the number the killed run never recorded; the claim of
    # the killed run is not finished (no record of it), and it is swept once old
    monkeypatch.setattr(R, "_STALE_SECONDS", -60)
    report = run_checks(config, forecast_path=project.data / "f2.csv")
    assert report.attempt == 1
    assert finals(bucket) == [f"cycle={FIRST}/attempt-0001.parquet",
                              f"cycle={SECOND}/attempt-0001.parquet"]
    assert [k for k in keys(bucket) if k.startswith(".incoming/")] == []


def _kill() -> None:
    raise KeyboardInterrupt


def test_killed_between_commit_and_upload_is_finished_by_the_next_run(
        make_project: Callable[..., Project], bucket: str, tmp_path: Path,
        monkeypatch: pytest.MonkeyPatch, capsys: pytest.CaptureFixture[str]) -> None:
    project, config = s3_project(make_project, bucket, tmp_path)
    run_checks(config, forecast_path=project.write("f1.csv", forecast_frame(EARLIER[0])))
    with monkeypatch.context() as m, pytest.raises(KeyboardInterrupt):
        m.setattr(RemoteStaged, "publish", lambda self: _kill())
        run_checks(config, forecast_path=project.write("f2.csv", forecast_frame(EARLIER[1])))
    # recorded, but no final object yet: never a half one
    with open_store(config) as store:
        assert [(r["cycle"], r["attempt"]) for r in store.history()] == [(FIRST, 1), (SECOND, 1)]
    assert finals(bucket) == [f"cycle={FIRST}/attempt-0001.parquet"]
    # a reader that does not finish uploads (read-only) sees "recorded but missing"
    inputs = load_inputs(config, archive=archived_cycles(config))
    assert [(n.check, n.details["problem"]) for n in inputs.notes
            if n.check == "archive.snapshot"] == [("archive.snapshot", "missing")]
    # the next run finishes the upload from the staged copy before it reads the archive
    out = tmp_path / "r.json"
    capsys.readouterr()
    assert main_run(project, "--json", str(out)) == 0
    assert "wrote 1 snapshot(s) of recorded runs" in capsys.readouterr().err
    doc = json.loads(out.read_text())
    assert not [r for r in doc["results"] if r["check"] == "archive.snapshot"]
    assert doc["evaluated_cycles"] == [{"cycle": FIRST, "attempt": 1, "source": "archive"},
                                       {"cycle": SECOND, "attempt": 1, "source": "archive"}]
    assert finals(bucket) == [f"cycle={FIRST}/attempt-0001.parquet",
                              f"cycle={SECOND}/attempt-0001.parquet",
                              f"cycle={THIS}/attempt-0001.parquet"]
    assert [k for k in keys(bucket) if k.startswith(".incoming/")] == []
    got = open_archive(config.archive).read(Snapshot(SECOND, 1, ""))
    assert len(got) == len(forecast_frame(EARLIER[1]))


def main_run(project: Project, *args: str) -> int:
    """The CLI without -q, so its progress lines (stderr) can be read."""
    from accuracy_checks.cli.main import main

    return main(["run", "--config", str(project.config), "--no-color", *args])


def test_upload_failing_after_the_commit_keeps_the_record_and_says_so(
        make_project: Callable[..., Project], bucket: str, tmp_path: Path,
        monkeypatch: pytest.MonkeyPatch) -> None:
    project, config = s3_project(make_project, bucket, tmp_path)
    said: list[str] = []

    def refused(self: RemoteStaged) -> None:
        raise ArchiveError("the bucket said no")

    monkeypatch.setattr(RemoteStaged, "publish", refused)
    report = run_checks(config, forecast_path=project.write("f1.csv",
                                                            forecast_frame(EARLIER[0])),
                        progress=said.append)
    assert report.attempt == 1 and finals(bucket) == []
    assert any("could not be written yet" in s and "next run" in s for s in said)


# ------------------------------------------------------------------------------ secrets


def test_no_secret_in_output_json_or_the_record(
        make_project: Callable[..., Project], bucket: str, tmp_path: Path,
        monkeypatch: pytest.MonkeyPatch, capsys: pytest.CaptureFixture[str]) -> None:
    """The key pair in the URL (from ${NAME}) and in the environment: shown nowhere."""
    monkeypatch.setenv("ARCHIVE_SECRET", SECRET)
    monkeypatch.setenv("ARCHIVE_BUCKET", bucket)
    project = make_project()
    store = f"sqlite:///{tmp_path / 'audit.db'}"
    point_at(project, "s3://testing:${ARCHIVE_SECRET}@${ARCHIVE_BUCKET}/archive", store)
    out = tmp_path / "r.json"
    capsys.readouterr()
    assert main_run(project, "--json", str(out)) == 0
    assert finals(bucket) == [f"cycle={THIS}/attempt-0001.parquet"]
    seen = capsys.readouterr()
    with open_store(store) as st:
        record = json.dumps(st.history(), default=str) + json.dumps(
            st.results_of(st.history()[0]["run_id"]), default=str)
    shown = "\n".join([seen.out, seen.err, out.read_text(), record])
    assert SECRET not in shown
    assert "s3://testing:***@${ARCHIVE_BUCKET}/archive/cycle=" in shown
    secret = pg_password()
    assert secret is None or secret not in shown
    # a failure names the archive, masked, without the secret either
    monkeypatch.setenv("ARCHIVE_BUCKET", f"no-{bucket}")
    assert run(project) == 2
    err = capsys.readouterr().err
    assert "Traceback" not in err and SECRET not in err
    assert "s3://testing:***@${ARCHIVE_BUCKET}/archive" in err


def test_missing_bucket_exits_2_before_the_checks(
        make_project: Callable[..., Project], bucket: str, tmp_path: Path,
        capsys: pytest.CaptureFixture[str]) -> None:
    project = make_project()
    point_at(project, f"s3://{bucket}-gone/archive", f"sqlite:///{tmp_path / 'audit.db'}")
    assert run(project) == 2
    err = capsys.readouterr().err
    assert f"The archive s3://{bucket}-gone/archive cannot be" in err
    assert "Traceback" not in err and SECRET not in err
    assert not (tmp_path / "audit.db").exists()


def test_url_archive_without_a_store_is_a_config_error(
        make_project: Callable[..., Project], capsys: pytest.CaptureFixture[str]) -> None:
    project = make_project()
    text = project.config.read_text().replace("archive: archive\n",
                                              "archive: s3://bucket/archive\n")
    project.config.write_text(text)
    assert run(project) == 2
    err = capsys.readouterr().err
    assert "`archive`" in err and "set `store:`" in err and "Traceback" not in err


# --------------------------------------------------------------- low level: memory://


@pytest.fixture
def memory_archive() -> RemoteArchive:
    archive = open_archive(f"memory://archive-{uuid.uuid4().hex[:8]}/archive")
    assert isinstance(archive, RemoteArchive)
    return archive


def test_open_archive_picks_the_kind(tmp_path: Path) -> None:
    assert type(open_archive(tmp_path)) is Archive
    assert open_archive(f"file://{tmp_path}").root == tmp_path  # type: ignore[union-attr]
    assert isinstance(open_archive("s3://bucket/archive"), RemoteArchive)


def test_remote_last_recorded_and_retire_as_on_disk(memory_archive: RemoteArchive) -> None:
    a = memory_archive
    frame = forecast_frame(EARLIER[0]).rename(columns={"week": F.PERIOD})
    for cycle, attempt in ((FIRST, 1), (SECOND, 1), (SECOND, 2), ("2026-01-05", 1)):
        staged = a.stage(frame, pd.Timestamp(cycle))
        staged.place(attempt, run_id="r")
        staged.publish()
    assert [k for k in a.fs.get_file_info(
        R_selector(a, ".incoming")) if k.type.name == "File"] == []
    a.fs.delete_file(f"{a.base}/cycle={SECOND}/attempt-0002.parquet")
    found, faults = a.last_recorded({FIRST: 1, SECOND: 2}, before=CURRENT)
    assert [(s.cycle, s.attempt) for s in found] == [(FIRST, 1)]  # not (SECOND, 1)
    assert {(f.cycle, f.snapshot.attempt, f.problem) for f in faults} == {
        (SECOND, 2, "missing"), ("2026-01-05", 1, "unrecorded")}
    assert found[0].path == f"{a.location}/cycle={FIRST}/attempt-0001.parquet"
    assert len(a.read(found[0], ["store"])) == len(frame)
    with pytest.raises(SnapshotUnreadable, match="missing"):
        a.read(Snapshot(SECOND, 2, ""))
    moved = a.retire_unrecorded(SECOND, 1)
    assert len(moved) == 1 and "/.orphans/cycle=" in str(moved[0])
    assert [(s.cycle, s.attempt) for s in a.snapshots()] == [("2026-01-05", 1), (FIRST, 1)]


def R_selector(a: RemoteArchive, rel: str) -> Any:
    import pyarrow.fs as pafs

    return pafs.FileSelector(f"{a.base}/{rel}", recursive=True, allow_not_found=True)


def test_remote_stage_failing_half_way_leaves_nothing(
        memory_archive: RemoteArchive, monkeypatch: pytest.MonkeyPatch) -> None:
    import pyarrow.parquet as pq

    def half_then_fail(table: Any, where: Any, **_: object) -> None:
        where.write(b"PAR1 half")
        raise OSError("connection reset by peer")

    monkeypatch.setattr(pq, "write_table", half_then_fail)
    with pytest.raises(ArchiveError, match="connection reset by peer"):
        memory_archive.stage(pd.DataFrame({"x": [1.0]}), CURRENT)
    assert memory_archive.snapshots() == []
    assert [i for i in memory_archive.fs.get_file_info(R_selector(memory_archive, ""))
            if i.type.name == "File"] == []


def test_check_usable_refuses_an_object_in_place_of_a_prefix(
        memory_archive: RemoteArchive) -> None:
    with memory_archive.fs.open_output_stream(memory_archive.base) as out:
        out.write(b"not a prefix")
    with pytest.raises(ArchiveError, match="names an object, not a prefix"):
        memory_archive.check_usable(write=False)


def test_record_run_says_where_unrecorded_remote_snapshots_went(
        memory_archive: RemoteArchive, tmp_path: Path) -> None:
    """A snapshot left on object storage by an interrupted run is moved aside when its
    number is given to a new run, and the progress line names the folder (a URL prefix)."""
    from accuracy_checks.results import RunReport

    frame = forecast_frame(EARLIER[0]).rename(columns={"week": F.PERIOD})
    staged = memory_archive.stage(frame, pd.Timestamp(FIRST))
    staged.place(1, run_id="interrupted")
    staged.publish()  # a final object the store never recorded
    said: list[str] = []
    report = RunReport(run_id="r1", cycle=FIRST, attempt=None, results=[],
                       started_at="2026-03-02T06:00:00+00:00",
                       finished_at="2026-03-02T06:01:00+00:00")
    with open_store(f"sqlite:///{tmp_path / 'audit.db'}") as store:
        store.record_run(report, archive=memory_archive.location, progress=said.append)
    assert report.attempt == 1
    assert len(said) == 1 and said[0].startswith(f"moved 1 unrecorded snapshot(s) of cycle {FIRST}")
    assert said[0].endswith(f"to {memory_archive.location}/.orphans/cycle={FIRST}")
