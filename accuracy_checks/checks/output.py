"""Output checks: is each row of the forecast file usable?

Five checks, each declared as one *wide* pandera :class:`~pandera.api.checks.Check` (the check
function gets the whole canonical forecast frame and returns one boolean per row, ``True`` =
the row passes) in one :class:`~pandera.api.pandas.container.DataFrameSchema`
(:func:`output_schema`). :func:`output_checks` validates lazily (every check runs, every
failure is collected), reads each failing check's row mask back from
``SchemaErrors.schema_errors[i].check_output`` and turns it into a
:class:`~accuracy_checks.results.CheckResult`:

``output.duplicate_rows``
    more than one row for the same (keys, ``period``, ``issued``).
``output.invalid_values``
    null, NaN or ±inf in ``forecast`` or a quantile column.
``output.negative_values``
    ``forecast`` or a quantile below 0, except in segments where negatives are allowed.
``output.quantile_order``
    a lower-level quantile above a higher-level one in the same row (skipped with reason
    ``no_quantiles`` when fewer than 2 quantile columns).
``output.issue_dates``
    more than one distinct ``issued`` value: a file holds one cycle. The rows of the latest
    issue date are taken as the cycle; every other row (and a row without an issue date)
    offends.

A breach has status ``fail`` (these are rules, not thresholds); ``value`` = ``n_obs`` = the
number of offending rows (unit ``count``), ``n_series`` = the number of series among them,
``examples`` = at most ``max_examples`` offending rows as JSON-ready dicts (key columns,
``period``/``issued`` as ISO dates, the offending values; NaN → ``None``, ±inf → ``"infinity"`` /
``"-infinity"`` so that strict JSON keeps them visible). Everything is vectorised: row masks are
numpy operations over whole columns; only the ≤ ``max_examples`` example rows become Python
objects. Duplicates are found by sorting one int64 code per row (the key, period and issue
columns factorised and combined), which is 2–3× faster than ``DataFrame.duplicated`` on
millions of rows.
"""

from __future__ import annotations

import datetime as _dt
import math
from collections.abc import Callable, Collection, Sequence
from typing import Any

import numpy as np
import pandas as pd
import pandera.pandas as pa
from pandera.errors import SchemaErrors

from accuracy_checks.errors import InputError
from accuracy_checks.results import ALL_SERIES, CheckResult
from accuracy_checks.sources.codes import combined_codes
from accuracy_checks.sources.frames import FORECAST, ISSUED, PERIOD, SEGMENT

__all__ = [
    "DUPLICATE_ROWS",
    "INVALID_VALUES",
    "ISSUE_DATES",
    "NEGATIVE_VALUES",
    "OUTPUT_CHECKS",
    "QUANTILE_ORDER",
    "output_checks",
    "output_schema",
]

DUPLICATE_ROWS = "output.duplicate_rows"
INVALID_VALUES = "output.invalid_values"
NEGATIVE_VALUES = "output.negative_values"
QUANTILE_ORDER = "output.quantile_order"
ISSUE_DATES = "output.issue_dates"
#: The output checks, in the order :func:`output_checks` returns them.
OUTPUT_CHECKS: tuple[str, ...] = (
    DUPLICATE_ROWS,
    INVALID_VALUES,
    NEGATIVE_VALUES,
    QUANTILE_ORDER,
    ISSUE_DATES,
)

_COUNT = "count"
# int64 codes are combined column by column; compress before the product of the column
# cardinalities could overflow.

AllowNegative = bool | Collection[str]


# --------------------------------------------------------------------------- shared helpers
# (also used by :mod:`accuracy_checks.checks.coverage`)


def json_value(value: Any) -> Any:
    """A value from an offending row as a JSON-ready value.

    NaN/NA/NaT → ``None``; ±inf → ``"infinity"``/``"-infinity"`` (strict JSON has no
    infinity and the infinity is often the point); timestamps at midnight → ISO date, other
    times → ISO date-time; numpy scalars → Python numbers.

    >>> json_value(float("nan")), json_value(float("-inf")), json_value(np.int64(3))
    (None, '-infinity', 3)
    >>> json_value(pd.Timestamp("2026-03-02")), json_value(pd.Timestamp("2026-03-02 06:00"))
    ('2026-03-02', '2026-03-02T06:00:00')
    """
    if value is None or value is pd.NA or value is pd.NaT:
        return None
    if isinstance(value, bool | np.bool_):
        return bool(value)
    if isinstance(value, int | np.integer):
        return int(value)
    if isinstance(value, float | np.floating):
        number = float(value)
        if math.isnan(number):
            return None
        if math.isinf(number):
            return "infinity" if number > 0 else "-infinity"
        return number
    if isinstance(value, np.datetime64):
        value = pd.Timestamp(value)
        if value is pd.NaT:
            return None
    if isinstance(value, _dt.datetime):
        if value.tzinfo is None and value.time() == _dt.time(0):
            return value.date().isoformat()
        return value.isoformat()
    if isinstance(value, _dt.date):
        return value.isoformat()
    return str(value)


def row_examples(
    frame: pd.DataFrame, positions: np.ndarray, columns: Sequence[str]
) -> list[dict[str, Any]]:
    """The rows at ``positions`` (a handful) as JSON-ready dicts of ``columns``."""
    if len(positions) == 0:
        return []
    rows = frame.iloc[positions]
    values = {c: rows[c].tolist() for c in columns}
    return [{c: json_value(values[c][i]) for c in columns} for i in range(len(positions))]


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


# --------------------------------------------------------------------------- row masks


def _as_float(frame: pd.DataFrame, column: str) -> np.ndarray:
    try:
        return frame[column].to_numpy(dtype=np.float64, na_value=np.nan)
    except (TypeError, ValueError) as exc:
        raise InputError(
            f"Forecast column {column!r} holds values that are not numbers "
            f"(dtype {frame[column].dtype}); forecasts and quantiles must be numeric.",
            column=column,
        ) from exc


def duplicate_mask(frame: pd.DataFrame, columns: Sequence[str]) -> np.ndarray:
    """True for every row whose values in ``columns`` also occur in another row.

    Sort-based: one int64 code per row, sorted; equal neighbours mean duplicates. The rows are
    only located (``np.isin``) when there are any.
    """
    if len(frame) < 2:
        return np.zeros(len(frame), dtype=bool)
    codes = combined_codes(frame, columns)
    ordered = np.sort(codes)
    repeated = ordered[1:] == ordered[:-1]
    if not repeated.any():
        return np.zeros(len(frame), dtype=bool)
    return np.isin(codes, np.unique(ordered[1:][repeated]))


def invalid_mask(frame: pd.DataFrame, value_columns: Sequence[str]) -> np.ndarray:
    """True where any of ``value_columns`` is null, NaN or ±inf."""
    bad = np.zeros(len(frame), dtype=bool)
    for column in value_columns:
        bad |= ~np.isfinite(_as_float(frame, column))
    return bad


def _allowed_segments(allow_negative: AllowNegative) -> list[str]:
    if isinstance(allow_negative, bool):
        return []
    return [allow_negative] if isinstance(allow_negative, str) else list(allow_negative)


def _needs_segment(allow_negative: AllowNegative) -> bool:
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
        bad |= _as_float(frame, column) < 0
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
    running = _as_float(frame, quantile_columns[0])
    for column in quantile_columns[1:]:
        values = _as_float(frame, column)
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
    keys = list(keys)
    quantile_columns = list(quantile_columns)
    values = [FORECAST, *quantile_columns]
    identity = [*keys, PERIOD, ISSUED]
    columns = {c: pa.Column(nullable=True, required=True) for c in [*identity, *values]}
    if _needs_segment(allow_negative):
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


# --------------------------------------------------------------------------- results


def output_checks(
    forecast: pd.DataFrame,
    *,
    keys: list[str],
    quantile_columns: list[str],
    allow_negative: bool | Collection[str] = False,
    max_examples: int = 10,
    quantile_names: Sequence[str] | None = None,
) -> list[CheckResult]:
    """Run the five output checks on the canonical forecast frame; one result each, always.

    Parameters
    ----------
    forecast
        The canonical forecast frame (:mod:`accuracy_checks.sources.frames`): key columns,
        ``period``, ``issued``, ``forecast``, the quantile columns and ``segment``.
    keys
        The key columns that identify a series.
    quantile_columns
        Quantile columns ordered by increasing level (``["q0.1", "q0.5", "q0.9"]``).
    allow_negative
        ``True`` allows negative values everywhere; a collection of segment names allows
        them in those segments only; ``False`` allows them nowhere.
    max_examples
        At most this many offending rows (issue dates for ``output.issue_dates``) per result.
    quantile_names
        The forecast file's own names of ``quantile_columns``, in the same order
        (``config.forecast.quantiles``' values: ``["p10", "p90"]``); ``output.quantile_order``
        words its message and examples with them (default: ``quantile_columns``).

    Returns
    -------
    list of CheckResult
        In the order of :data:`OUTPUT_CHECKS`, segment ``"*"``, unit ``count``: ``pass`` (value
        0) when clean, ``fail`` with ``value`` = ``n_obs`` = offending rows otherwise;
        ``output.quantile_order`` is ``skipped`` (reason ``no_quantiles``) with fewer than 2
        quantile columns.

    Raises
    ------
    InputError
        A required column is missing or a value column is not numeric.

    Examples
    --------
    >>> f = pd.DataFrame({"store": ["S1", "S1"], "period": pd.to_datetime(["2026-03-02"] * 2),
    ...                   "issued": pd.to_datetime(["2026-02-28"] * 2),
    ...                   "forecast": [5.0, float("nan")], "segment": "*"})
    >>> [(r.check, r.status, r.value) for r in output_checks(f, keys=["store"],
    ...                                                      quantile_columns=[])]
    ... # doctest: +NORMALIZE_WHITESPACE
    [('output.duplicate_rows', 'fail', 2), ('output.invalid_values', 'fail', 1),
     ('output.negative_values', 'pass', 0), ('output.quantile_order', 'skipped', None),
     ('output.issue_dates', 'pass', 0)]
    """
    keys = list(keys)
    quantile_columns = list(quantile_columns)
    max_examples = max(int(max_examples), 0)
    _require_columns(forecast, keys, quantile_columns, allow_negative)
    schema = output_schema(
        keys=keys,
        quantile_columns=quantile_columns,
        allow_negative=allow_negative,
        max_examples=max_examples,
    )
    failed = _failed_masks(schema, forecast)
    n_rows = len(forecast)

    def mask_of(check: str) -> np.ndarray:
        return failed.get(check, np.zeros(n_rows, dtype=bool))

    values = [FORECAST, *quantile_columns]
    ident = [*keys, PERIOD, ISSUED]
    names = _file_names(quantile_columns, quantile_names)
    results = [
        _duplicates(forecast, mask_of(DUPLICATE_ROWS), keys, max_examples),
        _invalid(forecast, mask_of(INVALID_VALUES), keys, values, ident, max_examples, names),
        _negative(forecast, mask_of(NEGATIVE_VALUES), keys, values, ident, max_examples,
                  names),
    ]
    if len(quantile_columns) < 2:
        results.append(
            CheckResult(
                check=QUANTILE_ORDER,
                status="skipped",
                segment=ALL_SERIES,
                unit=_COUNT,
                reason="no_quantiles",
                message="The forecast has fewer than 2 quantile columns, so there is no "
                "quantile order to check.",
            )
        )
    else:
        results.append(
            _crossing(
                forecast,
                mask_of(QUANTILE_ORDER),
                keys,
                quantile_columns,
                max_examples,
                names,
            )
        )
    results.append(_issue_dates(forecast, mask_of(ISSUE_DATES), keys, max_examples))
    return results


def _require_columns(
    frame: pd.DataFrame, keys: list[str], quantile_columns: list[str], allow: AllowNegative
) -> None:
    needed = [*keys, PERIOD, ISSUED, FORECAST, *quantile_columns]
    if _needs_segment(allow):
        needed.append(SEGMENT)
    missing = [c for c in needed if c not in frame.columns]
    if missing:
        raise InputError(
            f"The forecast frame lacks the column(s) {missing} that the output checks need "
            f"(it has {list(frame.columns)}).",
            missing=missing,
        )


def _failed_masks(schema: pa.DataFrameSchema, frame: pd.DataFrame) -> dict[str, np.ndarray]:
    """Validate lazily; the offending-row mask (True = offends) of every failing check."""
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


def _n_series(frame: pd.DataFrame, keys: list[str], mask: np.ndarray) -> int:
    if not mask.any():
        return 0
    return int(np.unique(combined_codes(frame, keys, mask)).size)


def _first(mask: np.ndarray, n: int) -> np.ndarray:
    return np.flatnonzero(mask)[:n]


def _result(
    check: str,
    frame: pd.DataFrame,
    keys: list[str],
    mask: np.ndarray,
    fail_message: str,
    pass_message: str,
    examples: list[dict[str, Any]],
    details: dict[str, Any] | None = None,
) -> CheckResult:
    n_bad = int(np.count_nonzero(mask))
    return CheckResult(
        check=check,
        status="fail" if n_bad else "pass",
        segment=ALL_SERIES,
        value=n_bad,
        n_obs=n_bad,
        n_series=_n_series(frame, keys, mask),
        unit=_COUNT,
        message=fail_message if n_bad else pass_message,
        examples=examples if n_bad else [],
        details=details or {},
    )


def _duplicates(
    frame: pd.DataFrame, mask: np.ndarray, keys: list[str], max_examples: int
) -> CheckResult:
    ident = [*keys, PERIOD, ISSUED]
    combo = f"({', '.join(ident)})"
    examples: list[dict[str, Any]] = []
    n_bad = int(np.count_nonzero(mask))
    n_combos = 0
    if n_bad:
        # one example per repeated combination, in order of first appearance, with its count
        groups, _ = pd.factorize(combined_codes(frame, ident, mask))
        counts = np.bincount(groups)
        n_combos = len(counts)
        _, first = np.unique(groups, return_index=True)  # groups are numbered by appearance
        shown = first[:max_examples]
        positions = np.flatnonzero(mask)[shown]
        examples = row_examples(frame, positions, ident)
        for example, group in zip(examples, groups[shown], strict=True):
            example["rows"] = int(counts[group])
    return _result(
        DUPLICATE_ROWS,
        frame,
        keys,
        mask,
        f"{n_bad:,} rows repeat a {combo} combination ({plural(n_combos, 'combination')} "
        "given more than once); each forecast row must be unique, so drop or merge the repeats",
        f"Every {combo} combination appears once.",
        examples,
        {"combinations": n_combos},
    )


def _invalid(
    frame: pd.DataFrame,
    mask: np.ndarray,
    keys: list[str],
    values: list[str],
    ident: list[str],
    max_examples: int,
    names: dict[str, str],
) -> CheckResult:
    n_bad = int(np.count_nonzero(mask))
    where = ""
    by_column: dict[str, int] = {}
    if n_bad:
        subset = frame.loc[mask, values]
        for column in values:
            n = int(np.count_nonzero(~np.isfinite(_as_float(subset, column))))
            if n:
                by_column[names.get(column, column)] = n
        where = ", ".join(f"{c} ({n:,})" for c, n in by_column.items())
    return _result(
        INVALID_VALUES,
        frame,
        keys,
        mask,
        f"{plural(n_bad, 'row')} {verb(n_bad, 'holds', 'hold')} a missing (null/NaN) or "
        f"infinite value in {where}; every forecast and quantile value must be a finite number",
        f"Every value in {', '.join(names.get(c, c) for c in values)} is a finite number.",
        _in_file_names(row_examples(frame, _first(mask, max_examples), [*ident, *values]),
                       names, ident),
        {"by_column": by_column} if by_column else None,
    )


def _negative(
    frame: pd.DataFrame,
    mask: np.ndarray,
    keys: list[str],
    values: list[str],
    ident: list[str],
    max_examples: int,
    names: dict[str, str],
) -> CheckResult:
    shown = [*ident, *([SEGMENT] if SEGMENT in frame.columns else []), *values]
    n_bad = int(np.count_nonzero(mask))
    return _result(
        NEGATIVE_VALUES,
        frame,
        keys,
        mask,
        f"{plural(n_bad, 'row')} {verb(n_bad, 'holds', 'hold')} a negative forecast or quantile; "
        "forecasts must be 0 or more unless forecast.allow_negative lists the segment",
        f"No negative value in {', '.join(names.get(c, c) for c in values)} outside the "
        "segments that allow them.",
        _in_file_names(row_examples(frame, _first(mask, max_examples), shown), names, shown),
    )


def _file_names(quantile_columns: list[str], names: Sequence[str] | None) -> dict[str, str]:
    """Canonical quantile column → the file's own column name (itself when not given)."""
    if names is None:
        return {c: c for c in quantile_columns}
    names = [str(n) for n in names]
    if len(names) != len(quantile_columns):
        raise ValueError(
            f"quantile_names {names} do not match quantile_columns {quantile_columns}"
        )
    return dict(zip(quantile_columns, names, strict=True))


def _in_file_names(examples: list[dict[str, Any]], names: dict[str, str],
                   ident: Sequence[str]) -> list[dict[str, Any]]:
    """Examples whose quantile fields carry the file's own column names (a name that clashes
    with an identifying field keeps the canonical label rather than overwrite that field)."""
    labels = {c: n for c, n in names.items() if n not in ident}
    return [{labels.get(k, k): v for k, v in example.items()} for example in examples]


def _crossing_pairs(
    frame: pd.DataFrame, mask: np.ndarray, quantile_columns: list[str]
) -> list[tuple[str, str, int]]:
    """(lower-level column, higher-level column, rows where the lower is above the higher) for
    every pair of quantile columns that crosses in an offending row, in column order."""
    if not mask.any():
        return []
    subset = frame.loc[mask, quantile_columns]
    values = [_as_float(subset, c) for c in quantile_columns]
    pairs = []
    for i, low in enumerate(quantile_columns):
        for j in range(i + 1, len(quantile_columns)):
            n = int(np.count_nonzero(values[i] > values[j]))  # NaN compares False
            if n:
                pairs.append((low, quantile_columns[j], n))
    return pairs


def _crossing(
    frame: pd.DataFrame,
    mask: np.ndarray,
    keys: list[str],
    quantile_columns: list[str],
    max_examples: int,
    names: dict[str, str],
) -> CheckResult:
    """``output.quantile_order``, worded with the file's own quantile column names."""
    ident = [*keys, PERIOD, ISSUED]
    n_bad = int(np.count_nonzero(mask))
    pairs = [
        (f"{names[low]} > {names[high]}", n)
        for low, high, n in _crossing_pairs(frame, mask, quantile_columns)
    ]
    shown = ", ".join(f"{pair} in {plural(n, 'row')}" for pair, n in pairs[:3])
    more = f", and {plural(len(pairs) - 3, 'more pair')}" if len(pairs) > 3 else ""
    examples = _in_file_names(
        row_examples(frame, _first(mask, max_examples), [*ident, *quantile_columns]),
        names, ident)
    ordered = ", ".join(names[c] for c in quantile_columns)
    return _result(
        QUANTILE_ORDER,
        frame,
        keys,
        mask,
        f"{plural(n_bad, 'row')} {verb(n_bad, 'has', 'have')} crossing quantiles, a lower level "
        f"above a higher one ({shown}{more}); quantile forecasts must not decrease as the level "
        f"rises ({ordered})",
        f"Quantiles rise with their level ({ordered}) in every row.",
        examples,
        {"crossings": dict(pairs)} if pairs else None,
    )


def _issue_dates(
    frame: pd.DataFrame, mask: np.ndarray, keys: list[str], max_examples: int
) -> CheckResult:
    # distinct issue dates in date order, a missing date last
    counts = frame[ISSUED].value_counts(dropna=False, sort=False).sort_index(na_position="last")
    n_dates = len(counts)
    dated = counts.index.notna()
    latest = json_value(counts.index[dated].max()) if dated.any() else None
    shown_dates = counts.iloc[: max(max_examples, 5)]
    listed = [
        {ISSUED: json_value(day), "rows": int(n)}
        for day, n in zip(shown_dates.index, shown_dates.to_numpy(), strict=True)
    ]
    n_bad = int(np.count_nonzero(mask))
    if latest is None:
        fail_message = (
            f"No row has an issue date ({plural(len(frame), 'row')}); every row must carry the "
            "issue date of its cycle"
        )
    else:
        shown = "; ".join(
            f"{d[ISSUED] or 'no date'}: {plural(d['rows'], 'row')}" for d in listed[:5]
        )
        more = f"; and {n_dates - 5:,} more" if n_dates > 5 else ""
        fail_message = (
            f"The rows carry {n_dates:,} different issue dates ({shown}{more}); a forecast file "
            f"must hold one cycle, so split it by issue date or drop the {n_bad:,} rows not "
            f"issued on {latest}"
        )
    return _result(
        ISSUE_DATES,
        frame,
        keys,
        mask,
        fail_message,
        "Every row has the same issue date (one cycle)."
        if n_dates
        else "The file has no rows, so no issue dates to compare.",
        listed[:max_examples],
        {"issue_dates": n_dates, "latest": latest},
    )
