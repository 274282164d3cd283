"""Actuals checks: is each actual value usable?

``actuals.invalid_values``
    infinite (``inf``/``-inf``) or missing (an empty cell, NaN) values in the actuals' value
    column, among the rows read (the periods the run uses).

Rules (one result, segment ``"*"``, unit ``count``; ``value`` = ``n_obs`` = the rows left out
of the figures, ``details`` = ``{"infinite": …, "missing": …}``):

- an **infinite** actual is an input that cannot be trusted: status ``fail``. The row is left
  out of every accuracy figure, baseline and scale (the evaluation frame reads it as missing,
  see :mod:`accuracy_checks.evaluation.join`), so it is never averaged in;
- a **missing** actual keeps its documented meaning, "not arrived yet": the row counts as
  dropped in the figures' ``n_dropped``, as a period that has no row at all. Alone it does not
  break the gate: status ``pass``, with the count and the first rows as ``examples``, so it
  stays visible in the JSON, Markdown and JUnit outputs (``--verbose`` on the console);
- no such value: ``pass`` with value 0.

Examples name the series (key columns), the ``period`` (ISO date) and the value in words:
``"infinity"``, ``"-infinity"`` or ``"missing"`` (strict JSON has no infinity, and an output
never prints ``inf`` or ``nan``). Infinite rows are listed before missing ones. One vectorised
pass over the value column; only the example rows become Python objects.
"""

from __future__ import annotations

from typing import Any

import numpy as np
import pandas as pd

from accuracy_checks.checks.examples import count_series, plural, row_examples, verb
from accuracy_checks.results import ALL_SERIES, CheckResult, Status
from accuracy_checks.sources.frames import ACTUAL, PERIOD

__all__ = ["INVALID_ACTUALS", "actuals_checks"]

INVALID_ACTUALS = "actuals.invalid_values"


def actuals_checks(actuals: pd.DataFrame, *, keys: list[str], column: str | None = None,
                   max_examples: int = 10) -> list[CheckResult]:
    """The actuals checks of a run (today one: ``actuals.invalid_values``; module doc).

    ``actuals`` is the canonical actuals frame (key columns, ``period``, ``actual``);
    ``column`` the name of the value column in the user's file, for the message.

    >>> a = pd.DataFrame({"sku": ["a", "a", "b"],
    ...                   "period": pd.to_datetime(["2026-03-02", "2026-03-09", "2026-03-02"]),
    ...                   "actual": [1.0, float("inf"), float("nan")]})
    >>> r = actuals_checks(a, keys=["sku"], column="units")[0]
    >>> r.status, r.value, r.details, r.examples[0]
    ('fail', 2, {'infinite': 1, 'missing': 1}, {'sku': 'a', 'period': '2026-03-09', \
'actual': 'infinity'})
    """
    values = actuals[ACTUAL].to_numpy(dtype=np.float64, na_value=np.nan)
    left_out = ~np.isfinite(values)
    if not left_out.any():
        return invalid_actuals_result(0, 0, 0, 0, [], column)
    missing = np.isnan(values)
    infinite = left_out & ~missing
    n_inf, n_missing = int(np.count_nonzero(infinite)), int(np.count_nonzero(missing))
    order = np.concatenate([np.flatnonzero(infinite), np.flatnonzero(missing)])
    examples = invalid_examples(actuals, order[:max(int(max_examples), 0)], keys, values)
    n_series = count_series(actuals, keys, left_out)
    n_inf_series = count_series(actuals, keys, infinite) if n_inf else 0
    return invalid_actuals_result(n_inf, n_missing, n_series, n_inf_series, examples, column)


def invalid_actuals_result(n_inf: int, n_missing: int, n_series: int, n_inf_series: int,
                           examples: list[dict[str, Any]], column: str | None
                           ) -> list[CheckResult]:
    """``actuals.invalid_values`` (module doc) from its counts: ``n_inf`` infinite and
    ``n_missing`` missing actuals in ``n_series`` series (``n_inf_series`` with an infinite
    one), ``examples`` the first of them (:func:`invalid_examples`, infinite ones first),
    ``column`` the file's value column for the message. ``fail`` when any actual is infinite,
    else ``pass`` (missing actuals are only reported). Shared by both engines."""
    what = f"`{column}`" if column else "value"
    if not n_inf and not n_missing:
        return [CheckResult(INVALID_ACTUALS, Status.PASS, segment=ALL_SERIES, value=0, n_obs=0,
                            n_series=0, unit="count", details={"infinite": 0, "missing": 0},
                            message=f"Every actual {what} read is a finite number.")]
    n_bad = n_inf + n_missing
    common: dict[str, Any] = dict(segment=ALL_SERIES, value=n_bad, n_obs=n_bad, unit="count",
                                  details={"infinite": n_inf, "missing": n_missing})
    missing_text = (f"{plural(n_missing, 'row')} {verb(n_missing, 'has', 'have')} no actual "
                    f"{what} (an empty cell): read as not arrived yet and left out of the "
                    "figures")
    status: Status
    if n_inf:
        rows = verb(n_inf, "that row is", "those rows are")
        shown = first_examples(examples, "infinity", "-infinity")
        text = (f"{plural(n_inf, 'actual')} {verb(n_inf, 'is', 'are')} infinite in the actuals' "
                f"{what} column ({plural(n_inf_series, 'series', 'series')}; first: {shown}). "
                f"An infinite actual cannot be trusted, so {rows} "
                "left out of every accuracy figure; correct the actuals (a finite number, or an "
                "empty cell for a value not known yet).")
        if n_missing:
            text += f" Besides, {missing_text}."
        status = Status.FAIL
    else:
        text = f"{missing_text[0].upper()}{missing_text[1:]} (first: {first_examples(examples)})."
        status = Status.PASS
    return [CheckResult(INVALID_ACTUALS, status, n_series=n_series, examples=examples,
                        message=text, **common)]


def invalid_examples(actuals: pd.DataFrame, positions: np.ndarray, keys: list[str],
                     values: np.ndarray) -> list[dict[str, Any]]:
    """The rows at ``positions`` of ``actuals`` as examples (``keys`` and period), each with its
    ``actual`` worded from ``values``: "missing", "infinity" or "-infinity"."""
    examples = row_examples(actuals, positions, [*keys, PERIOD])
    for example, position in zip(examples, positions, strict=True):
        example["actual"] = _word(float(values[position]))
    return examples


def _word(value: float) -> str:
    if np.isnan(value):
        return "missing"
    return "infinity" if value > 0 else "-infinity"


def first_examples(examples: list[dict[str, Any]], *words: str, n: int = 3) -> str:
    """The first ``n`` examples (those whose actual is one of ``words``, if given) as text."""
    chosen = [e for e in examples if not words or e["actual"] in words][:n]
    return "; ".join(", ".join(f"{k}={v}" for k, v in e.items() if k != "actual")
                     for e in chosen)
