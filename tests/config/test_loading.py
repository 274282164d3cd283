"""Config validation: every mistake names the key and says how to fix it."""

from __future__ import annotations

import json
from pathlib import Path

import jsonschema
import pytest

from accuracy_checks.errors import ConfigError
from accuracy_checks.measures.catalogue import json_schema, load_config, parse_config
from tests.support.configs import small_config
from tests.support.paths import REPO

BASE = small_config()


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
    text = (REPO / "fixtures" / "contract-example.yaml").read_text()
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


@pytest.mark.parametrize(("old", "new", "expected"), [
    pytest.param("horizon: 13", "horizon: 0", ["`horizon`", "at least 1"],
                 id="horizon-must-be-positive"),
    pytest.param("W-MON", "fortnightly", ["`frequency`", "offset alias"], id="bad-frequency"),
    pytest.param("frequency: W-MON\n", "", ["`frequency` is required"],
                 id="missing-required-key"),
    pytest.param("keys: [store, product]", "keys: [store, period]", ["reserved"],
                 id="reserved-key-column-name"),
])
def test_a_broken_base_value_is_named(old: str, new: str, expected: list[str]) -> None:
    assert old in BASE
    msg = error_of(base=BASE.replace(old, new))
    assert all(part in msg for part in expected), msg


def test_lags_within_the_horizon() -> None:
    msg = error_of("evaluation: {lags: [1, 14]}\n")
    assert "[14] lie beyond the horizon of 13" in msg


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
    text = (REPO / "fixtures" / "contract-example.yaml").read_text()
    jsonschema.validate(yaml.safe_load(text), schema)
    with pytest.raises(jsonschema.ValidationError):
        jsonschema.validate({"version": 1, "forecast": {}, "bogus": 1}, schema)


def test_actuals_keys_must_pair_with_the_forecast_keys() -> None:
    base = BASE.replace("value: units_sold}", "value: units_sold, keys: [shop]}")
    msg = error_of(base=base)
    assert "actuals.keys ['shop'] has 1 column(s)" in msg
    assert "forecast.keys ['store', 'product'] has 2" in msg
    ok = parse(base=BASE.replace("value: units_sold}", "value: units_sold, keys: [shop, sku]}"))
    assert ok.actual_keys == ["shop", "sku"]


def test_horizon_has_an_upper_bound() -> None:
    assert parse(base=BASE.replace("horizon: 13", "horizon: 1000")).horizon == 1000
    msg = error_of(base=BASE.replace("horizon: 13", "horizon: 1001"))
    assert "`horizon`" in msg and "at most 1000" in msg


def test_date_formats_name_a_date_column_of_their_section() -> None:
    cfg = parse(base=BASE.replace("issued: issued_on}",
                                  'issued: issued_on, date_formats: {week: "%d/%m/%Y"}}'))
    assert cfg.forecast.date_formats == {"week": "%d/%m/%Y"}
    cfg = parse(base=BASE.replace("value: units_sold}",
                                  'value: units_sold, date_formats: {week: "%Y%m%d"}}'))
    assert cfg.actuals.date_formats == {"week": "%Y%m%d"}
    msg = error_of(base=BASE.replace("issued: issued_on}",
                                     'issued: issued_on, date_formats: {units: "%d/%m/%Y"}}'))
    assert "forecast.date_formats" in msg and "'units'" in msg and "'week'" in msg
    assert "'issued_on'" in msg
    msg = error_of(base=BASE.replace("value: units_sold}",
                                     'value: units_sold, date_formats: {issued_on: "%d"}}'))
    assert "actuals.date_formats" in msg and "not a date column of the actuals" in msg


@pytest.mark.parametrize("fmt", ["dd/mm/yyyy", "%H:%M", "%a", "%d/%m/%Q", "%d/%m/%"])
def test_date_formats_must_be_strftime_date_patterns(fmt: str) -> None:
    msg = error_of(base=BASE.replace("issued: issued_on}",
                                     f'issued: issued_on, date_formats: {{week: "{fmt}"}}}}'))
    assert "`forecast.date_formats.week`" in msg and "%d/%m/%Y" in msg


@pytest.mark.parametrize("fmt", ["%Y%m%d", "%d.%m.%y", "%G-W%V-%u", "%d %b %Y %H:%M", "%Y"])
def test_usual_date_formats_are_accepted(fmt: str) -> None:
    cfg = parse(base=BASE.replace("issued: issued_on}",
                                  f'issued: issued_on, date_formats: {{week: "{fmt}"}}}}'))
    assert cfg.forecast.date_formats == {"week": fmt}
