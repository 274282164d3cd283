"""Time the audit record of a large run: ``Store.record_run`` of N results (default 50 000).

Not part of the test suite (speed is measured here, never in timed unit tests). Usage, from
the repository root::

    .venv/bin/python bench/record_bench.py                      # SQLite, both kinds
    .venv/bin/python bench/record_bench.py --results 50000 --repeat 5 --kind examples
    .venv/bin/python bench/record_bench.py --url postgresql+psycopg://user:pw@127.0.0.1:5432/db

Each repeat records one run of N results into the same store (a fresh SQLite file in a
temporary folder, or a fresh schema on the PostgreSQL server given by ``--url``, dropped at the
end), so later repeats append to a store that already holds runs, as a nightly store does.
It prints the best and the median wall time of ``record_run`` and of its parts: turning the
results into rows (``result_rows``), the digest of the chain (``chain_digest``) and the insert
itself (the rest of the transaction, commit included).

``--kind plain`` records results as the store tests write them (a measure, a value, two
levels, a short message, small details on every other one); ``--kind examples`` gives each
result three worst-offender examples and a details dict with the cycles used, as accuracy
results carry them. By default both kinds are timed, one after the other, each in a store of
its own.
"""

from __future__ import annotations

import argparse
import statistics
import sys
import tempfile
import time
import uuid
from pathlib import Path
from typing import Any

sys.path.insert(0, str(Path(__file__).resolve().parent.parent))

from accuracy_checks.results import CheckResult, RunReport
from accuracy_checks.store import open_store
from accuracy_checks.store.record import chain_digest, result_rows, run_row

MEASURES = ("wape", "bias_pct", "mae", "mape", "rmse")


def results(n: int, kind: str) -> list[CheckResult]:
    """``n`` accuracy results of 100 segments × lags × measures (invented figures)."""
    out = []
    for i in range(n):
        details: dict[str, Any] = {"i": i} if i % 2 else {}
        examples: list[dict[str, Any]] = []
        if kind == "examples":
            details = {"cycles": [{"cycle": f"2026-02-{d:02d}", "attempt": 1,
                                   "source": "history"} for d in (2, 9, 16, 23)],
                       "periods": ["2026-02-02", "2026-02-23"]}
            examples = [{"store": f"S{(i + j) % 100:04d}", "product": f"P{(7 * i + j) % 1000:06d}",
                         "n_obs": 4, "error": -50.5 + j + i / 7, "abs_error": 53.75 + j,
                         "share_of_bias_pct": 0.46 - j / 100} for j in range(3)]
        out.append(CheckResult(
            "accuracy", "warn" if i % 7 == 0 else "pass", segment=f"segment-{i % 100:03d}",
            lag=1 + (i // 100) % 13, measure=MEASURES[i % len(MEASURES)], value=10.0 + i / 8,
            warn=25.0, fail=(-10.0, 40.0), n_series=1200 + i % 50, n_obs=4800 + i % 50,
            message=f"WAPE {10.0 + i / 8:.3g} % over 4,800 forecasts of segment-{i % 100:03d}",
            unit="%", examples=examples, details=details))
    return out


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--results", type=int, default=50_000)
    parser.add_argument("--repeat", type=int, default=5)
    parser.add_argument("--kind", choices=("plain", "examples"), nargs="+",
                        default=["plain", "examples"])
    parser.add_argument("--url", help="a PostgreSQL URL (default: a temporary SQLite file)")
    args = parser.parse_args()
    where = "PostgreSQL" if args.url else "SQLite"
    for kind in args.kind:
        found = results(args.results, kind)
        with tempfile.TemporaryDirectory() as tmp:
            url, drop = _store_url(args.url, Path(tmp))
            try:
                times = _measure(url, found, args.repeat)
            finally:
                drop()
        print(f"record_run of {args.results:,} results ({kind}) on {where}, "
              f"{args.repeat} runs:")
        for part, values in times.items():
            print(f"  {part:<14} best {min(values):.3f} s   "
                  f"median {statistics.median(values):.3f} s")
    return 0


def _measure(url: str, found: list[CheckResult], repeat: int) -> dict[str, list[float]]:
    times: dict[str, list[float]] = {"record_run": [], "record_run_cpu": [], "result_rows": [],
                                     "chain_digest": [], "insert": []}
    with open_store(url) as store:
        for i in range(repeat):
            report = RunReport(run_id=uuid.uuid4().hex, cycle=f"2026-03-{2 + i:02d}",
                               attempt=None, results=found,
                               started_at="2026-03-02T06:00:00+00:00",
                               finished_at="2026-03-02T06:01:00+00:00")
            t0 = time.perf_counter()
            rows = result_rows(report.results)
            t1 = time.perf_counter()
            run = run_row(report, config=None, fingerprints=None, recorded_at=_now(), rows=rows)
            chain_digest(None, run, rows)
            t2 = time.perf_counter()
            c2 = time.process_time()
            store.record_run(report)
            t3 = time.perf_counter()
            times["record_run_cpu"].append(time.process_time() - c2)
            times["result_rows"].append(t1 - t0)
            times["chain_digest"].append(t2 - t1)
            times["record_run"].append(t3 - t2)
            times["insert"].append(max((t3 - t2) - (t2 - t0), 0.0))
    return times


def _now() -> Any:
    from datetime import UTC, datetime

    return datetime.now(UTC)


def _store_url(pg: str | None, tmp: Path) -> tuple[str, Any]:
    """The store's URL and how to drop it afterwards."""
    if pg is None:
        return f"sqlite:///{tmp / 'audit.db'}", lambda: None
    from sqlalchemy import create_engine, text
    from sqlalchemy.engine import make_url
    from sqlalchemy.pool import NullPool

    schema = f"bench_{uuid.uuid4().hex[:12]}"
    admin = create_engine(pg, poolclass=NullPool)
    with admin.begin() as conn:
        conn.execute(text(f"CREATE SCHEMA {schema}"))

    def drop() -> None:
        with admin.begin() as conn:
            conn.execute(text(f"DROP SCHEMA {schema} CASCADE"))
        admin.dispose()

    url = make_url(pg).update_query_dict({"options": f"-csearch_path={schema}"})
    return url.render_as_string(hide_password=False), drop


if __name__ == "__main__":
    sys.exit(main())
