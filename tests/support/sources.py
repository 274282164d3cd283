"""Helpers of the reader tests (tests/sources/): a small config over files written in a test's
folder, a forecast file's text, and the one-paragraph message a reader raises."""

from __future__ import annotations

from collections.abc import Mapping
from pathlib import Path

import pytest

from accuracy_checks.config import Config
from accuracy_checks.errors import InputError
from accuracy_checks.measures.catalogue import parse_config
from tests.support.configs import ACTUALS_COLUMNS, FORECAST_COLUMNS, flow, yaml_text


def config_text(*, forecast: str = "f.csv", actuals: str = "a.csv", mapping: str | None = "m.csv",
                segments: bool = True, forecast_more: Mapping[str, object] | None = None,
                actuals_more: Mapping[str, object] | None = None) -> str:
    """The readers' config: forecast ``forecast`` and actuals ``actuals`` of the usual columns
    and ``*_more`` settings (e.g. :func:`week_format`), weekly (W-MON), horizon 2, segments by
    ``category`` from ``mapping`` (``None``: no mapping; ``segments=False``: no segments)."""
    doc: dict[str, object] = {
        "version": 1,
        "forecast": {"path": forecast, **FORECAST_COLUMNS, **(forecast_more or {})},
        "actuals": {"path": actuals, **ACTUALS_COLUMNS, **(actuals_more or {})},
        "frequency": "W-MON", "horizon": 2}
    if segments:
        doc["segments"] = {"columns": "[category]",
                           **({"mapping": mapping} if mapping is not None else {})}
    return yaml_text(doc)


def config(tmp_path: Path, *, forecast: str = "f.csv", actuals: str = "a.csv",
           mapping: str | None = "m.csv", segments: bool = True,
           forecast_more: Mapping[str, object] | None = None,
           actuals_more: Mapping[str, object] | None = None) -> Config:
    """The :func:`config_text` config read as if from ``tmp_path/c.yaml``: files ``f.csv``
    (forecast), ``a.csv`` (actuals), ``m.csv`` (mapping of ``category``) in ``tmp_path`` unless
    named otherwise."""
    text = config_text(forecast=forecast, actuals=actuals, mapping=mapping, segments=segments,
                       forecast_more=forecast_more, actuals_more=actuals_more)
    return parse_config(text, source=tmp_path / "c.yaml")


def week_format(fmt: str) -> dict[str, object]:
    """A source's setting: the ``week`` column's dates are written as ``fmt``."""
    return {"date_formats": flow({"week": f'"{fmt}"'})}


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
