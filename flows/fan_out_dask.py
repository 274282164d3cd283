"""The accuracy check fanned out over Prefect's Dask task runner (for large segment sets).

One task reads the inputs as the gate does and keeps the evaluation window's rows; they are
split into partitions of whole segments, and each partition's sufficient statistics are
computed by a task on the Dask cluster (:mod:`accuracy_checks.prefect.fanout`); the flow
merges them, adds all series together (segment ``"*"``) and judges every core measure with
the config's thresholds. The figures equal those of ``accuracy-checks run`` (the tests
compare them); the measures that need a series' rows together (MASE, tracking signal,
intervals …) stay in the single-process gate.

The cluster here is one in-process worker (``processes=False``: starts in a few seconds and
needs no ``__main__`` guard); point ``DaskTaskRunner(address=...)`` at a real cluster for data
that does not fit one machine::

    pip install "accuracy-checks[prefect]"     # prefect and prefect-dask
    python flows/fan_out_dask.py --config accuracy-checks.yaml --partitions 8
"""

from __future__ import annotations

import argparse
import os
import sys
from collections.abc import Sequence
from pathlib import Path
from typing import Any, cast

if __package__ in (None, ""):  # run as a script: make the repository's packages importable
    sys.path.insert(0, str(Path(__file__).resolve().parent.parent))
os.environ.setdefault("PREFECT_SERVER_ANALYTICS_ENABLED", "false")

from prefect import flow, get_run_logger, task, unmapped
from prefect.cache_policies import NO_CACHE
from prefect.futures import wait
from prefect.states import State
from prefect_dask import DaskTaskRunner

from accuracy_checks.api import read_config
from accuracy_checks.errors import UsageError
from accuracy_checks.prefect import cli_message, first_failure, usage_failure
from accuracy_checks.prefect.fanout import (
    EvaluationRows,
    evaluation_rows,
    judge_stats,
    merge_partition_stats,
    segment_partitions,
    segment_stats,
)

__all__ = ["fan_out_accuracy", "load_rows", "main"]

#: One in-process Dask worker: starts in ~4 s (``processes=True``: ~16 s).
CLUSTER = {"n_workers": 1, "processes": False, "dashboard_address": None}


@task(name="evaluation-rows", cache_policy=NO_CACHE, persist_result=False)
def load_rows(config: str) -> EvaluationRows | State:
    """The evaluation window's rows of ``config`` (an unusable input fails the task with the
    CLI's message)."""
    try:
        return evaluation_rows(read_config(config))
    except UsageError as exc:
        get_run_logger().error(cli_message(exc))
        return usage_failure(exc)


@flow(name="accuracy-fan-out",
      task_runner=DaskTaskRunner(cluster_kwargs=CLUSTER))  # type: ignore[arg-type]
def fan_out_accuracy(config: str, partitions: int = 4) -> list[dict[str, Any]] | State:
    """Accuracy results of the core measures per (lag, segment) and ``"*"``, as JSON dicts
    (the ``--json`` result fields), computed on ``partitions`` partitions of segments."""
    loaded = load_rows.submit(config)
    wait([loaded])
    failed = first_failure(loaded)
    if failed is not None:
        return failed
    rows = cast(EvaluationRows, loaded.result())
    parts = segment_partitions(rows.frame, partitions)
    futures = segment_stats.map(parts, keys=unmapped(rows.keys))
    stats = merge_partition_stats([f.result() for f in futures])
    results = judge_stats(stats, read_config(config), window=rows.window)
    get_run_logger().info(f"{len(results)} accuracy results from {len(parts)} partition(s) of "
                          f"{stats['segment'].nunique() - 1 if len(stats) else 0} segment(s)")
    return [r.to_dict() for r in results]


def main(argv: Sequence[str] | None = None) -> int:
    p = argparse.ArgumentParser(prog="fan_out_dask.py", description=__doc__.splitlines()[0])
    p.add_argument("--config", type=Path, required=True, help="the accuracy-checks config")
    p.add_argument("--partitions", type=int, default=4, help="partitions of segments")
    args = p.parse_args(argv)
    state = fan_out_accuracy(str(args.config), args.partitions, return_state=True)
    if not state.is_completed():
        print(f"fan_out_dask: {state.message}", file=sys.stderr)
        return 2 if isinstance(state.result(raise_on_failure=False), UsageError) else 3
    for r in cast(list[dict[str, Any]], state.result()):
        value = "" if r["value"] is None else f"{r['value']:.4g}"
        print(f"{r['status']:7} {r['segment']:24} lag {r['lag']:<3} {r['measure']:9} {value}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
