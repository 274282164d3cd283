"""The actuals index's two storages, as a fixture (tests/evaluation, tests/sources)."""

from __future__ import annotations

import pytest

from accuracy_checks.evaluation import baselines


@pytest.fixture(params=["dense", "sorted"])
def storage(request: pytest.FixtureRequest, monkeypatch: pytest.MonkeyPatch) -> str:
    """Runs a test once per storage of :class:`~accuracy_checks.evaluation.baselines.ActualsIndex`:
    the dense (series × period) array, and the sorted keys forced by zero dense limits."""
    if request.param == "sorted":
        monkeypatch.setattr(baselines, "_DENSE_CELLS_PER_ROW", 0)
        monkeypatch.setattr(baselines, "_DENSE_MIN_CELLS", 0)
    return str(request.param)
