"""The names a config is checked against, handed in by the caller: the measure catalogue.

The config layer declares and checks structure only; it imports neither the measure registry
nor pandas. Which measure ids a threshold or a measure list may name, which way each measure is
better, what inputs each needs, and which frequencies the period grid understands come from a
:class:`Catalogue` that the caller hands to the validation (pydantic's validation context,
``Config.model_validate(raw, context={"catalogue": catalogue})``; the loaders take
``catalogue=``). :func:`accuracy_checks.load_config` hands in the registered measures, the
coverage figures and the grid's frequency parser (:mod:`accuracy_checks.measures.catalogue`).

Without a catalogue (a ``Config`` built in code, or the loaders called without one) the names
and the frequency are left unchecked; the structure is checked all the same.
"""

from __future__ import annotations

import difflib
from collections.abc import Callable, Iterable, Mapping
from dataclasses import dataclass, field
from typing import Any

from pydantic import ValidationInfo

from accuracy_checks.config.levels import Direction

__all__ = [
    "CONTEXT_KEY",
    "INPUTS",
    "Catalogue",
    "MeasureInfo",
    "catalogue_of",
    "check_frequency",
    "check_measure_list",
    "did_you_mean",
    "has_central_interval",
    "unknown_measure",
    "unmet_inputs",
]

#: The key of the catalogue in pydantic's validation context.
CONTEXT_KEY = "catalogue"

#: What each input a measure may need (``Measure.needs``) asks of the config.
INPUTS: dict[str, str] = {
    "costs": "a `costs` section (unit costs of under- and over-forecasting)",
    "quantiles": "quantile columns in `forecast.quantiles`",
    "intervals": "two quantile levels τ and 1 − τ in `forecast.quantiles` (e.g. 0.1 and 0.9)",
}


@dataclass(frozen=True)
class MeasureInfo:
    """What the config needs to know of one measure a threshold may name."""

    direction: Direction
    #: ``"%"``, ``"pp"``, ``"units"``, ``"money"``, ``"count"`` or ``""`` (a ratio)
    unit: str
    #: the readable name offered by editors (the JSON Schema's descriptions)
    label: str
    #: inputs the config must provide (keys of :data:`INPUTS`; others are not the config's)
    needs: frozenset[str] = field(default_factory=frozenset)


@dataclass(frozen=True)
class Catalogue:
    """The measures a config may name, and the check of its ``frequency``.

    ``frequency`` raises ``ValueError`` for a frequency the period grid cannot use; ``None``
    leaves the frequency unchecked.
    """

    measures: Mapping[str, MeasureInfo]
    frequency: Callable[[str], object] | None = None

    def directions(self) -> dict[str, tuple[Direction, str]]:
        """Every measure id → (direction, unit)."""
        return {m: (info.direction, info.unit) for m, info in self.measures.items()}


def catalogue_of(info: ValidationInfo) -> Catalogue | None:
    """The catalogue handed to this validation, if any."""
    context: Any = info.context
    if isinstance(context, Mapping):
        found = context.get(CONTEXT_KEY)
        if isinstance(found, Catalogue):
            return found
    return None


def did_you_mean(word: str, candidates: Iterable[str]) -> str:
    """`` — did you mean 'x'?`` for the closest candidate, or ``""``.

    >>> did_you_mean("wapee", ["wape", "mape", "mase"])
    " — did you mean 'wape'?"
    """
    match = difflib.get_close_matches(word, list(candidates), n=1, cutoff=0.6)
    return f" — did you mean {match[0]!r}?" if match else ""


def unknown_measure(where: str, measure: str, catalogue: Catalogue, *, also: str = "") -> str:
    """The message for an unknown measure id named at ``where`` (``""``: no location)."""
    known = catalogue.measures
    return (
        (f"{where}: " if where else "") + f"unknown measure {measure!r}"
        + did_you_mean(measure, known) + f"; measures: {also}{', '.join(sorted(known))}"
    )


def check_measure_list(measures: list[str], catalogue: Catalogue | None) -> list[str]:
    """Measure ids (or ``all``) named in a list key, without repeats; each known to
    ``catalogue`` (unchecked without one)."""
    if catalogue is not None:
        for measure in measures:
            if measure != "all" and measure not in catalogue.measures:
                raise ValueError(unknown_measure("", measure, catalogue, also="all, "))
    return list(dict.fromkeys(measures))


def check_frequency(frequency: str, catalogue: Catalogue | None) -> str:
    """``frequency`` if the catalogue's grid understands it (unchecked without one)."""
    if catalogue is not None and catalogue.frequency is not None:
        try:
            catalogue.frequency(frequency)
        except ValueError as exc:
            raise ValueError(
                f"{frequency!r} is not a pandas offset alias (e.g. D, W-MON, MS, QS)"
            ) from exc
    return frequency


def unmet_inputs(named: Iterable[tuple[str, str]], have: Mapping[str, bool],
                 catalogue: Catalogue) -> None:
    """Raise ``ValueError`` for the first ``(where, measure)`` whose measure needs an input
    that ``have`` says the config lacks (unknown measures and inputs are not the concern)."""
    for where, measure in named:
        info = catalogue.measures.get(measure)
        for need in sorted(info.needs if info is not None else ()):
            if not have.get(need, True):
                raise ValueError(f"{where} names {measure!r}, which needs {INPUTS[need]}")


def has_central_interval(levels: Iterable[float]) -> bool:
    """Whether two quantile levels τ < 0.5 < 1 − τ form a central interval.

    >>> has_central_interval([0.1, 0.5, 0.9]), has_central_interval([0.1, 0.8])
    (True, False)
    """
    levels = sorted(set(levels))
    return any(lo < 0.5 < hi and abs(lo + hi - 1.0) < 1e-9 for lo in levels for hi in levels)
