"""What the HTML report shows, read from the audit store in a few queries.

The report is a rendering of the audit trail: every figure, threshold, drift limit and waiver
in it is what the runs recorded, never recomputed. Per cycle it uses the **last attempt**
(the run with the highest attempt number of that cycle), like accuracy and the drift checks.
``since`` keeps the cycles issued on or after a date.

The headline run is the **latest cycle's last attempt**, whatever was recorded after it: a
re-run of an older cycle recorded later does not become the current state; it is listed
(:attr:`ReportData.later_runs`). Only a store whose runs carry no cycle at all falls back to
the last recorded run.

Reads, through the store's queries (:mod:`accuracy_checks.store.queries`; the report holds
no SQL): the runs (one row each), the figure results of the chosen runs (those with a
measure: thresholds, values, statuses, waiver links; details only for control-limit results
and results with a variant), every result of the latest run in full (messages, examples,
details), and every waiver.
"""

from __future__ import annotations

import json
from dataclasses import dataclass, field
from datetime import UTC, date, datetime
from typing import TYPE_CHECKING, Any

import pandas as pd

from accuracy_checks.results import CheckResult
from accuracy_checks.store.queries import figures_of_runs, result_dict, results_of_run

if TYPE_CHECKING:
    from accuracy_checks.store import Store, Waiver

__all__ = ["FIGURE_COLUMNS", "ReportData", "load_report_data"]

#: columns of :attr:`ReportData.figures`
FIGURE_COLUMNS = ("cycle", "check", "segment", "measure", "lag", "variant", "status", "value",
                  "unit", "warn", "fail", "waiver_id", "details")


@dataclass
class ReportData:
    """Everything one report shows."""

    #: the store's URL, password masked
    store_url: str
    generated_at: datetime
    since: date | None
    #: every recorded run in range, oldest first (as ``Store.history`` gives them)
    runs: list[dict[str, Any]]
    #: the cycles in range, oldest first, and the run (last attempt) that stands for each
    cycles: list[str]
    cycle_runs: dict[str, dict[str, Any]]
    #: the headline run: the last attempt of the latest cycle (module docstring), and its
    #: results in full
    latest: dict[str, Any] | None
    latest_results: list[CheckResult]
    #: one row per figure result of each cycle's last attempt (:data:`FIGURE_COLUMNS`)
    figures: pd.DataFrame
    waivers: list[Waiver] = field(default_factory=list)
    #: runs recorded after the headline run (re-runs of older cycles), oldest first
    later_runs: list[dict[str, Any]] = field(default_factory=list)

    @property
    def empty(self) -> bool:
        return self.latest is None


def load_report_data(store: Store, *, since: date | None = None,
                     now: datetime | None = None) -> ReportData:
    """Read what the report needs from ``store`` (see the module docstring)."""
    generated = now or datetime.now(UTC)
    every = store.history()
    floor = since.isoformat() if since is not None else None
    in_range = [r for r in every if floor is None or r["cycle"] is None or r["cycle"] >= floor]
    by_cycle: dict[str, dict[str, Any]] = {}
    for run in in_range:
        c = run["cycle"]
        if c is None:
            continue
        best = by_cycle.get(c)
        if best is None or (run["attempt"] or 0) >= (best["attempt"] or 0):
            by_cycle[c] = run
    cycles = sorted(by_cycle)
    latest = by_cycle[cycles[-1]] if cycles else max(in_range, key=_recorded, default=None)
    later = ([r for r in in_range if r is not latest and _recorded(r) > _recorded(latest)]
             if latest is not None else [])
    later.sort(key=_recorded)
    with store.db.read() as conn:
        rows = figures_of_runs(conn, [r["run_id"] for r in by_cycle.values()])
        latest_rows = results_of_run(conn, latest["run_id"]) if latest is not None else []
    figures = _figures(rows, {r["run_id"]: c for c, r in by_cycle.items()})
    latest_results = [_result(result_dict(r), r) for r in latest_rows]
    waivers = store.waivers(include_inactive=True)
    return ReportData(store_url=store.url, generated_at=generated, since=since, runs=in_range,
                      cycles=cycles, cycle_runs=by_cycle, latest=latest,
                      latest_results=latest_results, figures=figures, waivers=waivers,
                      later_runs=later)


def _recorded(run: dict[str, Any]) -> tuple[str, str]:
    """Sort key of a run by when it was recorded (then started): UTC ISO texts."""
    return (run["recorded_at"] or run["started_at"] or "", run["started_at"] or "")


def _figures(rows: list[tuple[Any, ...]], cycle_of: dict[str, str]) -> pd.DataFrame:
    """The figure rows of :func:`~accuracy_checks.store.queries.figures_of_runs` as
    :attr:`ReportData.figures` (each run's cycle from ``cycle_of``)."""
    names = ["run_id", "check", "segment", "measure", "lag", "status", "value", "unit",
             "warn", "fail", "waiver_id", "details"]
    cols = dict(zip(names, (list(c) for c in zip(*rows, strict=True)), strict=True)) if rows \
        else {n: [] for n in names}
    details = _parse_json(cols["details"], default={})
    frame = pd.DataFrame({
        "cycle": [cycle_of.get(run_id) for run_id in cols["run_id"]],
        "check": pd.Series(cols["check"], dtype=object),
        "segment": pd.Series(cols["segment"], dtype=object),
        "measure": pd.Series(cols["measure"], dtype=object),
        "lag": pd.array(cols["lag"], dtype="Int64"),
        "variant": pd.Series([str(d.get("variant") or "") if isinstance(d, dict) else ""
                              for d in details], dtype=object),
        "status": pd.Series(cols["status"], dtype=object),
        "value": pd.to_numeric(pd.Series(cols["value"], dtype=object),
                               errors="coerce").astype("float64"),
        "unit": pd.Series(cols["unit"], dtype=object),
        "warn": pd.Series(_parse_json(cols["warn"], default=None), dtype=object),
        "fail": pd.Series(_parse_json(cols["fail"], default=None), dtype=object),
        "waiver_id": pd.array(cols["waiver_id"], dtype="Int64"),
        "details": pd.Series(details, dtype=object),
    })
    frame["cycle"] = frame["cycle"].astype(object)
    return frame.loc[:, list(FIGURE_COLUMNS)].sort_values(
        ["cycle", "check", "measure"], kind="stable", ignore_index=True)


def _parse_json(texts: list[str | None], *, default: Any) -> list[Any]:
    """Each JSON text parsed once per distinct text (bounds and details repeat a lot)."""
    cache: dict[str, Any] = {}
    out = []
    for t in texts:
        if t is None:
            out.append(default)
            continue
        hit = cache.get(t)
        if hit is None:
            hit = cache[t] = _bound(json.loads(t))
        out.append(hit)
    return out


def _bound(value: Any) -> Any:
    if isinstance(value, list) and len(value) == 2 and all(
            isinstance(v, int | float) for v in value):
        return (float(value[0]), float(value[1]))
    return value


def _result(doc: dict[str, Any], row: Any) -> CheckResult:
    """A stored result back as a :class:`CheckResult` (with its examples and details)."""
    examples = json.loads(row["examples"]) if row["examples"] else []
    details = json.loads(row["details"]) if row["details"] else {}
    if doc.get("waiver_id") is not None and "waiver" not in details:
        details["waiver_id"] = doc["waiver_id"]
    return CheckResult(
        check=doc["check"], status=doc["status"], segment=doc["segment"], lag=doc["lag"],
        measure=doc["measure"], value=doc["value"], warn=_bound(doc["warn"]),
        fail=_bound(doc["fail"]), n_series=doc["n_series"], n_obs=doc["n_obs"],
        message=doc["message"] or "", examples=examples if isinstance(examples, list) else [],
        reason=doc["reason"], unit=doc["unit"], details=details if isinstance(details, dict)
        else {},
    )
