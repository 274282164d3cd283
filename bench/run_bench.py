"""Benchmark ``accuracy-checks run`` end to end at several sizes.

For each size: generate the inputs (cached in ``bench/out/s<series>/``; see ``generate.py``),
clear the previous run's archive and audit store, then run

    python -m accuracy_checks run --config <dir>/accuracy-checks.yaml --json <dir>/result.json

in a fresh subprocess and report its wall time, its peak resident memory and the row counts.
Peak RSS is ``ru_maxrss`` of that one child (from ``os.wait4``, the per-child form of
``resource.getrusage(RUSAGE_CHILDREN)``), in MiB. Each measurement is also appended to
``bench/out/results.jsonl`` with the machine and library versions.

Usage::

    python bench/run_bench.py --series 100000 1000000
"""

from __future__ import annotations

import argparse
import datetime as dt
import json
import os
import platform
import shutil
import subprocess
import sys
import time
from dataclasses import asdict, dataclass
from pathlib import Path

BENCH = Path(__file__).resolve().parent
REPO = BENCH.parent
sys.path.insert(0, str(BENCH))

from generate import Manifest, generate, read_manifest  # noqa: E402


@dataclass(frozen=True)
class Measurement:
    series: int
    forecast_rows: int
    history_rows: int
    actuals_rows: int
    seconds: float
    peak_rss_mib: float
    exit_code: int
    verdict: str | None
    results: int | None
    generated_in: float | None


def inputs_for(series: int, out: Path, *, seed: int, regenerate: bool) -> tuple[Path, Manifest,
                                                                                 float | None]:
    """The folder of inputs for ``series`` (generated unless cached) and its manifest."""
    folder = out / f"s{series}"
    manifest = None if regenerate else read_manifest(folder)
    if manifest is not None and manifest.series == series and manifest.seed == seed:
        return folder, manifest, None
    if folder.exists():
        shutil.rmtree(folder)
    print(f"generating {series:,} series in {folder} …", flush=True)
    manifest = generate(series, folder, seed=seed)
    return folder, manifest, manifest.seconds


def measure(folder: Path, manifest: Manifest, generated_in: float | None) -> Measurement:
    """Run the check on ``folder`` in a fresh subprocess; wall time and peak RSS of that child."""
    run_dir = folder / "run"
    if run_dir.exists():  # the archive and audit store of an earlier measurement
        shutil.rmtree(run_dir)
    run_dir.mkdir()
    result = run_dir / "result.json"
    cmd = [sys.executable, "-m", "accuracy_checks", "run", "--config",
           str(folder / "accuracy-checks.yaml"), "--json", str(result), "--quiet"]
    env = {**os.environ, "PYTHONPATH": os.pathsep.join(
        [str(REPO), *filter(None, [os.environ.get("PYTHONPATH")])])}
    with (run_dir / "stdout.txt").open("wb") as out, (run_dir / "stderr.txt").open("wb") as err:
        start = time.perf_counter()
        proc = subprocess.Popen(cmd, cwd=REPO, env=env, stdout=out, stderr=err)
        _, status, usage = os.wait4(proc.pid, 0)
        seconds = time.perf_counter() - start
    proc.returncode = os.waitstatus_to_exitcode(status)  # reaped by wait4, tell Popen
    verdict, n_results = None, None
    if result.exists():
        doc = json.loads(result.read_text(encoding="utf-8"))
        verdict, n_results = doc.get("status"), len(doc.get("results", []))
    if proc.returncode not in (0, 1):
        tail = (run_dir / "stderr.txt").read_text(encoding="utf-8", errors="replace")[-2000:]
        print(f"run failed with exit code {proc.returncode}:\n{tail}", file=sys.stderr)
    return Measurement(
        series=manifest.series,
        forecast_rows=manifest.forecast_rows,
        history_rows=manifest.history_rows,
        actuals_rows=manifest.actuals_rows,
        seconds=round(seconds, 2),
        peak_rss_mib=round(usage.ru_maxrss / 1024, 1),  # Linux: KiB
        exit_code=proc.returncode,
        verdict=verdict,
        results=n_results,
        generated_in=generated_in,
    )


def table(rows: list[Measurement]) -> str:
    """A Markdown table of the measurements."""
    head = ("| series | forecast rows | history rows | actuals rows | wall s | peak RSS MiB "
            "| exit | verdict | results |")
    lines = [head, "|" + "---:|" * 6 + ":---:|:---:|---:|"]
    for m in rows:
        lines.append(
            f"| {m.series:,} | {m.forecast_rows:,} | {m.history_rows:,} | {m.actuals_rows:,} "
            f"| {m.seconds:.1f} | {m.peak_rss_mib:,.0f} | {m.exit_code} | {m.verdict or '-'} "
            f"| {m.results if m.results is not None else '-'} |"
        )
    return "\n".join(lines)


def _machine() -> dict[str, object]:
    import numpy
    import pandas
    import pyarrow

    return {
        "python": platform.python_version(),
        "platform": platform.platform(),
        "cpus": os.cpu_count(),
        "numpy": numpy.__version__,
        "pandas": pandas.__version__,
        "pyarrow": pyarrow.__version__,
    }


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--series", type=int, nargs="+", default=[100_000],
                        help="sizes to run (number of series), e.g. 100000 1000000")
    parser.add_argument("--out", type=Path, default=BENCH / "out",
                        help="cache of generated inputs and results (default bench/out)")
    parser.add_argument("--seed", type=int, default=1)
    parser.add_argument("--regenerate", action="store_true", help="ignore cached inputs")
    args = parser.parse_args(argv)

    rows: list[Measurement] = []
    machine = _machine()
    for series in args.series:
        folder, manifest, generated_in = inputs_for(series, args.out, seed=args.seed,
                                                    regenerate=args.regenerate)
        print(f"running the check on {series:,} series …", flush=True)
        m = measure(folder, manifest, generated_in)
        rows.append(m)
        record = {"at": dt.datetime.now(dt.UTC).isoformat(timespec="seconds"), **asdict(m),
                  "machine": machine}
        with (args.out / "results.jsonl").open("a", encoding="utf-8") as log:
            log.write(json.dumps(record) + "\n")
    print()
    print(table(rows))
    print(f"\n{machine['cpus']} CPUs, Python {machine['python']}, pandas {machine['pandas']}, "
          f"numpy {machine['numpy']}, pyarrow {machine['pyarrow']}; "
          f"log: {args.out / 'results.jsonl'}")
    return 0 if all(m.exit_code in (0, 1) for m in rows) else 1


if __name__ == "__main__":
    raise SystemExit(main())
