"""Output checks: is each row of the forecast file usable?

Five checks, each declared as one *wide* pandera :class:`~pandera.api.checks.Check` (the check
function gets the whole canonical forecast frame and returns one boolean per row, ``True`` =
the row passes) in one :class:`~pandera.api.pandas.container.DataFrameSchema`
(:func:`~accuracy_checks.checks.output_schema.output_schema`). :func:`output_checks` computes
the row mask of each failing check with those same check functions
(:func:`~accuracy_checks.checks.output_schema.output_masks`: what validating the schema lazily
collects, without the pandera pass) and turns it into a
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
numpy operations over whole columns (:mod:`.output_schema` holds them and the schema); only
the ≤ ``max_examples`` example rows become Python objects (:mod:`.examples`).
"""

from __future__ import annotations

from collections.abc import Collection, Sequence
from dataclasses import dataclass
from typing import Any

import numpy as np
import pandas as pd

from accuracy_checks.checks import output_schema as S
from accuracy_checks.checks.examples import (
    count_series,
    example_value,
    plural,
    row_examples,
    verb,
)
from accuracy_checks.checks.output_schema import (
    OUTPUT_CHECKS,
    as_float,
    output_masks,
    output_schema,
    require_output_columns,
)
from accuracy_checks.results import ALL_SERIES, CheckResult, Reason, Status
from accuracy_checks.sources.codes import combined_codes
from accuracy_checks.sources.frames import FORECAST, ISSUED, PERIOD, SEGMENT

__all__ = ["OUTPUT_CHECKS", "output_checks", "output_schema"]

_COUNT = "count"


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
    quantile_columns = list(quantile_columns)
    max_examples = max(int(max_examples), 0)
    require_output_columns(forecast, list(keys), quantile_columns, allow_negative)
    failed = output_masks(forecast, keys=keys, quantile_columns=quantile_columns,
                          allow_negative=allow_negative)
    rows = ForecastRows(forecast, list(keys), quantile_columns,
                        file_names(quantile_columns, quantile_names), max_examples)

    def mask_of(check: str) -> np.ndarray:
        return failed.get(check, np.zeros(len(forecast), dtype=bool))

    results = [
        _duplicates(rows, mask_of(S.DUPLICATE_ROWS)),
        _invalid(rows, mask_of(S.INVALID_VALUES)),
        _negative(rows, mask_of(S.NEGATIVE_VALUES)),
    ]
    if len(quantile_columns) < 2:
        results.append(no_quantiles_result())
    else:
        results.append(_crossing(rows, mask_of(S.QUANTILE_ORDER)))
    results.append(_issue_dates(rows, mask_of(S.ISSUE_DATES)))
    return results


def file_names(quantile_columns: list[str], names: Sequence[str] | None) -> dict[str, str]:
    """Canonical quantile column → the file's own column name (itself when not given)."""
    if names is None:
        return {c: c for c in quantile_columns}
    names = [str(n) for n in names]
    if len(names) != len(quantile_columns):
        raise ValueError(
            f"quantile_names {names} do not match quantile_columns {quantile_columns}"
        )
    return dict(zip(quantile_columns, names, strict=True))


@dataclass(frozen=True)
class ForecastRows:
    """The forecast frame being checked, and how its results name columns and rows."""

    frame: pd.DataFrame
    keys: list[str]
    quantile_columns: list[str]
    #: canonical quantile column → the file's own name (:func:`file_names`)
    names: dict[str, str]
    max_examples: int

    @property
    def ident(self) -> list[str]:
        """The columns that identify a row: keys, ``period``, ``issued``."""
        return [*self.keys, PERIOD, ISSUED]

    @property
    def values(self) -> list[str]:
        """The value columns: ``forecast`` and the quantiles."""
        return [FORECAST, *self.quantile_columns]

    def listed(self, columns: Sequence[str]) -> str:
        """``columns`` as the file names them, comma-separated."""
        return ", ".join(self.names.get(c, c) for c in columns)

    def examples(self, mask: np.ndarray, columns: list[str],
                 ident: Sequence[str]) -> list[dict[str, Any]]:
        """The first offending rows as examples of ``columns``, their quantile fields labelled
        with the file's own column names; a name that clashes with a field of ``ident`` keeps
        the canonical label rather than overwrite that field."""
        labels = {c: n for c, n in self.names.items() if n not in ident}
        found = row_examples(self.frame, np.flatnonzero(mask)[:self.max_examples], columns)
        return [{labels.get(k, k): v for k, v in example.items()} for example in found]

    def result(self, check: str, mask: np.ndarray, fail_message: str, pass_message: str,
               examples: list[dict[str, Any]],
               details: dict[str, Any] | None = None) -> CheckResult:
        """``fail`` with the offending rows counted when ``mask`` holds any, else ``pass``."""
        n_bad = int(np.count_nonzero(mask))
        return rows_result(check, n_bad, count_series(self.frame, self.keys, mask),
                           fail_message, pass_message, examples, details)


def rows_result(check: str, n_bad: int, n_series: int, fail_message: str, pass_message: str,
                examples: list[dict[str, Any]],
                details: dict[str, Any] | None = None) -> CheckResult:
    """An output check's result, segment ``"*"``, unit ``count``: ``fail`` with ``value`` =
    ``n_obs`` = ``n_bad`` offending rows (in ``n_series`` series), ``fail_message`` and the
    ``examples``, when ``n_bad`` > 0; else ``pass`` with ``pass_message`` and no example.
    Shared by both engines."""
    return CheckResult(
        check=check,
        status=Status.FAIL if n_bad else Status.PASS,
        segment=ALL_SERIES,
        value=n_bad,
        n_obs=n_bad,
        n_series=n_series,
        unit=_COUNT,
        message=fail_message if n_bad else pass_message,
        examples=examples if n_bad else [],
        details=details or {},
    )


def no_quantiles_result() -> CheckResult:
    """``output.quantile_order`` skipped (reason ``no_quantiles``): fewer than 2 quantile
    columns."""
    return CheckResult(
        check=S.QUANTILE_ORDER,
        status=Status.SKIPPED,
        segment=ALL_SERIES,
        unit=_COUNT,
        reason=Reason.NO_QUANTILES,
        message="The forecast has fewer than 2 quantile columns, so there is no "
        "quantile order to check.",
    )


def duplicates_messages(n_bad: int, columns: Sequence[str], n_combos: int) -> tuple[str, str]:
    """(fail, pass) messages of ``output.duplicate_rows``: ``n_bad`` rows repeat one of
    ``n_combos`` combinations of ``columns``."""
    combo = f"({', '.join(columns)})"
    return (
        f"{n_bad:,} rows repeat a {combo} combination ({plural(n_combos, 'combination')} "
        "given more than once); each forecast row must be unique, so drop or merge the repeats",
        f"Every {combo} combination appears once.",
    )


def invalid_messages(n_bad: int, by_column: dict[str, int],
                     values_listed: str) -> tuple[str, str]:
    """(fail, pass) messages of ``output.invalid_values``: ``n_bad`` rows, ``by_column`` the
    non-finite values per column (file names, in column order), ``values_listed`` the value
    columns as the file names them."""
    where = ", ".join(f"{c} ({n:,})" for c, n in by_column.items())
    return (
        f"{plural(n_bad, 'row')} {verb(n_bad, 'holds', 'hold')} a missing (null/NaN) or "
        f"infinite value in {where}; every forecast and quantile value must be a finite number",
        f"Every value in {values_listed} is a finite number.",
    )


def negative_messages(n_bad: int, values_listed: str) -> tuple[str, str]:
    """(fail, pass) messages of ``output.negative_values``: ``n_bad`` rows hold a negative
    value; ``values_listed`` the value columns as the file names them."""
    return (
        f"{plural(n_bad, 'row')} {verb(n_bad, 'holds', 'hold')} a negative forecast or quantile; "
        "forecasts must be 0 or more unless forecast.allow_negative lists the segment",
        f"No negative value in {values_listed} outside the segments that allow them.",
    )


def crossing_messages(n_bad: int, pairs: list[tuple[str, int]], ordered: str) -> tuple[str, str]:
    """(fail, pass) messages of ``output.quantile_order``: ``n_bad`` rows cross; ``pairs`` are
    ("low > high" in file names, rows) in column order (the first 3 shown); ``ordered`` the
    quantile columns as the file names them."""
    shown = ", ".join(f"{pair} in {plural(n, 'row')}" for pair, n in pairs[:3])
    more = f", and {plural(len(pairs) - 3, 'more pair')}" if len(pairs) > 3 else ""
    return (
        f"{plural(n_bad, 'row')} {verb(n_bad, 'has', 'have')} crossing quantiles, a lower level "
        f"above a higher one ({shown}{more}); quantile forecasts must not decrease as the level "
        f"rises ({ordered})",
        f"Quantiles rise with their level ({ordered}) in every row.",
    )


def issue_dates_wording(counts: pd.Series, n_rows: int, n_bad: int, max_examples: int
                        ) -> tuple[str, str, list[dict[str, Any]], dict[str, Any]]:
    """(fail message, pass message, examples, details) of ``output.issue_dates``: ``counts``
    are rows per distinct issue date in date order (a missing date last), of ``n_rows`` rows,
    ``n_bad`` of them off the latest date; up to ``max_examples`` dates as examples."""
    n_dates = len(counts)
    dated = counts.index.notna()
    latest = example_value(counts.index[dated].max()) if dated.any() else None
    shown_dates = counts.iloc[: max(max_examples, 5)]
    listed = [
        {ISSUED: example_value(day), "rows": int(n)}
        for day, n in zip(shown_dates.index, shown_dates.to_numpy(), strict=True)
    ]
    if latest is None:
        fail_message = (
            f"No row has an issue date ({plural(n_rows, 'row')}); every row must carry the "
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
    pass_message = ("Every row has the same issue date (one cycle)." if n_dates
                    else "The file has no rows, so no issue dates to compare.")
    return (fail_message, pass_message, listed[:max_examples],
            {"issue_dates": n_dates, "latest": latest})


def _duplicates(rows: ForecastRows, mask: np.ndarray) -> CheckResult:
    frame, ident = rows.frame, rows.ident
    examples: list[dict[str, Any]] = []
    n_bad = int(np.count_nonzero(mask))
    n_combos = 0
    if n_bad:
        # one example per repeated combination, in order of first appearance, with its count
        groups, _ = pd.factorize(combined_codes(frame, ident, mask))
        counts = np.bincount(groups)
        n_combos = len(counts)
        _, first = np.unique(groups, return_index=True)  # groups are numbered by appearance
        shown = first[:rows.max_examples]
        positions = np.flatnonzero(mask)[shown]
        examples = row_examples(frame, positions, ident)
        for example, group in zip(examples, groups[shown], strict=True):
            example["rows"] = int(counts[group])
    return rows.result(S.DUPLICATE_ROWS, mask, *duplicates_messages(n_bad, ident, n_combos),
                       examples, {"combinations": n_combos})


def _invalid(rows: ForecastRows, mask: np.ndarray) -> CheckResult:
    n_bad = int(np.count_nonzero(mask))
    by_column: dict[str, int] = {}
    if n_bad:
        subset = rows.frame.loc[mask, rows.values]
        for column in rows.values:
            n = int(np.count_nonzero(~np.isfinite(as_float(subset, column))))
            if n:
                by_column[rows.names.get(column, column)] = n
    return rows.result(
        S.INVALID_VALUES,
        mask,
        *invalid_messages(n_bad, by_column, rows.listed(rows.values)),
        rows.examples(mask, [*rows.ident, *rows.values], rows.ident),
        {"by_column": by_column} if by_column else None,
    )


def _negative(rows: ForecastRows, mask: np.ndarray) -> CheckResult:
    segment = [SEGMENT] if SEGMENT in rows.frame.columns else []
    shown = [*rows.ident, *segment, *rows.values]
    n_bad = int(np.count_nonzero(mask))
    return rows.result(
        S.NEGATIVE_VALUES,
        mask,
        *negative_messages(n_bad, rows.listed(rows.values)),
        rows.examples(mask, shown, shown),
    )


def crossing_pairs(rows: ForecastRows, mask: np.ndarray) -> list[tuple[str, str, int]]:
    """(lower-level column, higher-level column, rows where the lower is above the higher) for
    every pair of quantile columns that crosses in an offending row, in column order."""
    if not mask.any():
        return []
    columns = rows.quantile_columns
    subset = rows.frame.loc[mask, columns]
    values = [as_float(subset, c) for c in columns]
    pairs = []
    for i, low in enumerate(columns):
        for j in range(i + 1, len(columns)):
            n = int(np.count_nonzero(values[i] > values[j]))  # NaN compares False
            if n:
                pairs.append((low, columns[j], n))
    return pairs


def _crossing(rows: ForecastRows, mask: np.ndarray) -> CheckResult:
    """``output.quantile_order``, worded with the file's own quantile column names."""
    names = rows.names
    n_bad = int(np.count_nonzero(mask))
    pairs = [(f"{names[low]} > {names[high]}", n) for low, high, n in crossing_pairs(rows, mask)]
    return rows.result(
        S.QUANTILE_ORDER,
        mask,
        *crossing_messages(n_bad, pairs, rows.listed(rows.quantile_columns)),
        rows.examples(mask, [*rows.ident, *rows.quantile_columns], rows.ident),
        {"crossings": dict(pairs)} if pairs else None,
    )


def _issue_counts(frame: pd.DataFrame, mask: np.ndarray) -> pd.Series:
    """Rows per distinct issue date, in date order, a missing date last. With no offending row
    every row carries the latest date: one count, no pass over the column."""
    issued = frame[ISSUED]
    if len(frame) and not mask.any():
        return pd.Series([len(frame)], index=issued.iloc[:1], dtype=np.int64)
    return issued.value_counts(dropna=False, sort=False).sort_index(na_position="last")


def _issue_dates(rows: ForecastRows, mask: np.ndarray) -> CheckResult:
    fail_message, pass_message, examples, details = issue_dates_wording(
        _issue_counts(rows.frame, mask), len(rows.frame), int(np.count_nonzero(mask)),
        rows.max_examples)
    return rows.result(S.ISSUE_DATES, mask, fail_message, pass_message, examples, details)
