"""The dask engine beyond one process's memory: wall time and each worker's peak memory.

For each size (series × 13 weeks, 4 earlier cycles, ~60 weeks of actuals: the inputs of
``generate.py``, Parquet files whose row groups are the pieces the workers read), this:

1. runs the gate on the **dask engine** on a local cluster of ``--workers`` worker processes,
   each limited to ``--memory-limit`` (Dask spills, pauses and at last restarts a worker above
   its limit: a run that finishes stayed within it), from this process (the client), polling
   every worker's and the client's resident memory with psutil every 0.2 s;
2. runs the **pandas engine** on the same inputs in a subprocess under a psutil watchdog that
   kills it above ``--pandas-cap`` (12 GB by default) and reports the size at which it ran
   out, else its peak RSS and wall time;
3. compares both runs' JSON results when both finish (checks, statuses, counts, examples,
   messages; numbers to 1e-9: the ``same`` column).

Each engine has its own archive and audit store next to the inputs (dry runs, so each run
sees the same empty history). Results are appended to ``<out>/dask_bench.jsonl`` and printed
as a table. Hold the bench lock for runs of 1 M series and more::

    flock /tmp/bench.lock .venv/bin/python bench/dask_bench.py --series 1000000 5000000 \\
        --out /tmp/dask-bench
"""

from __future__ import annotations

import argparse
import contextlib
import json
import os
import subprocess
import sys
import threading
import time
from pathlib import Path
from typing import Any

import psutil
import yaml

BENCH = Path(__file__).resolve().parent
REPO = BENCH.parent
sys.path.insert(0, str(BENCH))
sys.path.insert(0, str(REPO))

from generate import generate, read_manifest  # noqa: E402

GIB = 1024**3


class Peaks:
    """Polls the resident memory of some processes in a thread; keeps each one's peak."""

    def __init__(self, pids: dict[str, int], every: float = 0.2) -> None:
        self.pids = pids
        self.peak = dict.fromkeys(pids, 0)
        self.every = every
        self._stop = threading.Event()
        self._thread = threading.Thread(target=self._poll, daemon=True)

    def _poll(self) -> None:
        procs = {name: psutil.Process(pid) for name, pid in self.pids.items()}
        while not self._stop.is_set():
            for name, proc in procs.items():
                with contextlib.suppress(psutil.Error):
                    self.peak[name] = max(self.peak[name], proc.memory_info().rss)
            self._stop.wait(self.every)

    def __enter__(self) -> Peaks:
        self._thread.start()
        return self

    def __exit__(self, *_: object) -> None:
        self._stop.set()
        self._thread.join()


def config_for(folder: Path, engine: str) -> Path:
    """The generated config with its own archive and store for ``engine`` (cleared)."""
    import shutil

    doc = yaml.safe_load((folder / "accuracy-checks.yaml").read_text(encoding="utf-8"))
    run = folder / f"run-{engine}"
    shutil.rmtree(run, ignore_errors=True)
    run.mkdir()
    doc["archive"] = f"run-{engine}/archive"
    doc["store"] = f"sqlite:///run-{engine}/audit.db"
    path = folder / f"accuracy-checks-{engine}.yaml"
    path.write_text(yaml.safe_dump(doc, sort_keys=False), encoding="utf-8")
    return path


def run_dask(folder: Path, workers: int, memory_limit: str) -> dict[str, Any]:
    """The dask engine on a fresh local cluster; wall time and peak memory per process."""
    import distributed

    from accuracy_checks import load_config, run_checks
    from accuracy_checks.outputs import write_json

    config = load_config(config_for(folder, "dask"))
    with distributed.LocalCluster(n_workers=workers, threads_per_worker=1, processes=True,
                                  memory_limit=memory_limit, dashboard_address=":0",
                                  silence_logs=50) as cluster, distributed.Client(cluster) as c:
        pids = {f"worker-{i}": pid for i, pid in enumerate(c.run(os.getpid).values())}
        pids["client"] = os.getpid()
        t0 = time.perf_counter()
        with Peaks(pids) as peaks:
            report = run_checks(config, engine="dask", scheduler=cluster.scheduler_address,
                                snapshot=False, progress=lambda t: print(f"  · {t}",
                                                                          flush=True))
        seconds = time.perf_counter() - t0
    write_json(report, folder / "result-dask.json")
    return {"seconds": round(seconds, 1),
            "peak_gib": {n: round(v / GIB, 2) for n, v in peaks.peak.items()},
            "verdict": report.status, "results": len(report.results)}


def run_pandas(folder: Path, cap: float) -> dict[str, Any]:
    """The pandas engine in a subprocess, killed above ``cap`` bytes of RSS."""
    out = folder / "result-pandas.json"
    out.unlink(missing_ok=True)
    cmd = [sys.executable, "-m", "accuracy_checks", "run", "--config",
           str(config_for(folder, "pandas")), "--engine", "pandas", "--no-snapshot", "--quiet",
           "--json", str(out)]
    t0 = time.perf_counter()
    proc = subprocess.Popen(cmd, cwd=REPO, stdout=subprocess.DEVNULL)
    peak, killed = 0, False
    ps = psutil.Process(proc.pid)
    while proc.poll() is None:
        with contextlib.suppress(psutil.Error):
            peak = max(peak, ps.memory_info().rss)
        if peak > cap:
            proc.kill()
            killed = True
            break
        time.sleep(0.2)
    proc.wait()
    return {"seconds": round(time.perf_counter() - t0, 1), "peak_gib": round(peak / GIB, 2),
            "ran_out": killed, "exit_code": proc.returncode}


def same_results(folder: Path) -> bool | None:
    """Whether both engines' JSON results agree (``None`` when one did not finish)."""
    try:
        a = json.loads((folder / "result-pandas.json").read_text(encoding="utf-8"))
        b = json.loads((folder / "result-dask.json").read_text(encoding="utf-8"))
    except OSError:
        return None
    from tests.dask.support import same

    return not same(a["results"], b["results"]) and not same(a["inputs"], b["inputs"])


def main(argv: list[str] | None = None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("--series", type=int, nargs="+", default=[1_000_000])
    ap.add_argument("--out", type=Path, default=Path("/tmp/dask-bench"))
    ap.add_argument("--workers", type=int, default=2)
    ap.add_argument("--memory-limit", default="4GB")
    ap.add_argument("--pandas-cap", type=float, default=12.0, help="GiB")
    ap.add_argument("--no-pandas", action="store_true")
    ap.add_argument("--no-dask", action="store_true", help="the pandas engine only")
    ap.add_argument("--inputs", type=Path, help="a folder of generated inputs to reuse")
    args = ap.parse_args(argv)
    rows = []
    for n in args.series:
        folder = args.inputs or args.out / f"s{n}"
        if read_manifest(folder) is None or read_manifest(folder).series != n:  # type: ignore[union-attr]
            print(f"generating {n:,} series into {folder} …", flush=True)
            generate(n, folder)
        manifest = read_manifest(folder)
        print(f"{n:,} series: dask engine on {args.workers} workers × {args.memory_limit}",
              flush=True)
        row: dict[str, Any] = {"series": n, "manifest": manifest.__dict__ if manifest else None,
                               "workers": args.workers, "memory_limit": args.memory_limit}
        if not args.no_dask:
            row["dask"] = run_dask(folder, args.workers, args.memory_limit)
            print(f"  dask: {row['dask']}", flush=True)
        if not args.no_pandas:
            row["pandas"] = run_pandas(folder, args.pandas_cap * GIB)
            print(f"  pandas: {row['pandas']}", flush=True)
            row["same"] = same_results(folder) if "dask" in row else None
        rows.append(row)
        with (args.out / "dask_bench.jsonl").open("a", encoding="utf-8") as fh:
            fh.write(json.dumps(row, default=str) + "\n")
    print("\n| series | dask wall s | peak per worker GiB | client GiB | pandas | same |")
    print("|---:|---:|---|---:|---|---|")
    for row in rows:
        d = row.get("dask") or {"seconds": "—", "peak_gib": {"client": "—"}}
        workers = ", ".join(f"{v}" for k, v in d["peak_gib"].items() if k.startswith("worker"))
        p = row.get("pandas")
        ptext = ("—" if p is None else f"ran out above {args.pandas_cap:g} GiB"
                 if p["ran_out"] else f"{p['seconds']} s, {p['peak_gib']} GiB")
        print(f"| {row['series']:,} | {d['seconds']} | {workers} | {d['peak_gib']['client']} "
              f"| {ptext} | {row.get('same')} |")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
