"""Nothing lost: 16 processes recording at once, and runs SIGKILLed while writing, on SQLite
and PostgreSQL. Each child is a separate Python process using the public store API."""

from __future__ import annotations

import os
import random
import signal
import subprocess
import sys
import time
from pathlib import Path

from sqlalchemy import func, select

from accuracy_checks.store import open_store
from accuracy_checks.store.archive import Archive
from accuracy_checks.store.schema import results, runs
from tests.support.paths import REPO as ROOT
from tests.support.store import store_url_fixture  # noqa: F401  (fixture)

CYCLE = "2026-03-02"

CHILD = """
import sys, time
from pathlib import Path
from accuracy_checks.store.archive import StagedSnapshot
from accuracy_checks.results import CheckResult, RunReport
from accuracy_checks.store import open_store
from tests.support.paths import REPO

url, archive, run_id, n, barrier = sys.argv[1:]
archive, n = Path(archive), int(n)
results = [CheckResult("accuracy", "warn", segment=f"seg-{{i % 500}}", lag=1 + i % 13,
                       measure="wape", value=i / 7, warn=25.0, fail=40.0, n_series=12,
                       n_obs=48, message=f"WAPE {{i / 7:.1f}} % of seg-{{i % 500}}", unit="%")
           for i in range(n)]
report = RunReport(run_id, {cycle!r}, None, results, "2026-03-02T06:00:00+00:00",
                   "2026-03-02T06:00:09+00:00")
incoming = archive / ".incoming"
incoming.mkdir(parents=True, exist_ok=True)
staged = incoming / (run_id + ".parquet")
staged.write_bytes(run_id.encode() * 4096)  # content: the run id, to match file and record
if barrier != "-":  # wait until every process is ready, then all start at once
    Path(barrier, "ready-" + run_id).touch()
    while not Path(barrier, "go").exists():
        time.sleep(0.002)
store = open_store(url)
print("ready", flush=True)
t0 = time.perf_counter()
rec = store.record_run(report, snapshot=StagedSnapshot(archive, {cycle!r}, staged))
print("done", rec.attempt, time.perf_counter() - t0, flush=True)
"""


def _child(url: str, archive: Path, run_id: str, n: int, barrier: Path | None,
           tmp: Path) -> subprocess.Popen[str]:
    script = tmp / "child.py"
    if not script.exists():
        script.write_text(CHILD.format(cycle=CYCLE))
    env = {**os.environ, "PYTHONPATH": str(ROOT)}
    return subprocess.Popen(
        [sys.executable, str(script), url, str(archive), run_id, str(n),
         str(barrier) if barrier else "-"],
        stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True, env=env)


def _recorded(url: str) -> dict[str, tuple[int, int, str | None]]:
    """run_id → (attempt, number of results, snapshot) of every recorded run."""
    with open_store(url) as store, store.db.read() as conn:
        q = (select(runs.c.run_id, runs.c.attempt, runs.c.snapshot, func.count(results.c.id))
             .outerjoin(results, results.c.run_pk == runs.c.id)
             .group_by(runs.c.run_id, runs.c.attempt, runs.c.snapshot))
        return {r[0]: (r[1], r[3], r[2]) for r in conn.execute(q)}


def _archived(archive: Path) -> dict[int, Path]:
    return {s.attempt: s.path for s in Archive(archive).snapshots() if s.cycle == CYCLE}


def test_16_processes_recording_at_once(store_url: str, tmp_path: Path) -> None:
    n, archive, barrier = 1500, tmp_path / "archive", tmp_path / "barrier"
    barrier.mkdir()
    ids = [f"run{k:02d}" for k in range(16)]
    procs = [_child(store_url, archive, rid, n, barrier, tmp_path) for rid in ids]
    deadline = time.monotonic() + 120
    while len(list(barrier.glob("ready-*"))) < len(ids):
        assert time.monotonic() < deadline, "children did not start"
        assert all(p.poll() is None for p in procs), [p.communicate() for p in procs]
        time.sleep(0.01)
    (barrier / "go").touch()  # a fresh store: they also race to create the tables
    outs = [p.communicate(timeout=180) for p in procs]
    assert all(p.returncode == 0 for p in procs), [o[1][-2000:] for o in outs]

    got = _recorded(store_url)
    assert sorted(got) == ids
    assert sorted(a for a, _, _ in got.values()) == list(range(1, 17))  # unique, gap-free
    assert {count for _, count, _ in got.values()} == {n}  # every result of every run
    files = _archived(archive)
    assert sorted(files) == list(range(1, 17))
    for rid, (attempt, _, snapshot) in got.items():  # the same number in store and archive
        assert snapshot == str(files[attempt])
        assert files[attempt].read_bytes().startswith(rid.encode())
    with open_store(store_url) as store:
        assert store.verify() == []


def test_sigkill_while_writing_leaves_no_partial_record(store_url: str, tmp_path: Path) -> None:
    n, archive = 20_000, tmp_path / "archive"
    first = _child(store_url, archive, "calibrate", n, None, tmp_path)
    out, err = first.communicate(timeout=120)
    assert first.returncode == 0, err
    took = float(out.split()[-1])  # how long one write takes here
    rng = random.Random(20260302)
    outcomes = []
    for k in range(3):
        proc = _child(store_url, archive, f"killed{k}", n, None, tmp_path)
        assert proc.stdout is not None
        assert proc.stdout.readline().strip() == "ready", proc.communicate()[1]
        delay = rng.uniform(0.0, took * 1.2)
        time.sleep(delay)
        proc.send_signal(signal.SIGKILL)
        proc.communicate(timeout=60)
        got = _recorded(store_url)
        outcomes.append((round(delay, 3), f"killed{k}" in got))
        # all or nothing: every recorded run has every one of its results
        assert {count for _, count, _ in got.values()} == {n}, (k, delay)
        attempts = sorted(a for a, _, _ in got.values())
        assert attempts == list(range(1, len(got) + 1)), (k, delay)
        files = _archived(archive)
        assert {a for a, _, s in got.values() if s} <= set(files)
        # at most one unrecorded snapshot, at the next number, waiting to be moved aside
        assert set(files) - set(attempts) <= {len(got) + 1}

    last = _child(store_url, archive, "after", n, None, tmp_path)
    out, err = last.communicate(timeout=120)
    assert last.returncode == 0, (outcomes, err)
    got = _recorded(store_url)
    assert got["after"][0] == len(got)  # the next run works and takes the next number
    assert sorted(a for a, _, _ in got.values()) == list(range(1, len(got) + 1))
    files = _archived(archive)
    assert sorted(files) == sorted(a for a, _, _ in got.values())  # no orphan under a name
    for rid, (attempt, _, _) in got.items():
        assert files[attempt].read_bytes().startswith(rid.encode())
    with open_store(store_url) as store:
        assert store.verify() == []
        if store.dialect == "sqlite":
            with store.db.read() as conn:
                assert conn.exec_driver_sql("PRAGMA integrity_check").scalar() == "ok"
