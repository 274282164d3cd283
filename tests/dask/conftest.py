"""The dask engine's tests: one real local cluster per test module."""

from __future__ import annotations

from collections.abc import Iterator

import pytest


@pytest.fixture(scope="module")
def cluster() -> Iterator[str]:
    """A real local cluster of 2 worker processes for the module (~2 s to start); yields its
    scheduler's address."""
    import distributed

    with distributed.LocalCluster(n_workers=2, threads_per_worker=1, processes=True,
                                  dashboard_address=":0", silence_logs=40) as local:
        yield local.scheduler_address
