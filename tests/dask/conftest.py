"""The dask engine's tests: one real local cluster per test module."""

from __future__ import annotations

from collections.abc import Iterator

import pytest

from tests.dask.support import local_cluster


@pytest.fixture(scope="module")
def cluster() -> Iterator[str]:
    """A real local cluster of 2 worker processes for the module; yields its scheduler's
    address."""
    with local_cluster() as address:
        yield address
