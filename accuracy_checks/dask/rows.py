"""The output checks and the actuals checks as mergeable partials.

Each shard reduces its rows to counts and its first ``max_examples`` offending rows (already
worded as examples, each with its ``__order``); :func:`merge_rows` adds counts and keeps the
first examples in reading order; :func:`finish_output` and :func:`finish_actuals` build the
pandas engine's :class:`~accuracy_checks.results.CheckResult` s
(:mod:`accuracy_checks.checks.output`, :mod:`accuracy_checks.checks.actuals`) from them. The
row masks are the output checks' own (:mod:`accuracy_checks.checks.output_schema`), the
examples come from the same example writers; the issue-date check takes the run's latest issue
date and the rows per issue date from the :class:`~accuracy_checks.dask.shards.Plan`. A shard
holds whole series, so series counts add up.
"""

from __future__ import annotations

import heapq
from collections.abc import Collection, Sequence
from dataclasses import dataclass, field
from typing import Any

import numpy as np
import pandas as pd

from accuracy_checks.checks.actuals import invalid_actuals_result, invalid_examples
from accuracy_checks.checks.examples import count_series
from accuracy_checks.checks.output import (
    ForecastRows,
    crossing_messages,
    crossing_pairs,
    duplicates_messages,
    file_names,
    invalid_messages,
    issue_dates_wording,
    negative_messages,
    no_quantiles_result,
    rows_result,
)
from accuracy_checks.checks.output_schema import (
    DUPLICATE_ROWS,
    INVALID_VALUES,
    ISSUE_DATES,
    NEGATIVE_VALUES,
    QUANTILE_ORDER,
    as_float,
    crossing_mask,
    duplicate_mask,
    invalid_mask,
    negative_mask,
)
from accuracy_checks.dask.read import ORDER
from accuracy_checks.dask.shards import Plan
from accuracy_checks.results import CheckResult
from accuracy_checks.sources.codes import combined_codes
from accuracy_checks.sources.frames import ACTUAL, ISSUED, SEGMENT

__all__ = ["RowFindings", "RowsPartial", "actuals_partial", "finish_actuals", "finish_output",
           "merge_rows", "output_partial"]

Example = tuple[int, dict[str, Any]]  # (__order, example)


@dataclass
class RowFindings:
    """One check's offending rows: how many, in how many series, the first examples, and
    counts by name (columns, quantile pairs, combinations)."""

    n: int = 0
    n_series: int = 0
    examples: list[Example] = field(default_factory=list)
    counts: dict[str, int] = field(default_factory=dict)

    def merge(self, other: RowFindings, k: int) -> RowFindings:
        counts = dict(self.counts)
        for name, n in other.counts.items():
            counts[name] = counts.get(name, 0) + n
        return RowFindings(self.n + other.n, self.n_series + other.n_series,
                           heapq.nsmallest(k, [*self.examples, *other.examples],
                                           key=lambda e: e[0]), counts)


@dataclass
class RowsPartial:
    """The row checks' findings by check name (plus ``__rows``: rows seen)."""

    findings: dict[str, RowFindings] = field(default_factory=dict)
    rows: dict[str, int] = field(default_factory=dict)


def merge_rows(parts: Sequence[RowsPartial], k: int) -> RowsPartial:
    """The partial of the union of the parts' shards (associative, order-free)."""
    out = RowsPartial()
    for part in parts:
        for name, found in part.findings.items():
            out.findings[name] = out.findings.get(name, RowFindings()).merge(found, k)
        for name, n in part.rows.items():
            out.rows[name] = out.rows.get(name, 0) + n
    return out


def _found(frame: pd.DataFrame, keys: list[str], mask: np.ndarray,
           examples: list[dict[str, Any]], positions: np.ndarray,
           counts: dict[str, int] | None = None) -> RowFindings:
    order = frame[ORDER].to_numpy()[positions]
    return RowFindings(int(np.count_nonzero(mask)), count_series(frame, keys, mask),
                       list(zip(order.tolist(), examples, strict=True)), counts or {})


def output_partial(forecast: pd.DataFrame, plan: Plan, *, keys: list[str],
                   quantile_columns: list[str], quantile_names: Sequence[str] | None,
                   allow_negative: bool | Collection[str], max_examples: int) -> RowsPartial:
    """One shard's output-check findings (forecast rows in reading order)."""
    qcols = list(quantile_columns)
    rows = ForecastRows(forecast, keys, qcols, file_names(qcols, quantile_names), max_examples)
    values = rows.values
    out = RowsPartial(rows={"forecast": len(forecast)})

    def first(mask: np.ndarray) -> np.ndarray:
        return np.flatnonzero(mask)[:max_examples]

    dup = duplicate_mask(forecast, rows.ident) if len(forecast) else np.zeros(0, dtype=bool)
    examples: list[dict[str, Any]] = []
    positions = np.zeros(0, dtype=np.int64)
    n_combos = 0
    if dup.any():
        from accuracy_checks.checks.examples import row_examples

        groups, _ = pd.factorize(combined_codes(forecast, rows.ident, dup))
        counts = np.bincount(groups)
        n_combos = len(counts)
        _, firsts = np.unique(groups, return_index=True)
        shown = firsts[:max_examples]
        positions = np.flatnonzero(dup)[shown]
        examples = row_examples(forecast, positions, rows.ident)
        for example, group in zip(examples, groups[shown], strict=True):
            example["rows"] = int(counts[group])
    out.findings[DUPLICATE_ROWS] = _found(forecast, keys, dup, examples, positions,
                                            {"combinations": n_combos})

    bad = invalid_mask(forecast, values)
    by_column = {}
    if bad.any():
        for column in values:
            n = int(np.count_nonzero(~np.isfinite(as_float(forecast.loc[bad], column))))
            by_column[rows.names.get(column, column)] = n
    out.findings[INVALID_VALUES] = _found(
        forecast, keys, bad, rows.examples(bad, [*rows.ident, *values], rows.ident),
        first(bad), by_column)

    neg = negative_mask(forecast, values, allow_negative)
    segment = [SEGMENT] if SEGMENT in forecast.columns else []
    shown_cols = [*rows.ident, *segment, *values]
    out.findings[NEGATIVE_VALUES] = _found(
        forecast, keys, neg, rows.examples(neg, shown_cols, shown_cols), first(neg))

    if len(qcols) >= 2:
        cross = crossing_mask(forecast, qcols)
        pairs = {f"{low}\t{high}": n for low, high, n in crossing_pairs(rows, cross)}
        out.findings[QUANTILE_ORDER] = _found(
            forecast, keys, cross, rows.examples(cross, [*rows.ident, *qcols], rows.ident),
            first(cross), pairs)

    stale = _stale(forecast, plan.issued)
    out.findings[ISSUE_DATES] = _found(forecast, keys, stale, [], np.zeros(0, dtype=np.int64))
    return out


def _stale(forecast: pd.DataFrame, latest: pd.Timestamp) -> np.ndarray:
    """Rows not issued on the run's latest issue date (all rows when there is none)."""
    if latest is pd.NaT or pd.isna(latest):
        return np.ones(len(forecast), dtype=bool)
    return ~(forecast[ISSUED] == latest).to_numpy(dtype=bool, na_value=False)


# --------------------------------------------------------------------------- finishing


def _result(check: str, found: RowFindings, fail_message: str, pass_message: str,
            k: int, details: dict[str, Any] | None = None,
            examples: list[dict[str, Any]] | None = None) -> CheckResult:
    """``checks.output.rows_result`` of the merged ``found`` (its first ``k`` examples unless
    ``examples`` are given)."""
    shown = examples if examples is not None else [e for _, e in found.examples[:k]]
    return rows_result(check, found.n, found.n_series, fail_message, pass_message, shown,
                       details)


def finish_output(partial: RowsPartial, plan: Plan, *, keys: list[str],
                  quantile_columns: list[str], quantile_names: Sequence[str] | None,
                  max_examples: int) -> list[CheckResult]:
    """The five output results of ``checks.output.output_checks`` on the union of the
    shards (same order, statuses, counts, examples and messages)."""
    qcols = list(quantile_columns)
    names = file_names(qcols, quantile_names)
    k = max_examples
    ident = [*keys, "period", "issued"]
    values = ["forecast", *qcols]

    def listed(columns: Sequence[str]) -> str:
        return ", ".join(names.get(c, c) for c in columns)

    f = partial.findings
    dup = f[DUPLICATE_ROWS]
    n_combos = dup.counts.get("combinations", 0)
    results = [_result(DUPLICATE_ROWS, dup, *duplicates_messages(dup.n, ident, n_combos), k,
                       {"combinations": n_combos})]

    inv = f[INVALID_VALUES]
    by_column = {names.get(c, c): inv.counts[names.get(c, c)] for c in values
                 if inv.counts.get(names.get(c, c), 0)}
    results.append(_result(INVALID_VALUES, inv,
                           *invalid_messages(inv.n, by_column, listed(values)), k,
                           {"by_column": by_column} if by_column else None))

    neg = f[NEGATIVE_VALUES]
    results.append(_result(NEGATIVE_VALUES, neg, *negative_messages(neg.n, listed(values)), k))

    if len(qcols) < 2:
        results.append(no_quantiles_result())
    else:
        results.append(_crossing_result(f[QUANTILE_ORDER], qcols, names, k))
    results.append(_issue_dates(f[ISSUE_DATES], plan, partial.rows.get("forecast", 0), k))
    return results


def _crossing_result(found: RowFindings, qcols: list[str], names: dict[str, str],
                     k: int) -> CheckResult:
    index = {c: i for i, c in enumerate(qcols)}
    split: list[tuple[str, str, int]] = []
    for pair, n in found.counts.items():
        low, high = pair.split("\t")
        if n:
            split.append((low, high, n))
    ordered_pairs = sorted(split, key=lambda t: (index[t[0]], index[t[1]]))
    pairs = [(f"{names[low]} > {names[high]}", n) for low, high, n in ordered_pairs]
    ordered = ", ".join(names.get(c, c) for c in qcols)
    return _result(QUANTILE_ORDER, found, *crossing_messages(found.n, pairs, ordered), k,
                   {"crossings": dict(pairs)} if pairs else None)


def _issue_dates(found: RowFindings, plan: Plan, n_rows: int, k: int) -> CheckResult:
    fail_message, pass_message, examples, details = issue_dates_wording(
        plan.issue_counts, n_rows, found.n, k)
    return _result(ISSUE_DATES, found, fail_message, pass_message, k, details,
                   examples=examples)


# --------------------------------------------------------------------------- actuals


def actuals_partial(actuals: pd.DataFrame, *, keys: list[str],
                    max_examples: int) -> RowsPartial:
    """One shard's infinite and missing actuals (rows in reading order)."""
    values = actuals[ACTUAL].to_numpy(dtype=np.float64, na_value=np.nan)
    missing = np.isnan(values)
    infinite = ~np.isfinite(values) & ~missing
    out = RowsPartial(rows={"actuals": len(actuals)})
    for name, mask in (("infinite", infinite), ("missing", missing)):
        positions = np.flatnonzero(mask)[:max_examples]
        out.findings[name] = _found(actuals, keys, mask,
                                    invalid_examples(actuals, positions, keys, values), positions)
    either = infinite | missing
    out.findings["left_out"] = RowFindings(int(either.sum()), count_series(actuals, keys, either))
    return out


def finish_actuals(partial: RowsPartial, *, column: str | None,
                   max_examples: int) -> list[CheckResult]:
    """``checks.actuals.actuals_checks`` on the union of the shards."""
    inf, miss = partial.findings["infinite"], partial.findings["missing"]
    k = max(int(max_examples), 0)
    examples = [e for _, e in [*inf.examples, *miss.examples]][:k]
    return invalid_actuals_result(inf.n, miss.n, partial.findings["left_out"].n_series,
                                  inf.n_series, examples, column)
