"""Write benchmark inputs at scale: Parquet files and a config for ``accuracy-checks run``.

Invented data, shaped like a large retailer's weekly job::

    forecast.parquet   current cycle: series × 13 weeks          (store, product, week, units,
    history.parquet    4 earlier weekly cycles × 13 weeks         p10, p90, issued_on)
    actuals.parquet    ~60 weeks up to the current issue date    (store, product, week,
                                                                  units_sold)
    segments.parquet   product → category (10 segments)
    accuracy-checks.yaml
    manifest.json      the parameters and row counts (run_bench.py caches on it)

Keys are strings (``S0001``, ``P000001``); weeks are Mondays (``W-MON``) stored as Parquet
timestamps. Generation is vectorised over series; the only loops run over weeks and cycles, and
each writes one Parquet row group, so memory stays at a few rows-per-week arrays.

Usage::

    python bench/generate.py --series 100000 --out bench/out/s100000
"""

from __future__ import annotations

import argparse
import datetime as dt
import json
import math
import time
from dataclasses import asdict, dataclass
from pathlib import Path
from typing import Any

import numpy as np
import pyarrow as pa
import pyarrow.compute as pc
import pyarrow.parquet as pq
import yaml

HORIZON = 13
EARLIER_CYCLES = 4
ACTUAL_WEEKS = 60
N_SEGMENTS = 10
#: the current cycle's issue date (a Monday); the data are invented
ISSUE_DATE = dt.date(2026, 3, 2)
#: bump when the generated data change, so cached inputs are rebuilt
FORMAT_VERSION = 1


@dataclass(frozen=True)
class Manifest:
    """What was generated (written to ``manifest.json``)."""

    series: int
    seed: int
    stores: int
    products: int
    forecast_rows: int
    history_rows: int
    actuals_rows: int
    mapping_rows: int
    seconds: float
    format_version: int = FORMAT_VERSION


def _layout(series: int) -> tuple[int, int]:
    """Stores and products so that stores × products ≥ series (100 stores from 10 k series)."""
    stores = min(100, max(1, series // 100))
    return stores, math.ceil(series / stores)


def _names(prefix: str, n: int, width: int) -> pa.Array:
    return pa.array([f"{prefix}{i:0{width}d}" for i in range(1, n + 1)], pa.string())


#: the config of the benchmark inputs: the demo's settings, on the Parquet files above
CONFIG: dict[str, Any] = {
    "version": 1,
    "forecast": {"path": "forecast.parquet", "keys": ["store", "product"], "period": "week",
                 "value": "units", "issued": "issued_on", "quantiles": {0.1: "p10", 0.9: "p90"}},
    "actuals": {"path": "actuals.parquet", "period": "week", "value": "units_sold"},
    "history": "history.parquet",
    "archive": "run/archive",
    "store": "sqlite:///run/audit.db",
    "frequency": "W-MON",
    "horizon": HORIZON,
    "segments": {"columns": ["category"], "mapping": "segments.parquet"},
    "coverage": {"active_periods": 8},
    "evaluation": {"lags": [1, 4], "window": 4, "min_obs": 20},
    "thresholds": {"default": {"bias_pct": {"warn": 5, "fail": 10},
                               "wape": {"warn": 35, "fail": 50},
                               "missing_series_pct": {"warn": 0, "fail": 1}}},
}


def _config_text() -> str:
    return "# accuracy-checks benchmark inputs (invented data)\n" + yaml.safe_dump(
        CONFIG, sort_keys=False, default_flow_style=None)


def generate(series: int, out: Path, *, seed: int = 1) -> Manifest:
    """Write the benchmark inputs for ``series`` series into ``out``; return the manifest."""
    if series < 1:
        raise ValueError(f"--series must be at least 1; got {series}")
    t0 = time.perf_counter()
    out.mkdir(parents=True, exist_ok=True)
    rng = np.random.default_rng(seed)
    n_stores, n_products = _layout(series)

    # series in store-major order: the first `series` (store, product) pairs
    flat = np.arange(series)
    s_idx, p_idx = flat // n_products, flat % n_products
    store = pc.take(_names("S", n_stores, 4), pa.array(s_idx))
    product = pc.take(_names("P", n_products, 6), pa.array(p_idx))
    segment_of_product = rng.integers(0, N_SEGMENTS, n_products)
    seg = segment_of_product[p_idx]

    # demand: lognormal level per series, a yearly season per segment, Poisson noise
    level = np.exp(rng.normal(np.log(6.0), 1.0, series)) * rng.uniform(0.5, 1.5, N_SEGMENTS)[seg]
    amplitude = rng.uniform(0.0, 0.8, N_SEGMENTS)
    peak = rng.uniform(0, 52, N_SEGMENTS)
    issue = np.datetime64(ISSUE_DATE, "D")

    def mean_at(week: np.datetime64) -> np.ndarray:
        woy = (week - week.astype("datetime64[Y]")).astype(np.int64) / 7.0
        season = np.exp(amplitude * np.cos(2 * np.pi * (woy - peak) / 52.0)) / np.i0(amplitude)
        return level * season[seg]

    def ts(day: np.datetime64, n: int) -> pa.Array:
        return pa.array(np.full(n, day.astype("datetime64[us]")), pa.timestamp("us"))

    # actuals: one row group per week
    actuals_schema = pa.schema(
        [("store", pa.string()), ("product", pa.string()), ("week", pa.timestamp("us")),
         ("units_sold", pa.int64())]
    )
    with pq.ParquetWriter(out / "actuals.parquet", actuals_schema) as writer:
        for k in range(ACTUAL_WEEKS, 0, -1):
            week = issue - 7 * k
            units = rng.poisson(mean_at(week))
            writer.write_table(pa.table([store, product, ts(week, series), units],
                                        schema=actuals_schema))

    # forecasts: true mean × a per-cycle, per-segment bias × row noise; p10 < units < p90
    forecast_schema = pa.schema(
        [("store", pa.string()), ("product", pa.string()), ("week", pa.timestamp("us")),
         ("units", pa.float64()), ("p10", pa.float64()), ("p90", pa.float64()),
         ("issued_on", pa.timestamp("us"))]
    )

    def write_cycle(writer: pq.ParquetWriter, issued: np.datetime64) -> None:
        bias = np.exp(rng.normal(0.0, 0.04, N_SEGMENTS))[seg]
        for h in range(HORIZON):
            week = issued + 7 * h
            units = mean_at(week) * bias * np.exp(rng.normal(0.0, 0.15, series))
            spread = 1.2816 * np.sqrt(units + 0.25)
            writer.write_table(pa.table(
                [store, product, ts(week, series), np.round(units, 2),
                 np.round(np.clip(units - spread, 0.0, None), 2), np.round(units + spread, 2),
                 ts(issued, series)],
                schema=forecast_schema,
            ))

    with pq.ParquetWriter(out / "history.parquet", forecast_schema) as writer:
        for k in range(EARLIER_CYCLES, 0, -1):
            write_cycle(writer, issue - 7 * k)
    with pq.ParquetWriter(out / "forecast.parquet", forecast_schema) as writer:
        write_cycle(writer, issue)

    names = np.array([f"segment-{i:02d}" for i in range(1, N_SEGMENTS + 1)])
    pq.write_table(
        pa.table({"product": _names("P", n_products, 6), "category": names[segment_of_product]}),
        out / "segments.parquet",
    )
    (out / "accuracy-checks.yaml").write_text(_config_text(), encoding="utf-8")
    manifest = Manifest(
        series=series,
        seed=seed,
        stores=n_stores,
        products=n_products,
        forecast_rows=series * HORIZON,
        history_rows=series * HORIZON * EARLIER_CYCLES,
        actuals_rows=series * ACTUAL_WEEKS,
        mapping_rows=n_products,
        seconds=round(time.perf_counter() - t0, 2),
    )
    (out / "manifest.json").write_text(json.dumps(asdict(manifest), indent=2), encoding="utf-8")
    return manifest


def read_manifest(out: Path) -> Manifest | None:
    """The manifest of generated inputs in ``out``, or ``None`` if absent or outdated."""
    try:
        raw = json.loads((out / "manifest.json").read_text(encoding="utf-8"))
        manifest = Manifest(**raw)
    except (OSError, ValueError, TypeError):
        return None
    if manifest.format_version != FORMAT_VERSION:
        return None
    return manifest


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--series", type=int, required=True, help="number of series")
    parser.add_argument("--out", type=Path, required=True, help="folder to write into")
    parser.add_argument("--seed", type=int, default=1)
    args = parser.parse_args(argv)
    m = generate(args.series, args.out, seed=args.seed)
    print(
        f"{m.series:,} series ({m.stores} stores × {m.products:,} products): "
        f"{m.forecast_rows:,} forecast, {m.history_rows:,} history, {m.actuals_rows:,} actuals "
        f"rows in {m.seconds:.1f} s → {args.out}"
    )
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
