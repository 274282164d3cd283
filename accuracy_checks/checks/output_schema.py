"""The output checks as declarations: one row mask per check and the pandera schema of them.

Each check is one *wide* pandera :class:`~pandera.api.checks.Check` (the check function gets
the whole canonical forecast frame and returns one boolean per row, ``True`` = the row passes)
in one :class:`~pandera.api.pandas.container.DataFrameSchema` (:func:`output_schema`).
:func:`failed_masks` validates lazily (every check runs, every failure is collected) and reads
each failing check's row mask back from ``SchemaErrors.schema_errors[i].check_output``.

A run does not go through pandera: :func:`output_masks` computes the very masks the schema's
checks compute (the same functions), straight from the columns, and keeps those of the
failing checks, as :func:`failed_masks` does (``tests/checks/test_output_schema.py`` holds
the two to each other). Validating would add pandera's own work per check (a Series per
mask, its error tables) and its first-use imports, about a second per run; the schema stays
the declaration other tools validate with. The results are built from the masks in
:mod:`.output`.

Every mask is a numpy operation over whole columns. Duplicates are found on one int64 code per
row (keys from their categorical codes, dates numbered by counting days:
:func:`~accuracy_checks.checks.series_index.date_codes`): a ``bincount`` over the codes when
their space is at most a few times the number of rows, a sort otherwise.
"""

from __future__ import annotations

from collections.abc import Callable, Collection, Sequence
from typing import TYPE_CHECKING

import numpy as np
import pandas as pd

from accuracy_checks.checks.examples import require_columns
from accuracy_checks.checks.series_index import date_codes, key_codes
from accuracy_checks.errors import InputError
from accuracy_checks.sources.codes import combined_codes_and_space
from accuracy_checks.sources.frames import FORECAST, ISSUED, PERIOD, SEGMENT

if TYPE_CHECKING:  # pandera loads only when the schema is built (not in a run)
    import pandera.pandas as pa

__all__ = [
    "DUPLICATE_ROWS",
    "INVALID_VALUES",
    "ISSUE_DATES",
    "NEGATIVE_VALUES",
    "OUTPUT_CHECKS",
    "QUANTILE_ORDER",
    "AllowNegative",
    "as_float",
    "crossing_mask",
    "duplicate_mask",
    "failed_masks",
    "invalid_mask",
    "negative_mask",
    "output_masks",
    "output_schema",
    "require_output_columns",
    "row_codes",
    "stale_issue_mask",
]

DUPLICATE_ROWS = "output.duplicate_rows"
INVALID_VALUES = "output.invalid_values"
NEGATIVE_VALUES = "output.negative_values"
QUANTILE_ORDER = "output.quantile_order"
ISSUE_DATES = "output.issue_dates"
#: The output checks, in the order :func:`~accuracy_checks.checks.output.output_checks`
#: returns them.
OUTPUT_CHECKS: tuple[str, ...] = (
    DUPLICATE_ROWS,
    INVALID_VALUES,
    NEGATIVE_VALUES,
    QUANTILE_ORDER,
    ISSUE_DATES,
)

#: ``True`` (negatives allowed everywhere), ``False`` (nowhere) or the segments that allow them
AllowNegative = bool | Collection[str]


# --------------------------------------------------------------------------- row masks


def as_float(frame: pd.DataFrame, column: str) -> np.ndarray:
    """``column`` as float64 (null → NaN); :class:`InputError` when it is not numeric."""
    try:
        return frame[column].to_numpy(dtype=np.float64, na_value=np.nan)
    except (TypeError, ValueError) as exc:
        raise InputError(
            f"Forecast column {column!r} holds values that are not numbers "
            f"(dtype {frame[column].dtype}); forecasts and quantiles must be numeric.",
            column=column,
        ) from exc


def duplicate_mask(frame: pd.DataFrame, columns: Sequence[str]) -> np.ndarray:
    """True for every row whose values in ``columns`` also occur in another row (missing
    values equal to each other).

    One int64 code per row (:func:`row_codes`); a ``bincount`` over the codes when their space
    is at most :data:`_COUNTED` times the rows (a few integer passes), else a sort, equal
    neighbours being duplicates (the rows then located with ``np.isin`` when there are any).
    """
    if len(frame) < 2:
        return np.zeros(len(frame), dtype=bool)
    codes, space = row_codes(frame, columns)
    if space <= _COUNTED * len(frame):
        return np.bincount(codes, minlength=space)[codes] > 1
    ordered = np.sort(codes)
    repeated = ordered[1:] == ordered[:-1]
    if not repeated.any():
        return np.zeros(len(frame), dtype=bool)
    return np.isin(codes, np.unique(ordered[1:][repeated]))


#: a code space up to this many times the rows is counted (int64 counts: 32 bytes a row)
_COUNTED = 4
_SPACE_LIMIT = 1 << 62


def row_codes(frame: pd.DataFrame, columns: Sequence[str]) -> tuple[np.ndarray, int]:
    """One int64 code per row, equal codes ⇔ equal values in ``columns`` (missing values
    equal), and the size of the code space (codes lie in ``[0, space)``).

    Date columns are numbered by :func:`~accuracy_checks.checks.series_index.date_codes`
    (dense: 13 weekly periods take 13 codes), every other column by
    :func:`~accuracy_checks.sources.codes.combined_codes_and_space` (categorical keys: their
    codes as they are).
    """
    columns = list(columns)
    # leading categorical keys: their codes combined in place (one array of the rows)
    n_keys = 0
    while n_keys < len(columns) and isinstance(frame[columns[n_keys]].dtype,
                                               pd.CategoricalDtype):
        n_keys += 1
    found = key_codes(frame, columns[:n_keys]) if n_keys else None
    if found is None:
        combined, space, n_keys = np.zeros(len(frame), dtype=np.int64), 1, 0
    else:
        combined, space = found
    for column in columns[n_keys:]:
        values = frame[column]
        if values.dtype.kind == "M":
            codes, uniques = date_codes(values, sort=False)
            size = len(uniques)
            if (codes < 0).any():  # missing dates: a code of their own
                codes, size = codes + 1, size + 1
            size = max(size, 1)
        else:
            codes, size = combined_codes_and_space(frame, [column])
        if size == 1:  # one value (an issue date): nothing to tell apart
            continue
        if space * size >= _SPACE_LIMIT:  # renumber what is combined so far, densely
            combined, seen = pd.factorize(combined)
            combined = combined.astype(np.int64, copy=False)
            space = max(len(seen), 1)
        combined *= size
        combined += codes
        space *= size
    return combined, space


def invalid_mask(frame: pd.DataFrame, value_columns: Sequence[str]) -> np.ndarray:
    """True where any of ``value_columns`` is null, NaN or ±inf."""
    bad = np.zeros(len(frame), dtype=bool)
    for column in value_columns:
        bad |= ~np.isfinite(as_float(frame, column))
    return bad


def _allowed_segments(allow_negative: AllowNegative) -> list[str]:
    if isinstance(allow_negative, bool):
        return []
    return [allow_negative] if isinstance(allow_negative, str) else list(allow_negative)


def needs_segment(allow_negative: AllowNegative) -> bool:
    """Whether negatives are allowed in some segments only (so ``segment`` is read)."""
    return bool(_allowed_segments(allow_negative))


def _allowed_rows(frame: pd.DataFrame, allow_negative: AllowNegative) -> np.ndarray | None:
    """Rows where negatives are allowed (``None``: no row)."""
    if allow_negative is True:
        return np.ones(len(frame), dtype=bool)
    names = _allowed_segments(allow_negative)
    if not names:
        return None
    return frame[SEGMENT].isin(names).to_numpy(dtype=bool, na_value=False)


def negative_mask(
    frame: pd.DataFrame, value_columns: Sequence[str], allow_negative: AllowNegative = False
) -> np.ndarray:
    """True where any of ``value_columns`` is below 0 in a row whose segment is not allowed."""
    bad = np.zeros(len(frame), dtype=bool)
    for column in value_columns:
        bad |= as_float(frame, column) < 0
    allowed = _allowed_rows(frame, allow_negative)
    return bad if allowed is None else bad & ~allowed


def crossing_mask(frame: pd.DataFrame, quantile_columns: Sequence[str]) -> np.ndarray:
    """True where a quantile lies below a lower-level quantile of the same row.

    ``quantile_columns`` are ordered by increasing level. Each column is compared with the
    running maximum of the columns before it (NaN skipped), so a crossing is found even
    across a missing middle quantile.
    """
    bad = np.zeros(len(frame), dtype=bool)
    if len(quantile_columns) < 2:
        return bad
    running = as_float(frame, quantile_columns[0])
    for column in quantile_columns[1:]:
        values = as_float(frame, column)
        bad |= values < running
        running = np.fmax(running, values)
    return bad


def stale_issue_mask(frame: pd.DataFrame) -> np.ndarray:
    """True for rows whose issue date is not the file's latest one (or is missing)."""
    issued = frame[ISSUED]
    if len(frame) == 0:
        return np.zeros(0, dtype=bool)
    latest = issued.max()
    if latest is pd.NaT or pd.isna(latest):
        return np.ones(len(frame), dtype=bool)
    return ~(issued == latest).to_numpy(dtype=bool, na_value=False)


# --------------------------------------------------------------------------- the schema


def _wide_check(
    name: str, error: str, mask: Callable[[pd.DataFrame], np.ndarray], max_examples: int
) -> pa.Check:
    def passes(frame: pd.DataFrame) -> pd.Series:
        return pd.Series(~mask(frame), index=frame.index, dtype=bool)

    import pandera.pandas as pa

    return pa.Check(
        passes,
        name=name,
        error=error,
        ignore_na=False,  # NaN rows are judged by the check itself, not dropped
        n_failure_cases=max(max_examples, 1),
    )


def output_schema(
    *,
    keys: Sequence[str],
    quantile_columns: Sequence[str] = (),
    allow_negative: AllowNegative = False,
    max_examples: int = 10,
) -> pa.DataFrameSchema:
    """The output checks as one pandera schema of the canonical forecast frame.

    Columns are declared for presence only (``nullable=True``, no dtype): nulls and values are
    judged by the wide checks, whose names are the check ids (``output.duplicate_rows`` …).
    ``output.quantile_order`` is left out when there are fewer than 2 quantile columns.
    Validate with ``lazy=True`` to collect every failure; each ``SchemaError.check_output`` is
    the per-row pass mask of one check.

    >>> schema = output_schema(keys=["store"], quantile_columns=["q0.1", "q0.9"])
    >>> [c.name for c in schema.checks]  # doctest: +NORMALIZE_WHITESPACE
    ['output.duplicate_rows', 'output.invalid_values', 'output.negative_values',
     'output.quantile_order', 'output.issue_dates']
    """
    import pandera.pandas as pa

    keys = list(keys)
    quantile_columns = list(quantile_columns)
    values = [FORECAST, *quantile_columns]
    identity = [*keys, PERIOD, ISSUED]
    columns = {c: pa.Column(nullable=True, required=True) for c in [*identity, *values]}
    if needs_segment(allow_negative):
        columns[SEGMENT] = pa.Column(nullable=True, required=True)
    checks = [
        _wide_check(
            DUPLICATE_ROWS,
            f"more than one row for the same ({', '.join(identity)})",
            lambda f: duplicate_mask(f, identity),
            max_examples,
        ),
        _wide_check(
            INVALID_VALUES,
            f"null, NaN or infinite value in {', '.join(values)}",
            lambda f: invalid_mask(f, values),
            max_examples,
        ),
        _wide_check(
            NEGATIVE_VALUES,
            f"negative value in {', '.join(values)}",
            lambda f: negative_mask(f, values, allow_negative),
            max_examples,
        ),
    ]
    if len(quantile_columns) >= 2:
        checks.append(
            _wide_check(
                QUANTILE_ORDER,
                f"quantiles decrease with their level ({', '.join(quantile_columns)})",
                lambda f: crossing_mask(f, quantile_columns),
                max_examples,
            )
        )
    checks.append(
        _wide_check(ISSUE_DATES, "more than one issue date", stale_issue_mask, max_examples)
    )
    return pa.DataFrameSchema(columns, checks=checks, name="forecast output")


# --------------------------------------------------------------------------- running it


def require_output_columns(frame: pd.DataFrame, keys: list[str], quantile_columns: list[str],
                           allow: AllowNegative) -> None:
    """:class:`InputError` naming the columns the output checks need that ``frame`` lacks."""
    needed = [*keys, PERIOD, ISSUED, FORECAST, *quantile_columns]
    if needs_segment(allow):
        needed.append(SEGMENT)
    require_columns(frame, needed, role="forecast", checks="output")


def output_masks(
    frame: pd.DataFrame,
    *,
    keys: Sequence[str],
    quantile_columns: Sequence[str] = (),
    allow_negative: AllowNegative = False,
) -> dict[str, np.ndarray]:
    """The offending-row mask (True = offends) of every failing output check, in the order of
    :data:`OUTPUT_CHECKS`: what :func:`failed_masks` reads from validating
    :func:`output_schema` with the same arguments, computed by the schema's own mask
    functions without a pandera pass. Call :func:`require_output_columns` first.

    >>> f = pd.DataFrame({"store": ["S1", "S1"], "period": pd.to_datetime(["2026-03-02"] * 2),
    ...                   "issued": pd.to_datetime(["2026-02-27"] * 2), "forecast": [5.0, -1.0]})
    >>> {name: mask.tolist() for name, mask in output_masks(f, keys=["store"]).items()}
    {'output.duplicate_rows': [True, True], 'output.negative_values': [False, True]}
    """
    keys = list(keys)
    quantile_columns = list(quantile_columns)
    values = [FORECAST, *quantile_columns]
    masks = {
        DUPLICATE_ROWS: duplicate_mask(frame, [*keys, PERIOD, ISSUED]),
        INVALID_VALUES: invalid_mask(frame, values),
        NEGATIVE_VALUES: negative_mask(frame, values, allow_negative),
    }
    if len(quantile_columns) >= 2:
        masks[QUANTILE_ORDER] = crossing_mask(frame, quantile_columns)
    masks[ISSUE_DATES] = stale_issue_mask(frame)
    return {name: mask for name, mask in masks.items() if mask.any()}


def failed_masks(schema: pa.DataFrameSchema, frame: pd.DataFrame) -> dict[str, np.ndarray]:
    """Validate lazily; the offending-row mask (True = offends) of every failing check."""
    from pandera.errors import SchemaErrors

    try:
        # A shallow copy: pandera attaches the schema to the frame it validates, and nothing
        # is coerced, so no data is copied.
        schema.validate(frame.copy(deep=False), lazy=True, inplace=True)
    except SchemaErrors as exc:
        out: dict[str, np.ndarray] = {}
        for err in exc.schema_errors:
            name = getattr(err.check, "name", None)
            if name in OUTPUT_CHECKS and isinstance(err.check_output, pd.Series):
                out[name] = ~err.check_output.to_numpy(dtype=bool, na_value=False)
            else:  # a column problem the up-front column check did not foresee
                raise InputError(
                    f"The forecast frame does not fit the output schema: {err}", check=name
                ) from exc
        return out
    return {}
