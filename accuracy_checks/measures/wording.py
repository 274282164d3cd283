"""How a figure reads: numbers, units, levels and a measure's value in words.

The one wording of values, shared by the checks' messages (:mod:`accuracy_checks.checks`),
the fan-out path and every output (:mod:`accuracy_checks.outputs.wording` builds on it), so
that the same figure reads the same everywhere (docs/results.md).

- Numbers are rounded to 3 significant digits (at most 6 decimals, so float noise such as
  ``2e-15`` reads as ``0``), integers are never cut (``12346``, not ``12300``), values of
  magnitude 1e9 and above use scientific notation, and ``-0`` is never shown; ``nan`` and
  ``inf`` read ``undefined``, ``infinity``, ``-infinity``.
- A measure's value is worded as its registry entry says (:attr:`~accuracy_checks.measures.
  registry.Measure.words`): centred measures with the sign convention ``e = actual −
  forecast`` (positive = **under-forecast**), never a bare sign; the others as a number and
  its unit. Percentages are always in percent (``23.4 %``).
"""

from __future__ import annotations

import math
from collections.abc import Mapping
from typing import Any

from accuracy_checks.measures.registry import MEASURES, Measure
from accuracy_checks.results import Reason

__all__ = [
    "format_bound",
    "format_level",
    "format_number",
    "measure_unit",
    "non_finite_words",
    "skipped_series_facts",
    "unit_suffix",
    "value_words",
]

_MAX_DECIMALS = 6
_SCIENTIFIC_FROM = 1e9


def format_number(value: float, sig: int = 3) -> str:
    """Round ``value`` to ``sig`` significant digits for reading; never ``-0``.

    Integer digits are kept (no rounding of 12345.6 to 12300), at most 6 decimals are shown,
    trailing zeros are dropped and magnitudes of 1e9 and above use scientific notation.

    >>> format_number(17.94)
    '17.9'
    >>> format_number(0.0123456)
    '0.0123'
    >>> format_number(12345.6)
    '12346'
    >>> format_number(20.0)
    '20'
    >>> format_number(-0.0000000001)
    '0'
    >>> format_number(1.1259e17)
    '1.13e+17'
    >>> format_number(26.349999999999998), format_number(26.350000000000001)
    ('26.4', '26.4')
    >>> format_number(float("nan")), format_number(float("-inf"))
    ('undefined', '-infinity')
    """
    value = float(value)
    if not math.isfinite(value):
        return non_finite_words(value)
    # first to 12 significant digits: a value that differs from another only in its last bits
    # (sums taken in another order, e.g. by the dask engine) reads the same: 26.349999999999998
    # and 26.350000000000001 are both "26.4"
    value = float(f"{value:.12g}")
    if value == 0:
        return "0"
    if abs(value) >= _SCIENTIFIC_FROM:
        return f"{value:.{sig - 1}e}"
    magnitude = math.floor(math.log10(abs(value)))
    decimals = min(max(sig - 1 - magnitude, 0), _MAX_DECIMALS)
    text = f"{value:.{decimals}f}"
    if "." in text:
        text = text.rstrip("0").rstrip(".")
    if text in ("-0", ""):
        text = "0"
    return text


def non_finite_words(value: float) -> str:
    """A non-finite number in words (``nan``/``inf`` mean nothing to most readers).

    >>> non_finite_words(float("nan")), non_finite_words(float("inf"))
    ('undefined', 'infinity')
    """
    if math.isnan(value):
        return "undefined"
    return "infinity" if value > 0 else "-infinity"


def format_level(value: float) -> str:
    """A threshold level as the user wrote it (6 significant digits), never ``-0``.

    >>> format_level(25.0), format_level(-0.0), format_level(0.125)
    ('25', '0', '0.125')
    """
    text = f"{float(value):g}"
    return "0" if text == "-0" else text


def format_bound(bound: object) -> str:
    """A level in a message: a number (:func:`format_number`) or ``[low, high]``.

    >>> format_bound(25.0), format_bound((-10, 20.5))
    ('25', '[-10, 20.5]')
    """
    if isinstance(bound, tuple):
        return f"[{format_number(bound[0])}, {format_number(bound[1])}]"
    return format_number(float(bound)) if isinstance(bound, float | int) else str(bound)


def unit_suffix(unit: str | None) -> str:
    """The text put after a number of ``unit``: ``" %"``, ``" units"``; nothing for counts.

    >>> unit_suffix("%"), unit_suffix("count"), unit_suffix(None)
    (' %', '', '')
    """
    if unit is None or unit == "count":
        return ""
    return f" {unit}"


def _entry(measure: str | None) -> Measure | None:
    return MEASURES.get(measure) if measure else None


def measure_unit(measure: str | None, unit: str | None = None) -> str | None:
    """The unit of a figure: ``unit`` when given, else its measure's registered unit, else
    ``%`` for an id ending in ``_pct``; ``None`` for a unitless ratio.

    >>> measure_unit("wape"), measure_unit("mase"), measure_unit("x", "count")
    ('%', None, 'count')
    """
    if unit:
        return unit
    entry = _entry(measure)
    if entry is not None:
        return entry.unit or None
    return "%" if (measure or "").endswith("_pct") else None


def value_words(value: float | None, *, measure: str | None = None, unit: str | None = None,
                reason: str | None = None) -> str:
    """The value of a figure in words, as its measure's registry entry words it.

    >>> value_words(17.94, measure="bias_pct")
    'under-forecast by 17.9 %'
    >>> value_words(-4.2, measure="bias_pct"), value_words(0.0, measure="bias_pct")
    ('over-forecast by 4.2 %', 'no bias')
    >>> value_words(12.5, measure="me")
    'under-forecast by 12.5 units on average'
    >>> value_words(-4.25, measure="tracking_signal")
    'sustained over-forecast (tracking signal -4.25)'
    >>> value_words(0.0, measure="trigg")
    "no bias (Trigg's signal 0)"
    >>> value_words(23.44, measure="wape"), value_words(3.0, unit="count")
    ('23.4 %', '3')
    >>> value_words(None, reason="zero_actual"), value_words(None, reason="overflow")
    ('undefined (zero_actual)', 'beyond the floating-point range')
    """
    if value is None or not math.isfinite(float(value)):
        if reason == Reason.OVERFLOW:
            return "beyond the floating-point range"
        return f"undefined ({reason})" if reason else "undefined"
    value = float(value)
    entry = _entry(measure)
    unit = measure_unit(measure, unit)
    words = entry.words if entry is not None else "level"
    if words == "level":
        return f"{format_number(value)}{unit_suffix(unit)}"
    magnitude = format_number(abs(value))
    side = "under-forecast" if value > 0 else "over-forecast"
    if words == "signal":
        assert entry is not None
        prefix = "no bias" if magnitude == "0" else f"sustained {side}"
        return f"{prefix} ({_in_text(entry.label)} {format_number(value)})"
    if magnitude == "0":
        return "no bias"
    if words == "mean_bias":
        return f"{side} by {magnitude} {unit or 'units'} on average"
    return f"{side} by {magnitude}{unit_suffix(unit or '%')}"


def _in_text(label: str) -> str:
    """A sentence-case label inside a sentence: its first letter lowered, unless the label
    starts with a name (``Trigg's signal``)."""
    return label if label.split(" ", 1)[0].endswith("'s") else label[:1].lower() + label[1:]


def skipped_series_facts(details: Mapping[str, Any], unit: str | None) -> str:
    """The facts of a measure averaged per series with a MASE scale (MASE, MSIS): how many
    series it skipped (:attr:`~accuracy_checks.measures.registry.Measure.facts`).

    >>> skipped_series_facts({"n_series_skipped": 2, "seasonal_period": 7}, None)
    '2 series skipped (too little history for m = 7, or a zero scale).'
    """
    skipped = details.get("n_series_skipped")
    if not skipped:
        return ""
    return (f"{skipped} series skipped (too little history for "
            f"m = {details.get('seasonal_period')}, or a zero scale).")
