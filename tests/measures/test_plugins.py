"""Measures added by other packages through the ``accuracy_checks.measures`` entry points.

``importlib.metadata.entry_points`` is replaced by a fake that lists the plugins below, as an
installed package would.
"""

from __future__ import annotations

from collections.abc import Callable, Iterator

import numpy as np
import pandas as pd
import pytest

from accuracy_checks import load_config, run_checks
from accuracy_checks.errors import ConfigError
from accuracy_checks.measures import MeasureData, get_measure, result_frame
from accuracy_checks.measures.plugins import GROUP, load_plugins, rejected_plugins, reset_plugins
from accuracy_checks.measures.registry import MEASURES, Measure, register_measure
from tests.support.project import CONFIG, FakeDist, FakeEntryPoint, Project


def _stockout_rate(data: MeasureData) -> pd.DataFrame:
    """Share of usable rows where demand exceeded the forecast, in percent."""
    n = data.gsum(mask=data.usable)
    short = data.gsum(mask=data.usable & (data.actual > data.forecast))
    value = np.divide(100 * short, n, out=np.full(data.n_groups, np.nan), where=n > 0)
    return result_frame(data.n_groups, value, [(n == 0, "no_data")])


def _raises(data: MeasureData) -> pd.DataFrame:
    raise ValueError("cannot divide by the moon")


def _wrong_shape(data: MeasureData) -> pd.DataFrame:
    return pd.DataFrame({"value": [1.0] * (data.n_groups + 3)})


STOCKOUT = Measure(id="stockout_rate", label="Stock-out rate", unit="%", direction="lower",
                   compute=_stockout_rate, description="rows with actual > forecast, %")
RAISER = Measure(id="moon_ratio", label="Moon ratio", unit="", direction="lower",
                 compute=_raises, description="always raises")
WRONG_SHAPE = Measure(id="wrong_shape", label="Wrong shape", unit="", direction="lower",
                      compute=_wrong_shape, description="too many rows")
TWO_ARGS = Measure(id="two_args", label="Two args", unit="", direction="lower",
                   compute=lambda data, extra: data, description="wrong signature")  # type: ignore[arg-type,misc]
CLASH = Measure(id="wape", label="My WAPE", unit="%", direction="lower",
                compute=_stockout_rate, description="clashes with the built-in")


PLUGINS = [
    FakeEntryPoint("stockout_rate", "shop_measures:STOCKOUT", STOCKOUT, FakeDist("shop-measures")),
    FakeEntryPoint("moon_ratio", "moon:RAISER", RAISER, FakeDist("moon")),
    FakeEntryPoint("wrong_shape", "moon:WRONG_SHAPE", WRONG_SHAPE),
    FakeEntryPoint("two_args", "odd:TWO_ARGS", TWO_ARGS, FakeDist("odd-measures")),
    FakeEntryPoint("my_wape", "odd:CLASH", CLASH),
    FakeEntryPoint("a_function", "odd:fn", _stockout_rate),
    FakeEntryPoint("broken", "gone:X", ImportError("No module named 'gone'")),
]


@pytest.fixture
def plugins(monkeypatch: pytest.MonkeyPatch) -> Iterator[list[FakeEntryPoint]]:
    import importlib.metadata

    def entry_points(*, group: str) -> list[FakeEntryPoint]:
        return list(PLUGINS) if group == GROUP else []

    monkeypatch.setattr(importlib.metadata, "entry_points", entry_points)
    reset_plugins()
    try:
        yield PLUGINS
    finally:
        reset_plugins()


def test_plugins_join_the_registry_and_bad_ones_are_rejected_by_name(
    plugins: list[FakeEntryPoint]
) -> None:
    rejected = {p.name: p for p in load_plugins()}
    assert get_measure("stockout_rate").origin == (
        "plugin stockout_rate = shop_measures:STOCKOUT (shop-measures)")
    assert get_measure("moon_ratio").id == "moon_ratio"
    assert set(rejected) == {"two_args", "my_wape", "a_function", "broken"}
    two = rejected["two_args"].message
    assert "'two_args' (odd:TWO_ARGS) from package 'odd-measures' was rejected" in two
    assert "exactly one positional argument" in two and "(data, extra)" in two
    assert "clashes with the measure 'WAPE %' (built-in)" in rejected["my_wape"].message
    assert "not an accuracy_checks.measures.Measure" in rejected["a_function"].message
    assert "could not be imported (ImportError: No module named 'gone')" in (
        rejected["broken"].message)
    assert "two_args" not in MEASURES and MEASURES["wape"].label == "WAPE %"
    assert rejected_plugins() == list(rejected.values())  # loaded once


def test_register_measure_checks_the_signature_too() -> None:
    with pytest.raises(ValueError, match="exactly one positional argument"):
        register_measure(TWO_ARGS)
    with pytest.raises(ValueError, match="exactly one of from_stats"):
        register_measure(Measure("no_formula", "x", "", "lower", description="x"))
    with pytest.raises(ValueError, match="lower-case letters"):
        register_measure(Measure("Bad-Id", "x", "", "lower", compute=_stockout_rate))
    assert "two_args" not in MEASURES and "no_formula" not in MEASURES


def _config(project_text: str) -> str:
    return project_text.replace(
        "    wape: {warn: 25, fail: 40}\n",
        "    wape: {warn: 25, fail: 40}\n    stockout_rate: {warn: 50, fail: 90}\n")


def test_plugin_measures_run_and_a_raising_plugin_is_an_error(
    plugins: list[FakeEntryPoint], make_project: Callable[..., Project]
) -> None:
    text = _config(CONFIG.format(extra="")).replace(
        "  min_obs: 2\n", "  min_obs: 2\n  measures: [moon_ratio, wrong_shape]\n")
    project = make_project(config_text=text)
    report = run_checks(load_config(project.config))
    # the good plugin: every forecast is 3 % low, so every row is a stock-out
    stockout = [r for r in report.results if r.check == "accuracy" and r.measure == "stockout_rate"]
    assert {r.segment for r in stockout} == {"*", "tools", "plants"}
    assert all(r.value == 100.0 and r.status == "fail" for r in stockout)
    # the raising plugin: its results are errors carrying the plugin's message
    moon = [r for r in report.results if r.check == "accuracy" and r.measure == "moon_ratio"]
    assert moon and all(r.status == "error" for r in moon)
    assert "raised ValueError: cannot divide by the moon" in moon[0].message
    assert "plugin moon_ratio = moon:RAISER (moon)" in moon[0].message
    shape = [r for r in report.results if r.check == "accuracy" and r.measure == "wrong_shape"]
    assert shape and all(r.status == "error" and "rows for" in r.message for r in shape)
    # the rest still ran, and the run's status reflects the errors
    assert [r for r in report.results if r.measure == "wape" and r.status == "pass"]
    assert report.status == "fail"
    warned = [r for r in report.results if r.check == "accuracy.plugins"]
    assert {r.details["entry_point"] for r in warned} == {
        "two_args", "my_wape", "a_function", "broken"}
    assert all(r.status == "warn" for r in warned)


def test_a_threshold_on_a_rejected_plugin_is_a_config_error(
    plugins: list[FakeEntryPoint], make_project: Callable[..., Project]
) -> None:
    text = CONFIG.format(extra="").replace(
        "    wape: {warn: 25, fail: 40}\n",
        "    wape: {warn: 25, fail: 40}\n    two_args: {warn: 1}\n")
    project = make_project(config_text=text)
    with pytest.raises(ConfigError, match="unknown measure 'two_args'"):
        load_config(project.config)
