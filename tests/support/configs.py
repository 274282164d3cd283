"""The tests' configs, written from one description so no test spells their common part again.

The invented files' columns (:data:`FORECAST_COLUMNS`, :data:`ACTUALS_COLUMNS`) are named once;
:func:`small_config` writes the short config of the unit tests (each source on one line), and
:func:`yaml_text` writes a nested mapping as the block YAML a person would type: the project of
``tests/support/project.py`` and the readers' config of ``tests/support/sources.py`` are such
mappings. The texts are the ones the tests always used, to the byte (tests edit them with
``str.replace``). The keys themselves: docs/config.md.
"""

from __future__ import annotations

from collections.abc import Mapping

#: the forecast file's columns in every test config (keys, period, value, issue date)
FORECAST_COLUMNS: Mapping[str, object] = {
    "keys": "[store, product]", "period": "week", "value": "units", "issued": "issued_on"}
#: the actuals file's columns in every test config
ACTUALS_COLUMNS: Mapping[str, object] = {"period": "week", "value": "units_sold"}


def flow(mapping: Mapping[object, object]) -> str:
    """``mapping`` as a YAML flow mapping on one line, e.g. ``{warn: 5, fail: 10}``; values are
    written as they are (a string holds its own YAML)."""
    return "{" + ", ".join(f"{key}: {value}" for key, value in mapping.items()) + "}"


def levels(warn: object, fail: object) -> str:
    """A threshold's warn and fail levels: ``{warn: 5, fail: 10}``."""
    return flow({"warn": warn, "fail": fail})


def yaml_text(doc: Mapping[str, object], indent: str = "") -> str:
    """``doc`` as block YAML, two spaces a level: a nested mapping opens a block; any other
    value is written as it is after its key (a string holds its own YAML: ``[1, 4]``, a
    :func:`flow` mapping). Every line ends with a newline."""
    return "".join(
        f"{indent}{key}:\n{yaml_text(value, indent + '  ')}" if isinstance(value, Mapping)
        else f"{indent}{key}: {value}\n"
        for key, value in doc.items())


def small_config(*, store: str | None = None, frequency: str = "W-MON", horizon: object = 13,
                 keys: str = "[store, product]", **sections: object) -> str:
    """The unit tests' config: forecast ``f.csv`` and actuals ``a.csv`` of the usual columns
    (``keys`` replaced when given), the store when given, the frequency and the horizon, then
    ``sections`` in the order given (values as :func:`yaml_text` writes them)."""
    doc: dict[str, object] = {
        "version": 1,
        "forecast": flow({"path": "f.csv", **FORECAST_COLUMNS, "keys": keys}),
        "actuals": flow({"path": "a.csv", **ACTUALS_COLUMNS}),
    }
    if store is not None:
        doc["store"] = store
    return yaml_text({**doc, "frequency": frequency, "horizon": horizon, **sections})


def template(text: str) -> str:
    """``text`` as a ``str.format`` template that gives ``text`` back (its braces doubled)."""
    return text.replace("{", "{{").replace("}", "}}")
