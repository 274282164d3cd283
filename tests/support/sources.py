"""Helpers of the reader tests (tests/sources/): a small config over files written in a test's
folder, a forecast file's text, and the one-paragraph message a reader raises."""

from __future__ import annotations

from pathlib import Path

import pytest

from accuracy_checks.config import Config
from accuracy_checks.errors import InputError
from accuracy_checks.measures.catalogue import parse_config

CONFIG = """\
version: 1
forecast:
  path: {forecast}
  keys: [store, product]
  period: week
  value: units
  issued: issued_on
{forecast_extra}actuals:
  path: {actuals}
  period: week
  value: units_sold
{actuals_extra}frequency: W-MON
horizon: 2
segments:
  columns: [category]
  mapping: {mapping}
"""


def config(tmp_path: Path, *, forecast: str = "f.csv", actuals: str = "a.csv",
           mapping: str = "m.csv", forecast_extra: str = "", actuals_extra: str = "") -> Config:
    """The config of files ``f.csv`` (forecast), ``a.csv`` (actuals), ``m.csv`` (mapping of
    ``category``) in ``tmp_path``, weekly (W-MON), keys store and product."""
    text = CONFIG.format(forecast=forecast, actuals=actuals, mapping=mapping,
                         forecast_extra=forecast_extra, actuals_extra=actuals_extra)
    return parse_config(text, source=tmp_path / "c.yaml")


def forecast_text(products: list[str], weeks: list[str] | None = None) -> str:
    """A forecast CSV of store S1 with one row per product (10 units, issued 2026-03-02)."""
    weeks = weeks or ["2026-03-02"] * len(products)
    lines = ["store,product,week,units,issued_on"]
    lines += [f"S1,{p},{w},10,2026-03-02" for p, w in zip(products, weeks, strict=True)]
    return "\n".join(lines) + "\n"


def read_error(fn: object, *args: object, **kwargs: object) -> str:
    """The message of the InputError ``fn(*args, **kwargs)`` raises: one paragraph, with no
    library repr (``np.``) and no bare ``nan``."""
    with pytest.raises(InputError) as info:
        fn(*args, **kwargs)  # type: ignore[operator]
    msg = str(info.value)
    assert "\n" not in msg and "np." not in msg and "nan" not in msg.lower().split()
    return msg
