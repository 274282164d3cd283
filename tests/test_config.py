"""Config validation: every mistake names the key and says how to fix it."""

from __future__ import annotations

import json
from pathlib import Path

import jsonschema
import pytest

from accuracy_checks.config import json_schema, load_config, parse_config
from accuracy_checks.errors import ConfigError

BASE = """\
version: 1
forecast: {path: f.csv, keys: [store, product], period: week, value: units, issued: issued_on}
actuals: {path: a.csv, period: week, value: units_sold}
frequency: W-MON
horizon: 13
"""


def parse(extra: str = "", base: str = BASE) -> object:
    return parse_config(base + extra, source=Path("/cfg/accuracy-checks.yaml"))


def error_of(extra: str = "", base: str = BASE) -> str:
    with pytest.raises(ConfigError) as info:
        parse(extra, base)
    return str(info.value)


def test_minimal_config_resolves_paths_against_the_config_folder() -> None:
    cfg = parse("history: h/earlier.csv\nstore: sqlite:///.ac/audit.db\n")
    assert cfg.forecast.path == Path("/cfg/f.csv")
    assert cfg.actuals.path == Path("/cfg/a.csv")
    assert cfg.history_paths == [Path("/cfg/h/earlier.csv")]
    assert cfg.archive == Path("/cfg/.accuracy_checks/archive")
    assert cfg.store == "sqlite:////cfg/.ac/audit.db"
    assert cfg.actual_keys == ["store", "product"]
    assert cfg.evaluation.lags == [1]


def test_the_product_contract_example_is_valid(tmp_path: Path) -> None:
    text = (Path(__file__).parent.parent / "fixtures" / "contract-example.yaml").read_text()
    cfg = parse_config(text, source=tmp_path / "c.yaml")
    assert cfg.forecast.quantiles == {0.1: "p10", 0.9: "p90"}
    assert cfg.thresholds.segments["seasonal-plants"]["wape"].warn == 40


def test_unknown_key_names_the_path_and_the_closest_key() -> None:
    msg = error_of("evaluation: {lags: [1], windw: 4}\n")
    assert "unknown key `evaluation.windw`" in msg
    assert "did you mean 'window'" in msg
    assert "/cfg/accuracy-checks.yaml" in msg


def test_unknown_top_level_key() -> None:
    msg = error_of("treshold: {}\n")
    assert "unknown key `treshold`" in msg and "did you mean 'thresholds'" in msg


def test_unknown_measure_in_thresholds_suggests_the_closest() -> None:
    msg = error_of("thresholds: {default: {wapee: {warn: 1, fail: 2}}}\n")
    assert "thresholds.default.wapee" in msg and "did you mean 'wape'" in msg


def test_unknown_key_inside_a_level() -> None:
    msg = error_of("thresholds: {default: {wape: {warn: 1, fial: 2}}}\n")
    assert "thresholds.default.wape" in msg and "fial" in msg and "did you mean 'fail'" in msg


def test_warn_beyond_fail_is_an_error() -> None:
    msg = error_of("thresholds: {default: {wape: {warn: 40, fail: 25}}}\n")
    assert "thresholds.default.wape" in msg and "warn 40 is beyond fail 25" in msg


def test_asymmetric_bias_bounds_must_nest() -> None:
    ok = parse("thresholds: {segments: {pets: {bias_pct: {warn: [-5, 8], fail: [-10, 15]}}}}\n")
    assert ok.thresholds.segments["pets"]["bias_pct"].fail == (-10, 15)
    msg = error_of("thresholds: {default: {bias_pct: {warn: [-12, 8], fail: [-10, 15]}}}\n")
    assert "must lie inside the fail level" in msg
    msg = error_of("thresholds: {default: {bias_pct: {warn: 5, fail: 4}}}\n")
    assert "must lie inside" in msg


def test_pair_bounds_only_for_centred_measures() -> None:
    msg = error_of("thresholds: {default: {wape: {warn: [1, 2]}}}\n")
    assert "[low, high] pair only suits" in msg


def test_horizon_must_be_positive() -> None:
    msg = error_of(base=BASE.replace("horizon: 13", "horizon: 0"))
    assert "`horizon`" in msg and "at least 1" in msg


def test_lags_within_the_horizon() -> None:
    msg = error_of("evaluation: {lags: [1, 14]}\n")
    assert "[14] lie beyond the horizon of 13" in msg


def test_bad_frequency() -> None:
    msg = error_of(base=BASE.replace("W-MON", "fortnightly"))
    assert "`frequency`" in msg and "offset alias" in msg


def test_missing_required_key() -> None:
    msg = error_of(base=BASE.replace("frequency: W-MON\n", ""))
    assert "`frequency` is required" in msg


def test_reserved_key_column_name() -> None:
    msg = error_of(base=BASE.replace("keys: [store, product]", "keys: [store, period]"))
    assert "reserved" in msg


def test_yaml_errors_and_duplicate_keys_name_the_line() -> None:
    msg = error_of("horizon: 4\n")
    assert "given twice" in msg and "line 6" in msg
    msg = error_of("thresholds: {default: [\n")
    assert "not valid YAML" in msg


def test_empty_and_non_mapping_files(tmp_path: Path) -> None:
    empty = tmp_path / "empty.yaml"
    empty.write_text("")
    with pytest.raises(ConfigError, match="is empty"):
        load_config(empty)
    listy = tmp_path / "list.yaml"
    listy.write_text("- a\n- b\n")
    with pytest.raises(ConfigError, match="must be a mapping"):
        load_config(listy)
    with pytest.raises(ConfigError, match="does not exist"):
        load_config(tmp_path / "nope.yaml")


def test_json_schema_validates_the_contract_example() -> None:
    import yaml

    schema = json_schema()
    json.dumps(schema)
    text = (Path(__file__).parent.parent / "fixtures" / "contract-example.yaml").read_text()
    jsonschema.validate(yaml.safe_load(text), schema)
    with pytest.raises(jsonschema.ValidationError):
        jsonschema.validate({"version": 1, "forecast": {}, "bogus": 1}, schema)
