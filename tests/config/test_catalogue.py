"""The config layer checks structure; the measure names and the frequency come from a catalogue
handed in (``accuracy_checks.measures.catalogue`` hands in the registry's)."""

from __future__ import annotations

import json
import subprocess
import sys
from pathlib import Path

import pytest

from accuracy_checks import config as cfg
from accuracy_checks.config import Catalogue, MeasureInfo
from accuracy_checks.errors import ConfigError
from accuracy_checks.measures.catalogue import (
    CHECK_MEASURES,
    measure_catalogue,
    measure_directions,
    parse_config,
)
from accuracy_checks.measures.registry import registered_measures
from tests.support.configs import small_config

BASE = small_config(keys="[store]")
SOURCE = Path("/cfg/accuracy-checks.yaml")


def test_importing_the_config_loads_neither_pandas_nor_the_measures() -> None:
    code = ("import json, sys, accuracy_checks.config; "
            "print(json.dumps(sorted(m for m in sys.modules "
            "if m.split('.')[0] == 'pandas' or m.startswith('accuracy_checks.measures'))))")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                         check=True).stdout
    assert json.loads(out) == []


def test_the_catalogue_is_the_registry_and_the_coverage_figures() -> None:
    catalogue = measure_catalogue()
    assert set(catalogue.measures) == set(registered_measures()) | set(CHECK_MEASURES)
    mase = catalogue.measures["mase"]
    assert (mase.direction, mase.unit, mase.label, mase.needs) == ("lower", "", "MASE",
                                                                   frozenset({"history"}))
    assert measure_directions()["series_count_change_pct"] == ("centered", "%")
    assert catalogue.frequency is not None and catalogue.frequency("W-MON") is not None


@pytest.mark.parametrize("extra", [
    "thresholds: {default: {wapee: {warn: 1, fail: 2}}}\n",
    "thresholds: {default: {wape: {warn: 40, fail: 25}}}\n",
    "evaluation: {measures: [pinball]}\n",
    "drift: {measures: [wap]}\n",
])
def test_without_a_catalogue_names_are_unchecked_but_the_structure_is(extra: str) -> None:
    with pytest.raises(ConfigError):
        parse_config(BASE + extra, source=SOURCE)
    structural = cfg.parse_config(BASE + extra, source=SOURCE, catalogue=None)
    assert structural.forecast.path == Path("/cfg/f.csv")


def test_without_a_catalogue_the_structure_is_checked_all_the_same() -> None:
    with pytest.raises(ConfigError, match=r"unknown key `evaluation\.windw`"):
        cfg.parse_config(BASE + "evaluation: {windw: 4}\n", source=SOURCE, catalogue=None)
    with pytest.raises(ConfigError, match=r"\[14\] lie beyond the horizon of 13"):
        cfg.parse_config(BASE + "evaluation: {lags: [1, 14]}\n", source=SOURCE, catalogue=None)
    with pytest.raises(ConfigError, match="give a `warn` level, a `fail` level, or both"):
        cfg.parse_config(BASE + "thresholds: {default: {anything: {}}}\n", source=SOURCE,
                         catalogue=None)


def test_a_catalogue_handed_in_decides_the_names_directions_inputs_and_frequency() -> None:
    def frequency(text: str) -> object:
        if text != "fortnight":
            raise ValueError(text)
        return text

    catalogue = Catalogue({"hit_rate": MeasureInfo("higher", "%", "Hit rate",
                                                   frozenset({"quantiles"}))}, frequency)
    base = BASE.replace("W-MON", "fortnight")
    quantiled = base.replace("issued_on}", "issued_on, quantiles: {0.1: p10}}")
    ok = cfg.parse_config(quantiled + "thresholds: {default: {hit_rate: {warn: 90, fail: 80}}}\n",
                          source=SOURCE, catalogue=lambda: catalogue)
    assert ok.thresholds.default["hit_rate"].warn == 90
    with pytest.raises(ConfigError, match="warn 80 is below fail 90"):
        cfg.parse_config(quantiled + "thresholds: {default: {hit_rate: {warn: 80, fail: 90}}}\n",
                         source=SOURCE, catalogue=catalogue)
    with pytest.raises(ConfigError, match="unknown measure 'wape'; measures: hit_rate"):
        cfg.parse_config(base + "thresholds: {default: {wape: {warn: 1}}}\n", source=SOURCE,
                         catalogue=catalogue)
    with pytest.raises(ConfigError, match="names 'hit_rate', which needs quantile columns"):
        cfg.parse_config(base + "evaluation: {measures: [hit_rate]}\n", source=SOURCE,
                         catalogue=catalogue)
    with pytest.raises(ConfigError, match="`frequency`: 'W-MON' is not a pandas offset alias"):
        cfg.parse_config(BASE, source=SOURCE, catalogue=catalogue)


def test_the_schema_without_a_catalogue_leaves_measure_names_open() -> None:
    schema = cfg.json_schema()
    assert "MeasureLevels" not in schema["$defs"]
    json.dumps(schema)
    named = cfg.json_schema(Catalogue({"hit_rate": MeasureInfo("higher", "%", "Hit rate")}))
    levels = named["$defs"]["MeasureLevels"]["properties"]
    assert levels == {"hit_rate": {"$ref": "#/$defs/Level",
                                   "description": "Hit rate (%; higher is better)"}}
