"""The config's JSON Schema (``accuracy-checks schema``) against the CLI's own validator.

Editors validate and complete the config with the printed schema, so it must reject every
name the CLI rejects (keys, measure ids) and accept every config the CLI accepts. Schemas are
checked with ``jsonschema`` (Draft 2020-12, as the schema declares).
"""

from __future__ import annotations

import json
from collections.abc import Callable, Iterator
from pathlib import Path
from typing import Any

import jsonschema
import pytest
import yaml

from accuracy_checks.cli.main import main
from accuracy_checks.errors import ConfigError
from accuracy_checks.measures.catalogue import json_schema, measure_directions, parse_config
from accuracy_checks.measures.plugins import GROUP, reset_plugins
from accuracy_checks.measures.registry import Measure
from tests.support.paths import REPO
from tests.support.project import CONFIG, FakeDist, FakeEntryPoint, Project

FIXTURES = REPO / "fixtures"

#: A valid config naming measures in every place that takes one (and a segment override).
BASE = CONFIG.format(extra="""\
    mase: {warn: 1.0, fail: 1.5}
  segments:
    tools:
      bias_pct: {warn: [-8, 5], fail: [-15, 10]}
      wape: {warn: 30, fail: 45}
costs:
  default: {under: 3.0, over: 1.0}
drift:
  cycles: 10
  measures: [wape, bias_pct]
""").replace("  min_obs: 2\n", "  min_obs: 2\n  measures: [mase, error_cost]\n")

#: (id, text to replace in BASE, its replacement): each makes a config the CLI rejects for a
#: misspelt key or measure name.
BAD_NAMES = [
    ("top-level key", "horizon: 4\n", "horizn: 4\n"),
    ("top-level key thresholds", "thresholds:\n", "treshold:\n"),
    ("nested key", "  window: 2\n", "  windw: 2\n"),
    ("forecast key", "  issued: issued_on\n", "  issue: issued_on\n"),
    ("drift key", "  cycles: 10\n", "  cycels: 10\n"),
    ("costs key", "{under: 3.0, over: 1.0}", "{undr: 3.0, over: 1.0}"),
    ("level key", "mase: {warn: 1.0,", "mase: {wran: 1.0,"),
    ("segments key", "  columns: [category]\n", "  column: [category]\n"),
    ("thresholds key", "  segments:\n    tools:", "  segment:\n    tools:"),
    ("threshold measure in default", "    wape: {warn: 25,", "    wapee: {warn: 25,"),
    ("threshold measure in default, case", "    mase: {warn", "    MASE: {warn"),
    ("threshold measure in a segment", "      bias_pct: {warn: [-8", "      bias_pc: {warn: [-8"),
    ("evaluation.measures", "measures: [mase, error_cost]", "measures: [mase, eror_cost]"),
    ("evaluation.measures, plugin not installed", "measures: [mase, error_cost]",
     "measures: [mase, stockout_rate]"),
    ("drift.measures", "measures: [wape, bias_pct]", "measures: [wap, bias_pct]"),
    ("drift.measures, All", "measures: [wape, bias_pct]", "measures: [All]"),
]


def _as_json(text: str) -> Any:
    """The YAML as an editor's schema validator sees it: JSON (mapping keys as strings)."""
    return json.loads(json.dumps(yaml.safe_load(text)))


def _schema_errors(text: str, schema: dict[str, Any] | None = None) -> list[str]:
    validator = jsonschema.Draft202012Validator(schema or json_schema())
    return [e.message for e in validator.iter_errors(_as_json(text))]


def _cli_schema(capsys: pytest.CaptureFixture[str]) -> dict[str, Any]:
    assert main(["schema"]) == 0
    schema: dict[str, Any] = json.loads(capsys.readouterr().out)
    jsonschema.Draft202012Validator.check_schema(schema)
    return schema


def test_the_base_config_is_valid_for_both() -> None:
    parse_config(BASE, source=Path("/cfg/accuracy-checks.yaml"))
    assert _schema_errors(BASE) == []


@pytest.mark.parametrize(("old", "new"), [b[1:] for b in BAD_NAMES], ids=[b[0] for b in BAD_NAMES])
def test_a_name_the_cli_rejects_the_schema_rejects(old: str, new: str) -> None:
    assert BASE.count(old) == 1, old
    text = BASE.replace(old, new)
    with pytest.raises(ConfigError):
        parse_config(text, source=Path("/cfg/accuracy-checks.yaml"))
    assert _schema_errors(text) != []


@pytest.mark.parametrize(("old", "new"), [b[1:] for b in BAD_NAMES], ids=[b[0] for b in BAD_NAMES])
def test_through_the_cli_validate_and_schema_agree(
    make_project: Callable[..., Project], capsys: pytest.CaptureFixture[str], old: str, new: str
) -> None:
    schema = _cli_schema(capsys)
    project = make_project(config_text=BASE)
    assert main(["validate", "--config", str(project.config)]) == 0
    assert _schema_errors(project.config.read_text(), schema) == []

    project.config.write_text(BASE.replace(old, new), encoding="utf-8")
    assert main(["validate", "--config", str(project.config)]) == 2
    assert "Traceback" not in capsys.readouterr().err
    assert _schema_errors(project.config.read_text(), schema) != []


def test_measure_names_are_offered_for_completion(capsys: pytest.CaptureFixture[str]) -> None:
    schema = _cli_schema(capsys)
    known = sorted(measure_directions())
    levels = schema["$defs"]["MeasureLevels"]
    assert sorted(levels["properties"]) == known
    assert levels["additionalProperties"] is False
    assert "lower is better" in levels["properties"]["wape"]["description"]
    assert schema["$defs"]["MeasureName"]["enum"] == ["all", *known]
    thresholds = schema["$defs"]["Thresholds"]["properties"]
    assert thresholds["default"] == {"$ref": "#/$defs/MeasureLevels"}
    assert thresholds["segments"]["additionalProperties"] == {"$ref": "#/$defs/MeasureLevels"}
    for model in ("Evaluation", "Drift"):
        items = schema["$defs"][model]["properties"]["measures"]["items"]
        assert items == {"$ref": "#/$defs/MeasureName"}


@pytest.mark.parametrize("where", ["evaluation", "drift"])
def test_all_is_accepted_in_the_measure_lists(where: str) -> None:
    old = {"evaluation": "[mase, error_cost]", "drift": "[wape, bias_pct]"}[where]
    text = BASE.replace(f"measures: {old}", "measures: [all]")
    parse_config(text, source=Path("/cfg/accuracy-checks.yaml"))
    assert _schema_errors(text) == []


def test_the_demo_config_is_valid(tmp_path: Path) -> None:
    from accuracy_checks.demo.scenario import generate_scenario

    text = generate_scenario(tmp_path / "demo").config_path.read_text(encoding="utf-8")
    assert _schema_errors(text) == []


@pytest.mark.parametrize("path", sorted(FIXTURES.glob("*.yaml")), ids=lambda p: p.name)
def test_the_fixture_configs_are_valid(path: Path) -> None:
    text = path.read_text(encoding="utf-8")
    parse_config(text, source=path)
    assert _schema_errors(text) == []


# --------------------------------------------------------------------------- plugins

STOCKOUT = Measure(id="stockout_rate", label="Stock-out rate", unit="%", direction="lower",
                   compute=lambda data: data, description="rows with actual > forecast, %")


@pytest.fixture
def stockout_plugin(monkeypatch: pytest.MonkeyPatch) -> Iterator[None]:
    import importlib.metadata

    plugins = [FakeEntryPoint("stockout_rate", "shop_measures:STOCKOUT", STOCKOUT,
                              FakeDist("shop-measures"))]

    def entry_points(*, group: str) -> list[FakeEntryPoint]:
        return list(plugins) if group == GROUP else []

    monkeypatch.setattr(importlib.metadata, "entry_points", entry_points)
    reset_plugins()
    try:
        yield
    finally:
        reset_plugins()


def test_a_plugin_measure_is_in_the_schema(
    stockout_plugin: None, capsys: pytest.CaptureFixture[str]
) -> None:
    schema = _cli_schema(capsys)
    assert "stockout_rate" in schema["$defs"]["MeasureName"]["enum"]
    level = schema["$defs"]["MeasureLevels"]["properties"]["stockout_rate"]
    assert level["description"] == "Stock-out rate (%; lower is better)"
    text = BASE.replace("measures: [mase, error_cost]", "measures: [mase, stockout_rate]")
    text = text.replace("    mase: {", "    stockout_rate: {warn: 10, fail: 20}\n    mase: {")
    parse_config(text, source=Path("/cfg/accuracy-checks.yaml"))
    assert _schema_errors(text, schema) == []
    assert _schema_errors(text.replace("stockout_rate: {", "stockout_rat: {"), schema) != []


# --------------------------------------------------------------------------- schema --out


def test_schema_out_writes_the_printed_schema(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    printed = _cli_schema(capsys)
    path = tmp_path / "new-folder" / "schema.json"  # the folder is created
    assert main(["schema", "--out", str(path)]) == 0
    assert json.loads(path.read_text(encoding="utf-8")) == printed


def test_schema_out_that_cannot_be_written_is_exit_2(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    blocker = tmp_path / "a-file"
    blocker.write_text("not a folder", encoding="utf-8")
    path = blocker / "schema.json"
    assert main(["schema", "--out", str(path)]) == 2
    err = capsys.readouterr().err
    assert str(path) in err and "--out" in err and "Traceback" not in err
