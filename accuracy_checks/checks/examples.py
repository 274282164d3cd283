"""What every check's result says: example rows as plain JSON values, counted words, and the
columns a check needs.

Shared by the forecast-file checks (:mod:`.output`), the coverage checks (:mod:`.coverage`,
:mod:`.horizon`), the actuals checks (:mod:`.actuals`) and, through them, the GX adapter, so
that one offending row is written the same way in every result (docs/results.md).
"""

from __future__ import annotations

from collections.abc import Sequence
from typing import Any

import numpy as np
import pandas as pd

from accuracy_checks.errors import InputError
from accuracy_checks.results import json_value
from accuracy_checks.sources.codes import combined_codes

__all__ = [
    "all_of",
    "count_series",
    "example_value",
    "pct_text",
    "plural",
    "require_columns",
    "row_examples",
    "verb",
]


# --------------------------------------------------------------------------- example values


def example_value(value: Any) -> Any:
    """A value from an offending row as a JSON-ready value: the result model's
    :func:`~accuracy_checks.results.json_value` with ±inf as ``"infinity"``/``"-infinity"``
    (strict JSON has no infinity and the infinity is often the point), and the text of any
    value that is not a JSON scalar.

    >>> example_value(float("nan")), example_value(float("-inf")), example_value(np.int64(3))
    (None, '-infinity', 3)
    >>> example_value(pd.Timestamp("2026-03-02")), example_value(pd.Timestamp("2026-03-02 06:00"))
    ('2026-03-02', '2026-03-02T06:00:00')
    """
    plain = json_value(value, infinity="text")
    return plain if plain is None or isinstance(plain, str | int | float) else str(plain)


def row_examples(
    frame: pd.DataFrame, positions: np.ndarray, columns: Sequence[str]
) -> list[dict[str, Any]]:
    """The rows at ``positions`` (a handful) as JSON-ready dicts of ``columns``."""
    if len(positions) == 0:
        return []
    rows = frame.iloc[positions]
    values = {c: rows[c].tolist() for c in columns}
    return [{c: example_value(values[c][i]) for c in columns} for i in range(len(positions))]


def count_series(frame: pd.DataFrame, keys: Sequence[str], mask: np.ndarray) -> int:
    """How many distinct series (values of ``keys``) the rows in ``mask`` belong to."""
    if not mask.any():
        return 0
    return int(np.unique(combined_codes(frame, list(keys), mask)).size)


# --------------------------------------------------------------------------- counted words


def plural(n: int, singular: str, many: str | None = None) -> str:
    """``"1 row"``, ``"1,200 rows"``.

    >>> plural(1, "row"), plural(1200, "row"), plural(2, "series", "series")
    ('1 row', '1,200 rows', '2 series')
    """
    return f"{n:,} {singular if n == 1 else (many or singular + 's')}"


def verb(n: int, one: str, many: str) -> str:
    """The verb form that agrees with a count: ``verb(1, "has", "have")`` → ``"has"``."""
    return one if n == 1 else many


def all_of(n: int, noun: str) -> str:
    """``"All 2,400 active series"``, or ``"The 1 active series"`` (``noun`` is plural).

    >>> all_of(3, "rows"), all_of(1, "series")
    ('All 3 rows', 'The 1 series')
    """
    return f"The 1 {noun}" if n == 1 else f"All {n:,} {noun}"


def pct_text(value: float) -> str:
    """A percentage for a sentence: 3 significant digits, no exponent, no ``-0``.

    >>> pct_text(0.5), pct_text(33.3333), pct_text(100.0), pct_text(0.0004167), pct_text(0.0)
    ('0.5', '33.3', '100', '0.000417', '0')
    """
    if value == 0 or not np.isfinite(value):
        return "0" if value == 0 else str(value)
    digits = max(0, 2 - int(np.floor(np.log10(abs(value)))))
    text = f"{round(value, digits):.{digits}f}"
    text = text.rstrip("0").rstrip(".") if "." in text else text
    return "0" if text in ("-0", "") else text


# --------------------------------------------------------------------------- input contract


def require_columns(frame: pd.DataFrame, needed: Sequence[str], *, role: str,
                    checks: str) -> None:
    """Raise :class:`~accuracy_checks.errors.InputError` naming the columns of ``needed`` that
    the ``role`` frame (``"forecast"``, ``"actuals"``) lacks for the ``checks``
    (``"output"``, ``"coverage"``)."""
    missing = [c for c in needed if c not in frame.columns]
    if missing:
        raise InputError(
            f"The {role} frame lacks the column(s) {missing} that the {checks} checks need "
            f"(it has {list(frame.columns)}).",
            missing=missing,
        )
