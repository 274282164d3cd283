"""The gate on the flow's own Dask cluster: ``check_forecast`` with the dask engine.

The flow runs on Prefect's ``DaskTaskRunner``; the task ``check_forecast(engine="dask")``
finds it runs on a Dask worker and checks the series in shards on that same cluster (no second
cluster is started): every check family, the snapshot written from the workers, the same
results as ``accuracy-checks run --engine dask`` (docs/engines.md). Point the runner at a real
cluster (``DaskTaskRunner(address="tcp://scheduler:8786")``) for data that does not fit one
machine; here a local cluster of two worker processes starts with the flow::

    pip install "accuracy-checks[prefect,dask]"     # prefect, prefect-dask, dask, distributed
    python flows/dask_gate.py --config accuracy-checks.yaml
"""

from __future__ import annotations

import argparse
import os
import sys
from collections.abc import Sequence
from pathlib import Path

if __package__ in (None, ""):  # run as a script: make the repository's packages importable
    sys.path.insert(0, str(Path(__file__).resolve().parent.parent))
os.environ.setdefault("PREFECT_SERVER_ANALYTICS_ENABLED", "false")

from prefect import flow
from prefect.states import State
from prefect_dask import DaskTaskRunner

from accuracy_checks.prefect import check_forecast

__all__ = ["CLUSTER", "dask_gate", "main"]

#: two worker processes of one thread each (``processes=True``: the checks' memory is the
#: workers', not the flow's)
CLUSTER = {"n_workers": 2, "threads_per_worker": 1, "processes": True,
           "dashboard_address": ":0"}


@flow(name="accuracy-gate-on-dask",
      task_runner=DaskTaskRunner(cluster_kwargs=CLUSTER))  # type: ignore[arg-type]
def dask_gate(config: str, forecast_path: str | None = None, actuals_path: str | None = None,
              snapshot: bool = True) -> State:
    """Gate the forecast of ``config`` with the dask engine on the flow's cluster; the task's
    state is the flow's (a failed gate fails the flow)."""
    future = check_forecast.submit(config, forecast_path=forecast_path,
                                   actuals_path=actuals_path, snapshot=snapshot,
                                   engine="dask")
    future.wait()
    return future.state


def main(argv: Sequence[str] | None = None) -> int:
    p = argparse.ArgumentParser(prog="dask_gate.py", description=__doc__.splitlines()[0])
    p.add_argument("--config", type=Path, required=True, help="the accuracy-checks config")
    p.add_argument("--forecast", help="the forecast's place instead of the config's")
    p.add_argument("--actuals", help="the actuals' place instead of the config's")
    args = p.parse_args(argv)
    state = dask_gate(str(args.config), args.forecast, args.actuals, return_state=True)
    print(f"dask_gate: {state.name}: {state.message or ''}")
    return 0 if state.is_completed() else 1


if __name__ == "__main__":
    sys.exit(main())
