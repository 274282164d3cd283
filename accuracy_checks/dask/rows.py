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

from accuracy_checks.checks.actuals import INVALID_ACTUALS, _examples, _first
from accuracy_checks.checks.examples import count_series, example_value, plural, verb
from accuracy_checks.checks.output import _crossing_pairs, _file_names, _Rows
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
from accuracy_checks.results import ALL_SERIES, CheckResult, Reason, Status
from accuracy_checks.sources.codes import combined_codes
from accuracy_checks.sources.frames import ACTUAL, ISSUED, SEGMENT

__all__ = ["RowFindings", "RowsPartial", "actuals_partial", "finish_actuals", "finish_output",
           "merge_rows", "output_partial"]

_COUNT = "count"
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
    rows = _Rows(forecast, keys, qcols, _file_names(qcols, quantile_names), max_examples)
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
        pairs = {f"{low}\t{high}": n for low, high, n in _crossing_pairs(rows, cross)}
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
    """As ``checks.output._Rows.result``: ``fail`` with the offending rows counted, else
    ``pass``."""
    n_bad = found.n
    shown = examples if examples is not None else [e for _, e in found.examples[:k]]
    return CheckResult(
        check=check, status=Status.FAIL if n_bad else Status.PASS, segment=ALL_SERIES,
        value=n_bad, n_obs=n_bad, n_series=found.n_series, unit=_COUNT,
        message=fail_message if n_bad else pass_message, examples=shown if n_bad else [],
        details=details or {})


def finish_output(partial: RowsPartial, plan: Plan, *, keys: list[str],
                  quantile_columns: list[str], quantile_names: Sequence[str] | None,
                  max_examples: int) -> list[CheckResult]:
    """The five output results of ``checks.output.output_checks`` on the union of the
    shards (same order, statuses, counts, examples and messages)."""
    qcols = list(quantile_columns)
    names = _file_names(qcols, quantile_names)
    k = max_examples
    ident = [*keys, "period", "issued"]
    values = ["forecast", *qcols]

    def listed(columns: Sequence[str]) -> str:
        return ", ".join(names.get(c, c) for c in columns)

    f = partial.findings
    dup = f[DUPLICATE_ROWS]
    combo = f"({', '.join(ident)})"
    n_combos = dup.counts.get("combinations", 0)
    results = [_result(
        DUPLICATE_ROWS, dup,
        f"{dup.n:,} rows repeat a {combo} combination ({plural(n_combos, 'combination')} "
        "given more than once); each forecast row must be unique, so drop or merge the repeats",
        f"Every {combo} combination appears once.", k, {"combinations": n_combos})]

    inv = f[INVALID_VALUES]
    by_column = {names.get(c, c): inv.counts[names.get(c, c)] for c in values
                 if inv.counts.get(names.get(c, c), 0)}
    where = ", ".join(f"{c} ({n:,})" for c, n in by_column.items())
    results.append(_result(
        INVALID_VALUES, inv,
        f"{plural(inv.n, 'row')} {verb(inv.n, 'holds', 'hold')} a missing (null/NaN) or "
        f"infinite value in {where}; every forecast and quantile value must be a finite number",
        f"Every value in {listed(values)} is a finite number.", k,
        {"by_column": by_column} if by_column else None))

    neg = f[NEGATIVE_VALUES]
    results.append(_result(
        NEGATIVE_VALUES, neg,
        f"{plural(neg.n, 'row')} {verb(neg.n, 'holds', 'hold')} a negative forecast or "
        "quantile; forecasts must be 0 or more unless forecast.allow_negative lists the segment",
        f"No negative value in {listed(values)} outside the segments that allow them.", k))

    if len(qcols) < 2:
        results.append(CheckResult(
            check=QUANTILE_ORDER, status=Status.SKIPPED, segment=ALL_SERIES, unit=_COUNT,
            reason=Reason.NO_QUANTILES,
            message="The forecast has fewer than 2 quantile columns, so there is no "
            "quantile order to check."))
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
    shown = ", ".join(f"{pair} in {plural(n, 'row')}" for pair, n in pairs[:3])
    more = f", and {plural(len(pairs) - 3, 'more pair')}" if len(pairs) > 3 else ""
    ordered = ", ".join(names.get(c, c) for c in qcols)
    n_bad = found.n
    return _result(
        QUANTILE_ORDER, found,
        f"{plural(n_bad, 'row')} {verb(n_bad, 'has', 'have')} crossing quantiles, a lower level "
        f"above a higher one ({shown}{more}); quantile forecasts must not decrease as the level "
        f"rises ({ordered})",
        f"Quantiles rise with their level ({ordered}) in every row.", k,
        {"crossings": dict(pairs)} if pairs else None)


def _issue_dates(found: RowFindings, plan: Plan, n_rows: int, k: int) -> CheckResult:
    counts = plan.issue_counts
    n_dates = len(counts)
    dated = counts.index.notna()
    latest = example_value(counts.index[dated].max()) if dated.any() else None
    shown_dates = counts.iloc[: max(k, 5)]
    listed = [{ISSUED: example_value(day), "rows": int(n)}
              for day, n in zip(shown_dates.index, shown_dates.to_numpy(), strict=True)]
    n_bad = found.n
    if latest is None:
        fail_message = (
            f"No row has an issue date ({plural(n_rows, 'row')}); every row must carry the "
            "issue date of its cycle")
    else:
        shown = "; ".join(
            f"{d[ISSUED] or 'no date'}: {plural(d['rows'], 'row')}" for d in listed[:5])
        more = f"; and {n_dates - 5:,} more" if n_dates > 5 else ""
        fail_message = (
            f"The rows carry {n_dates:,} different issue dates ({shown}{more}); a forecast file "
            f"must hold one cycle, so split it by issue date or drop the {n_bad:,} rows not "
            f"issued on {latest}")
    return _result(
        ISSUE_DATES, found, fail_message,
        "Every row has the same issue date (one cycle)." if n_dates
        else "The file has no rows, so no issue dates to compare.",
        k, {"issue_dates": n_dates, "latest": latest}, examples=listed[:k])


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
                                    _examples(actuals, positions, keys, values), positions)
    either = infinite | missing
    out.findings["left_out"] = RowFindings(int(either.sum()), count_series(actuals, keys, either))
    return out


def finish_actuals(partial: RowsPartial, *, column: str | None,
                   max_examples: int) -> list[CheckResult]:
    """``checks.actuals.actuals_checks`` on the union of the shards."""
    what = f"`{column}`" if column else "value"
    inf, miss = partial.findings["infinite"], partial.findings["missing"]
    if not inf.n and not miss.n:
        return [CheckResult(INVALID_ACTUALS, Status.PASS, segment=ALL_SERIES, value=0, n_obs=0,
                            n_series=0, unit="count", details={"infinite": 0, "missing": 0},
                            message=f"Every actual {what} read is a finite number.")]
    n_inf, n_missing = inf.n, miss.n
    n_bad = n_inf + n_missing
    common: dict[str, Any] = dict(segment=ALL_SERIES, value=n_bad, n_obs=n_bad, unit="count",
                                  details={"infinite": n_inf, "missing": n_missing})
    k = max(int(max_examples), 0)
    examples = [e for _, e in [*inf.examples, *miss.examples]][:k]
    missing_text = (f"{plural(n_missing, 'row')} {verb(n_missing, 'has', 'have')} no actual "
                    f"{what} (an empty cell): read as not arrived yet and left out of the "
                    "figures")
    if n_inf:
        rows = verb(n_inf, "that row is", "those rows are")
        shown = _first(examples, "infinity", "-infinity")
        text = (f"{plural(n_inf, 'actual')} {verb(n_inf, 'is', 'are')} infinite in the actuals' "
                f"{what} column ({plural(inf.n_series, 'series', 'series')}; first: {shown}). "
                f"An infinite actual cannot be trusted, so {rows} "
                "left out of every accuracy figure; correct the actuals (a finite number, or an "
                "empty cell for a value not known yet).")
        if n_missing:
            text += f" Besides, {missing_text}."
        status = Status.FAIL
    else:
        text = f"{missing_text[0].upper()}{missing_text[1:]} (first: {_first(examples)})."
        status = Status.PASS
    return [CheckResult(INVALID_ACTUALS, status, n_series=partial.findings["left_out"].n_series,
                        examples=examples, message=text, **common)]
