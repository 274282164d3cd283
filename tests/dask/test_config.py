"""The ``engine`` key (accuracy_checks/config/engines.py) and its place in the JSON Schema."""

from __future__ import annotations

import pytest

from accuracy_checks.config.engines import Engine
from accuracy_checks.errors import ConfigError
from accuracy_checks.measures.catalogue import json_schema, parse_config
from tests.support.configs import small_config


def engine_of(extra: str) -> Engine:
    return parse_config(small_config() + extra).engine


def test_default_is_pandas_and_a_name_is_enough() -> None:
    assert parse_config(small_config()).engine == Engine(name="pandas")
    assert engine_of("engine: dask\n") == Engine(name="dask")


def test_dask_with_its_cluster() -> None:
    got = engine_of("engine: {name: dask, workers: 2, memory_limit: 4GB}\n")
    assert (got.name, got.workers, got.memory_limit, got.scheduler) == ("dask", 2, "4GB", None)
    got = engine_of("engine: {name: dask, scheduler: 'tcp://127.0.0.1:8786'}\n")
    assert got.scheduler == "tcp://127.0.0.1:8786"


@pytest.mark.parametrize(("extra", "words"), [
    ("engine: {name: dask, workrs: 2}\n", "did you mean 'workers'"),
    ("engin: dask\n", "did you mean 'engine'"),
    ("engine: spark\n", "engine.name"),
    ("engine: {name: pandas, workers: 2}\n", "dask engine only"),
    ("engine: {name: dask, memory_limit: lots}\n", "is not a size"),
    ("engine: {name: dask, scheduler: 'tcp://h:1', workers: 3}\n", "that cluster's own"),
])
def test_refused_with_a_message_naming_the_key(extra: str, words: str) -> None:
    with pytest.raises(ConfigError, match="engine") as err:
        engine_of(extra)
    assert words in str(err.value)


def test_json_schema_has_the_engine_key() -> None:
    schema = json_schema()
    engine = schema["properties"]["engine"]
    assert {"enum": ["pandas", "dask"], "type": "string"} in engine["anyOf"]
    defs = schema["$defs"]["Engine"]
    assert set(defs["properties"]) == {"name", "scheduler", "workers", "memory_limit"}
    assert defs["additionalProperties"] is False
