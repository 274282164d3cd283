"""The built-in measures' registry entries, field by field, against a stored snapshot.

``registry_snapshot.json`` was written from the registry before its declarations became tables
(docs/measures.md lists the same measures); a change to any field of a built-in measure (id,
label, unit, direction, wording, display order, headline rank, inputs, window, formula, hooks,
facts, description) must show up here as a deliberate edit of that file.
"""

from __future__ import annotations

import json
from collections.abc import Callable
from pathlib import Path
from typing import Any

from accuracy_checks.measures.registry import MEASURES

SNAPSHOT = Path(__file__).with_name("registry_snapshot.json")


def _name(function: Callable[..., Any] | None) -> str | None:
    return None if function is None else function.__name__


def snapshot() -> list[dict[str, Any]]:
    """Every built-in measure's fields, in registration order (callables by name)."""
    return [
        {"id": m.id, "label": m.label, "unit": m.unit, "direction": m.direction,
         "wording": m.wording, "words": m.words, "order": m.order, "headline": m.headline,
         "needs": sorted(m.needs), "window": m.window, "bias_type": m.bias_type,
         "origin": m.origin, "from_stats": _name(m.from_stats), "compute": _name(m.compute),
         "levels": _name(m.levels), "breach_counts": _name(m.breach_counts),
         "facts": _name(m.facts), "description": m.description}
        for m in MEASURES.values() if m.origin == "built-in"
    ]


def test_every_built_in_measure_keeps_its_registry_fields() -> None:
    expected = json.loads(SNAPSHOT.read_text(encoding="utf-8"))
    actual = snapshot()
    assert [m["id"] for m in actual] == [m["id"] for m in expected]
    for got, want in zip(actual, expected, strict=True):
        assert got == want, got["id"]


def test_a_measure_words_its_facts_and_the_inputs_it_lacks() -> None:
    mase = MEASURES["mase"]
    assert mase.facts_words({"n_series_skipped": 0}, None) == ""
    assert mase.facts_words({"n_series_skipped": 3, "seasonal_period": 7}, None) == (
        "3 series skipped (too little history for m = 7, or a zero scale).")
    assert MEASURES["wape"].facts_words({"anything": 1}, "%") == ""
    assert MEASURES["error_cost"].facts_words(
        {"under_cost": 12.0, "over_cost": 3.5, "tau_star": None}, "EUR") == (
        "Under-forecasting cost 12 EUR, over-forecasting 3.5 EUR.")
    assert MEASURES["msis"].needs_words(["history", "intervals", "other"]) == (
        "the actuals history (to scale errors or build the naive baselines); a central "
        "interval: two quantile levels τ and 1 − τ in forecast.quantiles (e.g. 0.1 and 0.9); "
        "other")
