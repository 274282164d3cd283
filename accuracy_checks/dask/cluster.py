"""The Dask cluster a run of the dask engine uses, started and closed with the run.

Three cases, in order (:func:`open_client`):

1. inside a task that already runs on a Dask worker (Prefect's ``DaskTaskRunner``): the
   worker's own client (:func:`distributed.worker_client`), so the checks run on the flow's
   cluster;
2. ``engine.scheduler`` (or ``--scheduler``) given: a :class:`distributed.Client` connected to
   that scheduler (within :data:`CONNECT_TIMEOUT_S`; an unreachable address is a
   :class:`~accuracy_checks.errors.UsageError`, exit 2, naming it). The cluster is left running;
3. otherwise a :class:`distributed.LocalCluster` of ``engine.workers`` worker processes (one
   thread each), each limited to ``engine.memory_limit``, started for the run and closed after
   it.
"""

from __future__ import annotations

import contextlib
import os
from collections.abc import Iterator
from typing import TYPE_CHECKING

from accuracy_checks.config.engines import Engine
from accuracy_checks.errors import UsageError

if TYPE_CHECKING:
    from distributed import Client

__all__ = ["CONNECT_TIMEOUT_S", "DEFAULT_WORKERS", "open_client"]

#: seconds to wait for an existing scheduler before giving up (exit 2)
CONNECT_TIMEOUT_S = 10
#: worker processes of the local cluster when ``engine.workers`` is not given
DEFAULT_WORKERS = 2


def _missing_dask(exc: ImportError) -> UsageError:
    return UsageError(
        f"The dask engine needs the `dask` extra ({exc.name} is not installed): "
        "pip install \"accuracy-checks[dask]\", or run with `engine: pandas`."
    )


@contextlib.contextmanager
def open_client(engine: Engine) -> Iterator[Client]:
    """A client of the cluster the run uses (module doc); closes what it started."""
    try:
        import distributed
    except ImportError as exc:
        raise _missing_dask(exc) from None
    try:
        worker = distributed.get_worker()
    except ValueError:
        worker = None
    if worker is not None and not engine.scheduler:
        with distributed.worker_client() as client:
            yield client
        return
    if engine.scheduler:
        with _connect(engine.scheduler) as client:
            yield client
        return
    cluster = distributed.LocalCluster(
        n_workers=engine.workers or DEFAULT_WORKERS, threads_per_worker=1, processes=True,
        memory_limit=engine.memory_limit or "auto", dashboard_address=":0",
        silence_logs=40)
    try:
        with distributed.Client(cluster) as client:
            yield client
    finally:
        cluster.close()


@contextlib.contextmanager
def _connect(address: str) -> Iterator[Client]:
    """A client of the scheduler at ``address``, or exit 2 naming it."""
    import distributed

    try:
        client = distributed.Client(address, timeout=CONNECT_TIMEOUT_S)
    except (OSError, TimeoutError, ValueError, TypeError) as exc:
        raise UsageError(
            f"The Dask scheduler at {address} (engine.scheduler / --scheduler) did not answer "
            f"within {CONNECT_TIMEOUT_S} s ({type(exc).__name__}: {exc}). Start it (`dask "
            "scheduler`, then `dask worker ADDRESS`), fix the address, or leave the scheduler "
            "out to start a local cluster."
        ) from None
    try:
        if not client.scheduler_info().get("workers"):
            client.wait_for_workers(1, timeout=CONNECT_TIMEOUT_S)
    except (OSError, TimeoutError) as exc:
        client.close()
        raise UsageError(
            f"The Dask scheduler at {address} has no worker ({exc}); start one with "
            f"`dask worker {address}`."
        ) from None
    try:
        yield client
    finally:
        client.close()


def worker_count() -> int:
    """Cores of this machine (the default size of shards' parallelism)."""
    return os.cpu_count() or 1
