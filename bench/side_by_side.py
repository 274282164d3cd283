# ruff: noqa: E501, F841  (the yardstick as measured: its text is kept, not reformatted)
"""Side-by-side timing: the project's `run` vs a hand-tuned numpy reference pass of the same work.

usage: python side_by_side.py N_SERIES [--full]   (--full: measures [all] at lags 1 and 4)
Run it with the python of the project's virtualenv (it runs the `accuracy-checks` beside that
python), e.g. from the repository root: .venv/bin/python bench/side_by_side.py 1000000
The workload is generated once under $TMPDIR (about 0.6 GB at 1 M series); PERF_REPEAT=3 runs.
Workload (invented): N series (store x sku), 20 segments, weekly; actuals for the last 16 weeks;
4 earlier cycles of 13 weeks in a history file; the current cycle of 13 weeks with a few planted
defects. All Parquet. Each side runs as its own process, timed with its own peak RSS.
last line: 'perf: run X s / reference Y s = R x; peak RSS A MB vs B MB'
"""
from __future__ import annotations

import os
import subprocess
import sys
from pathlib import Path

import numpy as np
import pandas as pd

H, CYCLES, HIST = 13, 4, 16


def workload(n: int, d: Path) -> None:
    if (d / "done").exists():
        return
    d.mkdir(parents=True, exist_ok=True)
    rng = np.random.default_rng(1)
    store = (np.arange(n) // 1000).astype(np.int32)
    sku = (np.arange(n) % 1000).astype(np.int32)
    seg = rng.integers(0, 20, n)
    pd.DataFrame({"store": store, "sku": sku, "segment": [f"seg{s:02d}" for s in seg]}).to_parquet(d / "segments.parquet")
    cycle = pd.Timestamp("2026-11-30")
    weeks = pd.date_range(end=cycle - pd.Timedelta(weeks=1), periods=HIST, freq="W-MON")
    level = rng.gamma(2.0, 10.0, n) + 1
    act = np.maximum(0, np.round(level[:, None] * rng.normal(1, 0.2, (n, HIST))))
    pd.DataFrame({"store": np.repeat(store, HIST), "sku": np.repeat(sku, HIST),
                  "week": np.tile(weeks.values, n), "qty": act.ravel()}).to_parquet(d / "actuals.parquet")
    parts = []
    for c in range(CYCLES, 0, -1):
        iss = cycle - pd.Timedelta(weeks=c)
        wk = pd.date_range(iss, periods=H, freq="W-MON")
        parts.append(pd.DataFrame({"store": np.repeat(store, H), "sku": np.repeat(sku, H),
                                   "week": np.tile(wk.values, n), "issued_on": iss,
                                   "fc": np.repeat(level, H) * rng.normal(1, 0.15, n * H)}))
    pd.concat(parts, ignore_index=True).to_parquet(d / "history.parquet")
    wk = pd.date_range(cycle, periods=H, freq="W-MON")
    cur = pd.DataFrame({"store": np.repeat(store, H), "sku": np.repeat(sku, H),
                        "week": np.tile(wk.values, n), "issued_on": cycle,
                        "fc": np.repeat(level, H) * rng.normal(1, 0.15, n * H)})
    cur = cur.iloc[H * 5:]  # 5 missing series
    cur.to_parquet(d / "forecast.parquet")
    (d / "config.yml").write_text(f"""\
version: 1
forecast: {{path: forecast.parquet, keys: [store, sku], period: week, value: fc, issued: issued_on}}
actuals: {{path: actuals.parquet, period: week, value: qty}}
history: history.parquet
archive: archive
store: sqlite:///audit.db
frequency: W-MON
horizon: {H}
segments: {{columns: [segment], mapping: segments.parquet}}
coverage: {{active_periods: 8}}
evaluation: {{lags: [1], window: 4, min_obs: 20}}
thresholds:
  default:
    bias_pct: {{warn: 5, fail: 10}}
    wape: {{warn: 25, fail: 40}}
    mape: {{warn: 30, fail: 50}}
    missing_series_pct: {{warn: 0, fail: 1}}
""")
    (d / "done").write_text("ok")


def reference(d: Path) -> None:
    """The same work, hand-tuned: read, validate, coverage, join, grouped sums, snapshot."""
    keys = ["store", "sku"]
    fc = pd.read_parquet(d / "forecast.parquet")
    act = pd.read_parquet(d / "actuals.parquet")
    last4_weeks = np.sort(act["week"].unique())[-4:]
    hist = pd.read_parquet(d / "history.parquet", filters=[("week", "in", list(pd.to_datetime(last4_weeks)))])
    seg = pd.read_parquet(d / "segments.parquet")
    sk = lambda df: df["store"].to_numpy(np.int64) * 1_000_003 + df["sku"].to_numpy(np.int64)  # noqa: E731
    # output checks: values, duplicates (sort-based), horizon completeness
    v = fc["fc"].to_numpy()
    bad_values = int((~np.isfinite(v)).sum() + (v < 0).sum())
    s_fc = sk(fc)
    wk = fc["week"].to_numpy().astype("datetime64[D]").astype(np.int64) // 7
    combo = s_fc * 4096 + (wk - wk.min())
    combo.sort()
    dups = int((combo[1:] == combo[:-1]).sum())
    codes, uniq = pd.factorize(s_fc)
    per_series = np.bincount(codes)
    gaps = int((per_series != H).sum())
    # coverage: active series vs forecast series
    aw = act["week"].to_numpy()
    recent = aw >= np.sort(np.unique(aw))[-8]
    active = np.unique(sk(act)[recent])
    missing = int((~np.isin(active, uniq)).sum())
    # accuracy: lag-1 rows of earlier cycles joined to actuals, last 4 weeks
    h = hist[hist["week"].to_numpy() == hist["issued_on"].to_numpy()]
    last4 = np.sort(np.unique(aw))[-4:]
    h = h[np.isin(h["week"].to_numpy(), last4)]
    a4 = act[np.isin(aw, last4)]
    hk = sk(h) * 4096 + (h["week"].to_numpy().astype("datetime64[D]").astype(np.int64) // 7 % 4096)
    ak = sk(a4) * 4096 + (a4["week"].to_numpy().astype("datetime64[D]").astype(np.int64) // 7 % 4096)
    order = np.argsort(ak)
    pos = np.searchsorted(ak[order], hk)
    pos = np.clip(pos, 0, len(ak) - 1)
    hit = ak[order][pos] == hk
    y = a4["qty"].to_numpy()[order][pos][hit]
    f = h["fc"].to_numpy()[hit]
    skeys = sk(seg)
    sorder = np.argsort(skeys)
    scode_all, snames = pd.factorize(seg["segment"])
    scode = scode_all[sorder][np.searchsorted(skeys[sorder], sk(h)[hit])]
    e = y - f
    k = len(snames)
    sums = [np.bincount(scode, w, k) for w in (e, np.abs(e), e * e, y, np.divide(np.abs(e), y, out=np.zeros_like(e), where=y != 0))]
    n = np.bincount(scode, minlength=k)
    bias = 100 * sums[0] / sums[3]
    # the archive snapshot of the checked forecast (the product keeps one per run)
    fc.to_parquet(d / "reference-snapshot.parquet")
    print(f"reference: bad={bad_values} dups={dups} gaps={gaps} missing={missing} rows={len(e)} bias0={bias[0]:.3f}")


WRAP = ("import resource, subprocess, sys, time; t = time.perf_counter(); "
        "p = subprocess.run(sys.argv[1:], capture_output=True, text=True); w = time.perf_counter() - t; "
        "sys.stderr.write(p.stdout[-600:] + p.stderr[-600:] if p.returncode not in (0, 1) else ''); "
        "print(w, resource.getrusage(resource.RUSAGE_CHILDREN).ru_maxrss / 1024, p.returncode)")


def timed(cmd: list[str], cwd: Path) -> tuple[float, float, int]:
    """Wall seconds, peak RSS (MB) of that command alone, exit code."""
    p = subprocess.run([sys.executable, "-c", WRAP, *cmd], cwd=cwd, capture_output=True, text=True)
    if p.stderr:
        print(p.stderr[-1200:])
    wall, rss, code = p.stdout.split()
    return float(wall), float(rss), int(code)


def main() -> int:
    n = int(sys.argv[1])
    d = Path(os.environ.get("TMPDIR", "/tmp")) / f"perf-gate-{n}"
    workload(n, d)
    if len(sys.argv) > 2 and sys.argv[2] == "--ref-inproc":
        reference(d)
        return 0
    exe = Path(sys.executable).parent / "accuracy-checks"
    cmd = [str(exe)] if exe.exists() else [sys.executable, "-m", "accuracy_checks"]
    cfg = "config.yml"
    if "--full" in sys.argv:  # every measure the config can feed, two lags
        full = (d / "config.yml").read_text().replace(
            "evaluation: {lags: [1], window: 4, min_obs: 20}",
            "evaluation: {lags: [1, 4], window: 4, min_obs: 20, measures: [all]}")
        (d / "config-full.yml").write_text(full)
        cfg = "config-full.yml"
    # the machine is noisy: alternate the two sides and keep each side's best of R runs
    refs, runs = [], []
    for _ in range(int(os.environ.get("PERF_REPEAT", "3"))):
        refs.append(timed([sys.executable, __file__, str(n), "--ref-inproc"], d))
        subprocess.run(["rm", "-rf", str(d / "archive"), str(d / "audit.db")])
        runs.append(timed([*cmd, "run", "--config", cfg], d))
    ref_wall, ref_rss = min(r[0] for r in refs), min(r[1] for r in refs)
    run_wall, run_rss, code = min(r[0] for r in runs), min(r[1] for r in runs), runs[-1][2]
    print(f"perf: run {run_wall:.1f} s (exit {code}) / reference {ref_wall:.1f} s = {run_wall / ref_wall:.2f} x; "
          f"peak RSS {run_rss:.0f} MB vs reference {ref_rss:.0f} MB")
    return 0


if __name__ == "__main__":
    sys.exit(main())
