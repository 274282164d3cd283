"""The demo's world: the simulated demand and the forecaster (invented data; the expectations
are the design's own, see ``accuracy_checks/demo/world.py``)."""

from __future__ import annotations

import datetime as dt

import numpy as np

from accuracy_checks.demo import world as world_module


def test_forecaster_uses_only_the_past() -> None:
    """Rewriting every week from the issue date on leaves the cycle's forecast unchanged."""
    rng = np.random.default_rng(0)
    world = world_module.simulate(rng, dt.date(2023, 5, 15), 104)
    c = 95
    before = world_module.forecast(world.units[:, :c], world.segment_of_series)
    changed = world.units.copy()
    changed[:, c:] = 10_000
    after = world_module.forecast(changed[:, :c], world.segment_of_series)
    for x, y in zip(before, after, strict=True):
        np.testing.assert_array_equal(x, y)
    # and the table writer builds the cycle from that same slice
    table = world_module.forecast_table(world, c).to_pandas()
    np.testing.assert_allclose(table["units"].to_numpy(), np.round(before[0], 2).ravel())
