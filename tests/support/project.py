"""Shared fixtures: a small hand-built project on disk (invented data, tiny enough to check by
hand): 2 stores × 3 products, weekly cycles issued on Mondays, horizon 4."""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import pandas as pd
import pytest

from tests.support.configs import (
    ACTUALS_COLUMNS,
    FORECAST_COLUMNS,
    flow,
    levels,
    template,
    yaml_text,
)

KEYS = ["store", "product"]
STORES = ["S1", "S2"]
PRODUCTS = {"P1": "tools", "P2": "plants", "P3": "plants"}
FIRST_WEEK = pd.Timestamp("2026-01-05")  # a Monday
CURRENT = pd.Timestamp("2026-03-02")  # the cycle being checked
EARLIER = [pd.Timestamp("2026-02-16"), pd.Timestamp("2026-02-23")]
HORIZON = 4


def weeks(start: pd.Timestamp, n: int) -> pd.DatetimeIndex:
    return pd.date_range(start, periods=n, freq="W-MON")


def actual_value(store: str, product: str, week: pd.Timestamp) -> float:
    """Deterministic invented demand: base by series plus a weekly wobble."""
    base = {"S1": 100.0, "S2": 50.0}[store] + {"P1": 0.0, "P2": 20.0, "P3": 40.0}[product]
    return base + ((week - FIRST_WEEK).days // 7 % 3) * 10.0


def forecast_frame(issued: pd.Timestamp, *, bias: float = 0.97) -> pd.DataFrame:
    rows = []
    for store in STORES:
        for product in PRODUCTS:
            for w in weeks(issued, HORIZON):
                f = actual_value(store, product, w) * bias
                rows.append({"store": store, "product": product, "week": w.date().isoformat(),
                             "units": f, "p10": f * 0.8, "p90": f * 1.2,
                             "issued_on": issued.date().isoformat()})
    return pd.DataFrame(rows)


def actuals_frame(until: pd.Timestamp) -> pd.DataFrame:
    rows = [
        {"store": s, "product": p, "week": w.date().isoformat(),
         "units_sold": actual_value(s, p, w)}
        for s in STORES for p in PRODUCTS for w in pd.date_range(FIRST_WEEK, until, freq="W-MON")
        if w < until
    ]
    return pd.DataFrame(rows)


#: the small project's config (the keys: docs/config.md)
PROJECT: dict[str, object] = {
    "version": 1,
    "forecast": {"path": "data/forecast.csv", **FORECAST_COLUMNS,
                 "quantiles": flow({0.1: "p10", 0.9: "p90"})},
    "actuals": {"path": "data/actuals.csv", **ACTUALS_COLUMNS},
    "history": "data/earlier.csv",
    "archive": "archive",
    "frequency": "W-MON",
    "horizon": HORIZON,
    "segments": {"columns": "[category]", "mapping": "data/products.csv"},
    "coverage": {"active_periods": 4},
    "evaluation": {"lags": "[1]", "window": 2, "min_obs": 2},
    "thresholds": {"default": {"bias_pct": levels(5, 10), "wape": levels(25, 40)}},
}
#: its text as a template: ``CONFIG.format(extra=...)`` appends ``extra`` (lines that go on
#: the thresholds' block, or top-level keys)
CONFIG = template(yaml_text(PROJECT)) + "{extra}"


@dataclass
class Project:
    root: Path
    config: Path

    @property
    def data(self) -> Path:
        return self.root / "data"

    def write(self, name: str, frame: pd.DataFrame) -> Path:
        path = self.data / name
        frame.to_csv(path, index=False)
        return path


@pytest.fixture
def make_project(tmp_path: Path) -> Callable[..., Project]:
    """Build the small project; ``forecast``/``earlier``/``actuals`` frames may be replaced."""

    def make(*, forecast: pd.DataFrame | None = None, earlier: pd.DataFrame | None = None,
             actuals: pd.DataFrame | None = None, extra: str = "",
             config_text: str | None = None) -> Project:
        root = tmp_path / "project"
        (root / "data").mkdir(parents=True, exist_ok=True)
        project = Project(root, root / "accuracy-checks.yaml")
        project.write("forecast.csv", forecast if forecast is not None else forecast_frame(CURRENT))
        project.write("earlier.csv", earlier if earlier is not None
                      else pd.concat([forecast_frame(d) for d in EARLIER], ignore_index=True))
        project.write("actuals.csv", actuals if actuals is not None else actuals_frame(CURRENT))
        project.write("products.csv", pd.DataFrame(
            {"product": list(PRODUCTS), "category": list(PRODUCTS.values())}))
        project.config.write_text(config_text or CONFIG.format(extra=extra), encoding="utf-8")
        return project

    return make


@dataclass
class FakeDist:
    """Stands in for an installed distribution in entry-point tests."""

    name: str


@dataclass
class FakeEntryPoint:
    """Stands in for an ``importlib.metadata`` entry point (plugin tests)."""

    name: str
    value: str
    target: Any
    dist: FakeDist | None = None

    def load(self) -> Any:
        if isinstance(self.target, Exception):
            raise self.target
        return self.target
