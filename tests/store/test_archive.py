"""Faults of the forecast archive: missing, damaged and unrecorded snapshots (a warning, the
cycle left out, never an older attempt in its place), and an archive that cannot be used
(exit 2 before the checks, nothing recorded, nothing archived, no half file).

Expected figures are recomputed here from the files with numpy (WAPE = 100·Σ|e|/Σ|y|,
e = actual − forecast, docs/measures.md).
"""

from __future__ import annotations

import json
import os
import shutil
import subprocess
from collections.abc import Callable, Iterator
from contextlib import contextmanager
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from accuracy_checks import load_config
from accuracy_checks.cli.main import main
from accuracy_checks.config import Config
from accuracy_checks.engine import archived_cycles, run_checks
from accuracy_checks.sources import frames as F
from accuracy_checks.sources.load import load_inputs
from accuracy_checks.store import archived_attempts, open_store
from accuracy_checks.store.archive import (
    Archive,
    ArchiveError,
    Snapshot,
    SnapshotUnreadable,
    write_snapshot,
)
from tests.support.project import CURRENT, EARLIER, Project, forecast_frame

FIRST, SECOND = (f"{d:%Y-%m-%d}" for d in EARLIER)


def run(project: Project, *args: str) -> int:
    return main(["run", "--config", str(project.config), "-q", "--no-color", *args])


def archive_only(make_project: Callable[..., Project]) -> tuple[Project, Config]:
    """The small project without history: earlier cycles come from the archive only. Cycle 1
    is run once; cycle 2 twice: attempt 1 badly biased (forecast = half the demand), attempt
    2 (its last) good, so a fallback to attempt 1 would change every figure."""
    project = make_project()
    project.config.write_text(project.config.read_text().replace("history: data/earlier.csv\n",
                                                                 ""))
    config = load_config(project.config)
    for name, frame in (("f1.csv", forecast_frame(EARLIER[0])),
                        ("f2_bad.csv", forecast_frame(EARLIER[1], bias=0.5)),
                        ("f2.csv", forecast_frame(EARLIER[1]))):
        run_checks(config, forecast_path=project.write(name, frame))
    return project, config


def snapshot_path(config: Config, cycle: str, attempt: int) -> Path:
    return config.archive / f"cycle={cycle}" / f"attempt-{attempt:04d}.parquet"


def final_snapshots(config: Config) -> list[str]:
    """Snapshots under their final names (not staged, not moved aside)."""
    return sorted(p.relative_to(config.archive).as_posix()
                  for p in config.archive.glob("cycle=*/attempt-*.parquet"))


def wape_of_cycles(project: Project, frames: list[pd.DataFrame]) -> float:
    """WAPE of the lag-1 rows (period = issue date) of ``frames`` against the actuals."""
    earlier = pd.concat(frames, ignore_index=True)
    rows = earlier[earlier["week"] == earlier["issued_on"]]
    j = rows.merge(pd.read_csv(project.data / "actuals.csv"), on=["store", "product", "week"])
    y, f = j["units_sold"].to_numpy(), j["units"].to_numpy()
    return float(100 * np.abs(y - f).sum() / np.abs(y).sum())


def runs_recorded(config: Config) -> int:
    with open_store(config) as store:
        return len(store.history())


# ----------------------------------------------------------------------- low level: archive


def test_last_recorded_takes_the_store_attempt_never_an_older_file(tmp_path: Path) -> None:
    archive = Archive(tmp_path / "archive")
    for cycle, attempt in ((FIRST, 1), (SECOND, 1), (SECOND, 2), ("2026-01-05", 1)):
        archive.path_of(cycle, attempt).parent.mkdir(parents=True, exist_ok=True)
        archive.path_of(cycle, attempt).write_bytes(b"")
    archive.path_of(SECOND, 2).unlink()  # the recorded last attempt of SECOND is gone
    found, faults = archive.last_recorded({FIRST: 1, SECOND: 2, "2026-03-09": 1},
                                          before=CURRENT)
    assert [(s.cycle, s.attempt) for s in found] == [(FIRST, 1)]  # not (SECOND, 1)
    assert {(f.cycle, f.snapshot.attempt, f.problem) for f in faults} == {
        (SECOND, 2, "missing"),          # recorded, file missing: not replaced by attempt 1
        ("2026-01-05", 1, "unrecorded"),  # on disk, no record of the cycle
    }  # 2026-03-09 is not before CURRENT: not looked at
    missing = next(f for f in faults if f.problem == "missing")
    assert missing.snapshot.path == archive.path_of(SECOND, 2)
    assert "attempt 2 of cycle 2026-02-23" in missing.describe()
    # without a store the folder is all there is, as before
    found, faults = archive.last_recorded(None, before=CURRENT)
    assert [(s.cycle, s.attempt) for s in found] == [("2026-01-05", 1), (FIRST, 1), (SECOND, 1)]
    assert faults == []


def test_read_names_what_is_wrong_with_a_snapshot(tmp_path: Path) -> None:
    archive = Archive(tmp_path)
    snap = Snapshot(FIRST, 1, archive.path_of(FIRST, 1))
    with pytest.raises(SnapshotUnreadable, match="missing"):
        archive.read(snap)
    snap.path.parent.mkdir(parents=True)
    snap.path.write_bytes(b"PAR1 this is not a parquet file")
    with pytest.raises(SnapshotUnreadable, match="not a readable Parquet file"):
        archive.read(snap)
    pd.DataFrame({"x": [1]}).to_parquet(snap.path)
    with pytest.raises(SnapshotUnreadable, match=r"lacks the column\(s\) store, period"):
        archive.read(snap, ["store", F.PERIOD])
    frame = archive.read(snap)
    assert frame[F.ATTEMPT].tolist() == [1] and frame[F.SOURCE].tolist() == ["archive"]


def test_store_knows_the_last_attempt_with_a_snapshot(
        make_project: Callable[..., Project]) -> None:
    """A dry run takes an attempt number but writes no snapshot: the cycle's last snapshot
    stays the attempt before it."""
    project, config = archive_only(make_project)
    run_checks(config, forecast_path=project.data / "f2.csv", snapshot=False)  # attempt 3
    assert archived_attempts(config) == {FIRST: 1, SECOND: 2}
    with open_store(config) as store:
        assert store.archived_attempts() == {FIRST: 1, SECOND: 2}
        assert [r["attempt"] for r in store.history(cycle=SECOND)] == [1, 2, 3]
    (config.archive.parent / "audit.db").unlink()
    assert archived_attempts(config) is None  # no store yet


def test_check_usable_refuses_a_file_and_creates_nothing(tmp_path: Path) -> None:
    blocker = tmp_path / "archive"
    blocker.write_text("not a folder")
    with pytest.raises(ArchiveError, match=f"archive path {blocker} is a file"):
        Archive(blocker).check_usable(write=False)
    with pytest.raises(ArchiveError, match=f"the path {blocker} is a file"):
        Archive(blocker / "deeper" / "archive").check_usable()
    Archive(tmp_path / "new" / "archive").check_usable()
    assert sorted(p.name for p in tmp_path.iterdir()) == ["archive"]  # nothing created


@contextmanager
def unwritable(folder: Path) -> Iterator[None]:
    """Make ``folder`` unwritable, also for root (which ignores permission bits): chmod for
    other users, the immutable attribute (chattr +i) for root."""
    if os.geteuid() != 0:
        folder.chmod(0o500)
        try:
            yield
        finally:
            folder.chmod(0o700)
        return
    if shutil.which("chattr") is None:
        pytest.skip("running as root without chattr: no way to make a folder unwritable")
    done = subprocess.run(["chattr", "+i", str(folder)], capture_output=True, check=False)
    if done.returncode != 0:
        pytest.skip(f"running as root and chattr +i fails here: {done.stderr.decode().strip()}")
    try:
        yield
    finally:
        subprocess.run(["chattr", "-i", str(folder)], check=True)


def test_check_usable_refuses_an_unwritable_folder(tmp_path: Path) -> None:
    root = tmp_path / "archive"
    root.mkdir()
    with unwritable(root):
        with pytest.raises(ArchiveError, match=f"archive folder {root} cannot be written"):
            Archive(root).check_usable()
        Archive(root).check_usable(write=False)  # reading is fine (a dry run)
        assert list(root.iterdir()) == []


def test_snapshot_holds_the_table_to_parquet_writes_with_cheaper_settings(
        tmp_path: Path) -> None:
    # the archive reader (and any other) must see what frame.to_parquet(index=False) gives
    import pyarrow.parquet as pq

    keys = pd.Categorical(["S1", "S2", None, "S1"])
    frame = pd.DataFrame({
        "store": keys, "period": pd.to_datetime(["2026-03-02", "2026-03-09", None, "2026-03-02"]),
        "issued": pd.Timestamp("2026-02-27"), "forecast": [1.5, np.nan, np.inf, -2.0],
        "q0.9": [2.0, 3.0, 4.0, 5.0], "segment": pd.Categorical(["a", "b", "a", None]),
    }, index=[7, 8, 9, 10])
    frame.to_parquet(tmp_path / "pandas.parquet", index=False)
    write_snapshot(frame, str(tmp_path / "snapshot.parquet"))
    ours, theirs = (pq.read_table(tmp_path / f"{name}.parquet") for name in ("snapshot", "pandas"))
    assert ours.schema.equals(theirs.schema, check_metadata=True)
    pd.testing.assert_frame_equal(pd.read_parquet(tmp_path / "snapshot.parquet"),
                                  pd.read_parquet(tmp_path / "pandas.parquet"))
    meta = pq.ParquetFile(tmp_path / "snapshot.parquet").metadata.row_group(0)
    chunks = {meta.column(i).path_in_schema: meta.column(i) for i in range(meta.num_columns)}
    assert {c for c, m in chunks.items() if m.compression == "UNCOMPRESSED"} == {"forecast",
                                                                                 "q0.9"}
    assert {c for c, m in chunks.items() if m.is_stats_set} == {"period", "issued"}
    assert not any("DICTIONARY" in str(m.encodings) for m in (chunks["forecast"],
                                                              chunks["q0.9"]))


def test_stage_that_fails_half_way_leaves_no_file(tmp_path: Path,
                                                   monkeypatch: pytest.MonkeyPatch) -> None:
    import pyarrow.parquet as pq

    def half_then_disk_full(table: object, path: str, **_: object) -> None:
        Path(path).write_bytes(b"PAR1 half a file")
        raise OSError(28, "No space left on device", str(path))

    monkeypatch.setattr(pq, "write_table", half_then_disk_full)
    archive = Archive(tmp_path / "archive")
    with pytest.raises(ArchiveError, match="No space left on device"):
        archive.stage(pd.DataFrame({"x": [1.0]}), CURRENT)
    assert [p for p in archive.root.rglob("*") if p.is_file()] == []


def test_stage_sweeps_stale_debris_files_and_folders(tmp_path: Path) -> None:
    """Debris of runs killed over an hour ago is removed when the next run stages: a file,
    and a folder of parts (what the dask engine's workers stage); fresh debris is kept."""
    archive = Archive(tmp_path / "archive")
    incoming = archive.root / ".incoming"
    old_dir = incoming / "killed-dask-run.parquet"
    old_dir.mkdir(parents=True)
    (old_dir / "part-0.parquet").write_bytes(b"PAR1")
    old_file = incoming / "killed-run.parquet"
    old_file.write_bytes(b"PAR1")
    fresh = incoming / "running.parquet"
    fresh.write_bytes(b"PAR1")
    two_hours_ago = os.stat(old_file).st_mtime - 7200
    for p in (old_dir, old_file):
        os.utime(p, (two_hours_ago, two_hours_ago))
    staged = archive.stage(pd.DataFrame({"x": [1.0]}), CURRENT)
    assert not old_dir.exists() and not old_file.exists()
    assert fresh.exists() and staged.path.exists()


# ---------------------------------------------------------------- engine: load_inputs notes


def test_load_inputs_leaves_out_a_cycle_whose_snapshot_is_missing(
        make_project: Callable[..., Project]) -> None:
    _project, config = archive_only(make_project)
    snapshot_path(config, SECOND, 2).unlink()
    inputs = load_inputs(config, archive=archived_cycles(config))
    assert set(inputs.earlier[F.ISSUED].unique()) == {EARLIER[0]}  # SECOND is not attempt 1
    [note, count] = inputs.notes
    assert note.check == "archive.snapshot" and note.status == "warn"
    assert note.details == {"cycle": SECOND, "attempt": 2, "problem": "missing",
                            "path": str(snapshot_path(config, SECOND, 2))}
    assert "series count is not compared with an older cycle" in note.message
    # the series count is not compared with FIRST in SECOND's place
    assert inputs.previous is None
    assert count.check == "coverage.series_count" and count.status == "skipped"
    assert SECOND in count.message
    # without a store, the folder as it is: SECOND's highest file, attempt 1
    inputs = load_inputs(config, archive=archived_cycles(config, recorded=None))
    assert inputs.notes == [] and inputs.previous_label == f"{SECOND} (attempt 1)"


# ------------------------------------------------------------------------------ CLI: reads


def test_missing_last_attempt_is_a_warning_never_an_older_attempt(
        make_project: Callable[..., Project], capsys: pytest.CaptureFixture[str]) -> None:
    project, config = archive_only(make_project)
    lost = snapshot_path(config, SECOND, 2)
    lost.unlink()
    capsys.readouterr()
    out = project.root / "r.json"
    assert run(project, "--json", str(out), "--fail-on", "warn") == 1
    console = capsys.readouterr().out
    assert "archive.snapshot" in console and "Traceback" not in console
    doc = json.loads(out.read_text())
    assert doc["status"] == "warn"
    assert doc["evaluated_cycles"] == [{"cycle": FIRST, "attempt": 1, "source": "archive"}]
    [warning] = [r for r in doc["results"] if r["check"] == "archive.snapshot"]
    assert f"Cycle {SECOND} is left out of the evaluation" in warning["message"]
    assert "attempt 2" in warning["message"] and str(lost) in warning["message"]
    # the figures are those of FIRST alone (attempt 1 of SECOND, half the demand, would
    # make WAPE about 50 %)
    wape = next(r for r in doc["results"] if r["check"] == "accuracy" and r["segment"] == "*"
                and r["measure"] == "wape")
    want = wape_of_cycles(project, [forecast_frame(EARLIER[0])])
    assert wape["value"] == pytest.approx(want, rel=1e-12) and wape["n_obs"] == 6
    [count] = [r for r in doc["results"] if r["check"] == "coverage.series_count"]
    assert count["status"] == "skipped" and SECOND in count["message"]
    # the run itself is recorded and archived as usual (a warning is a result)
    assert runs_recorded(config) == 4  # 3 earlier runs and this one
    assert snapshot_path(config, "2026-03-02", 1).exists()


def test_damaged_snapshot_is_a_warning_not_a_crash(
        make_project: Callable[..., Project], capsys: pytest.CaptureFixture[str]) -> None:
    project, config = archive_only(make_project)
    damaged = snapshot_path(config, FIRST, 1)
    damaged.write_bytes(damaged.read_bytes()[:100])  # cut short, as by a full disk
    out = project.root / "r.json"
    assert run(project, "--json", str(out)) == 0
    err = capsys.readouterr().err
    assert "internal error" not in err
    doc = json.loads(out.read_text())
    [warning] = [r for r in doc["results"] if r["check"] == "archive.snapshot"]
    assert warning["status"] == "warn" and warning["details"]["problem"] == "unreadable"
    assert f"the snapshot of cycle {FIRST}, attempt 1 ({damaged}) cannot be read" in \
        warning["message"]
    assert doc["evaluated_cycles"] == [{"cycle": SECOND, "attempt": 2, "source": "archive"}]
    wape = next(r for r in doc["results"] if r["check"] == "accuracy" and r["segment"] == "*"
                and r["measure"] == "wape")
    assert wape["value"] == pytest.approx(
        wape_of_cycles(project, [forecast_frame(EARLIER[1])]), rel=1e-12)
    # an older cycle's fault does not touch the series count: SECOND is the previous cycle
    [count] = [r for r in doc["results"] if r["check"] == "coverage.series_count"]
    assert count["status"] == "pass" and SECOND in count["message"]


def test_unrecorded_snapshot_of_a_cycle_is_left_out(
        make_project: Callable[..., Project], capsys: pytest.CaptureFixture[str]) -> None:
    """A file of a cycle the store has no run of (a run killed before its first record
    committed) is not measured: the store decides what the archive holds."""
    project, config = archive_only(make_project)
    stray = snapshot_path(config, "2026-02-09", 1)
    stray.parent.mkdir()
    pd.read_parquet(snapshot_path(config, FIRST, 1)).assign(
        issued=pd.Timestamp("2026-02-09")).to_parquet(stray)
    out = project.root / "r.json"
    assert run(project, "--json", str(out)) == 0
    doc = json.loads(out.read_text())
    [warning] = [r for r in doc["results"] if r["check"] == "archive.snapshot"]
    assert warning["details"]["problem"] == "unrecorded" and str(stray) in warning["message"]
    assert [c["cycle"] for c in doc["evaluated_cycles"]] == [FIRST, SECOND]


def test_no_store_yet_reads_the_archive_folder_as_before(
        make_project: Callable[..., Project]) -> None:
    _project, config = archive_only(make_project)
    (config.archive.parent / "audit.db").unlink()
    report = run_checks(config, snapshot=False)
    assert not [r for r in report.results if r.check == "archive.snapshot"]
    assert report.evaluated_cycles == [{"cycle": FIRST, "attempt": 1, "source": "archive"},
                                       {"cycle": SECOND, "attempt": 2, "source": "archive"}]


# ----------------------------------------------------------------------- CLI: exit 2 faults


def refused(project: Project, capsys: pytest.CaptureFixture[str], *args: str) -> str:
    code = run(project, *args)
    err = capsys.readouterr().err
    assert code == 2, err
    assert "Traceback" not in err and "internal error" not in err
    return err


def test_archive_path_that_is_a_file_exits_2_before_the_checks(
        make_project: Callable[..., Project], capsys: pytest.CaptureFixture[str]) -> None:
    project = make_project()
    (project.root / "archive").write_text("a file where the archive folder should be")
    err = refused(project, capsys)
    assert f"The archive path {project.root / 'archive'} is a file" in err
    assert "`archive:`" in err
    assert refused(project, capsys, "--no-snapshot")  # reading needs the folder too
    # nothing recorded: the store was not even created
    assert not (project.root / "audit.db").exists()


def test_unwritable_archive_exits_2_and_records_nothing(
        make_project: Callable[..., Project], capsys: pytest.CaptureFixture[str]) -> None:
    project = make_project()
    assert run(project) == 0
    config = load_config(project.config)
    before = final_snapshots(config)
    with unwritable(config.archive):
        err = refused(project, capsys)
        assert f"The archive folder {config.archive} cannot be written" in err
        assert final_snapshots(config) == before
    assert runs_recorded(config) == 1


@pytest.mark.parametrize("fails", ["stage", "place"])
def test_archive_write_failing_half_way_leaves_no_file_and_no_record(
        make_project: Callable[..., Project], capsys: pytest.CaptureFixture[str],
        monkeypatch: pytest.MonkeyPatch, fails: str) -> None:
    """The disk fills up while the snapshot is written, or the rename into place is refused:
    exit 2 naming the archive, no record, no file under a final name, nothing staged."""
    project = make_project()
    assert run(project) == 0
    config = load_config(project.config)
    before = final_snapshots(config)
    if fails == "stage":
        import pyarrow.parquet as pq

        def half_then_disk_full(table: object, path: str, **_: object) -> None:
            Path(path).write_bytes(b"PAR1 half a file")
            raise OSError(28, "No space left on device", str(path))

        monkeypatch.setattr(pq, "write_table", half_then_disk_full)
    else:
        import accuracy_checks.store.archive as archive_module

        real = os.replace

        def refuse_into_cycle(src: str | Path, dst: str | Path) -> None:
            if Path(dst).name.startswith("attempt-"):
                raise PermissionError(13, "Permission denied", str(dst))
            real(src, dst)

        monkeypatch.setattr(archive_module.os, "replace", refuse_into_cycle)
    err = refused(project, capsys)
    assert f"could not be archived under {config.archive}" in err
    assert "Nothing was recorded" in err
    monkeypatch.undo()
    assert final_snapshots(config) == before
    assert list((config.archive / ".incoming").iterdir()) == []
    assert runs_recorded(config) == 1
