"""Read-side queries of the audit store: run history, current breaches, and the trail of
figures the drift checks judge a run against (:func:`trail_of_figures`).

Every query is built with SQLAlchemy Core and bound parameters: a segment named
``x'); DROP TABLE runs;--`` is a value like any other.
"""

from __future__ import annotations

import json
from collections.abc import Sequence
from datetime import UTC, date, datetime, time, timedelta
from typing import Any

from sqlalchemy import ColumnElement, Connection, and_, case, false, func, or_, select

from accuracy_checks.results import BREACHED, JUDGED
from accuracy_checks.store.schema import results, runs

# the status sets as plain text for SQL filters: a breach in :func:`breaches` (a waived breach
# still is one); a judged figure (skipped and error results say nothing about it)
_BREACHED = sorted(str(s) for s in BREACHED)
_JUDGED = sorted(str(s) for s in JUDGED)

RUN_COLUMNS = (
    "run_id", "cycle", "attempt", "status", "started_at", "finished_at", "recorded_at",
    "label", "host", "os_user", "tool_version", "config_path", "config_hash", "counts",
    "inputs", "evaluated_cycles", "snapshot",
)
RESULT_COLUMNS = (
    "check_name", "status", "segment", "lag", "measure", "value", "unit", "warn", "fail",
    "n_series", "n_obs", "reason", "message", "waiver_id",
)


def _utc_iso(value: Any) -> str | None:
    if value is None:
        return None
    if isinstance(value, datetime):
        value = value.replace(tzinfo=UTC) if value.tzinfo is None else value.astimezone(UTC)
        return value.isoformat()
    return str(value)


def _json(value: str | None) -> Any:
    return None if value is None else json.loads(value)


def day_start(day: date) -> datetime:
    """00:00 UTC of ``day``."""
    return datetime.combine(day, time(0), tzinfo=UTC)


def history(conn: Connection, *, cycle: str | None = None, segment: str | None = None,
            measure: str | None = None, status: str | None = None,
            since: date | None = None, until: date | None = None, label: str | None = None,
            limit: int | None = None) -> list[dict[str, Any]]:
    """Recorded runs, oldest first (with ``limit``: the newest ``limit`` runs).

    ``since``/``until`` are UTC dates, both inclusive, on ``started_at``. ``segment``,
    ``measure`` and ``status`` filter results: only runs with a matching result are listed,
    and each carries its matching ``results``. Without them runs carry no results.
    """
    where: list[ColumnElement[bool]] = []
    if cycle is not None:
        where.append(runs.c.cycle == cycle)
    if label is not None:
        where.append(runs.c.label == label)
    if since is not None:
        where.append(runs.c.started_at >= day_start(since))
    if until is not None:
        where.append(runs.c.started_at < day_start(until + timedelta(days=1)))
    result_where: list[ColumnElement[bool]] = []
    if segment is not None:
        result_where.append(results.c.segment == segment)
    if measure is not None:
        result_where.append(results.c.measure == measure)
    if status is not None:
        result_where.append(results.c.status == status)
    if result_where:
        where.append(runs.c.id.in_(select(results.c.run_pk).where(*result_where)))

    q = select(runs).where(*where).order_by(runs.c.started_at.desc(), runs.c.id.desc())
    if limit is not None:
        q = q.limit(limit)
    rows = list(conn.execute(q).mappings())[::-1]
    out = [_run_dict(r) for r in rows]
    if result_where and out:
        pks = [r["id"] for r in rows]
        by_pk: dict[int, list[dict[str, Any]]] = {pk: [] for pk in pks}
        for chunk in _chunks(pks, 500):
            q = (select(results.c.run_pk, *(results.c[c] for c in RESULT_COLUMNS))
                 .where(results.c.run_pk.in_(chunk), *result_where)
                 .order_by(results.c.run_pk, results.c.seq))
            for r in conn.execute(q).mappings():
                by_pk[r["run_pk"]].append(result_dict(r))
        for run, pk in zip(out, pks, strict=True):
            run["results"] = by_pk[pk]
    return out


def archived_attempts(conn: Connection) -> dict[str, int]:
    """Cycle → the highest attempt recorded with a snapshot (the cycle's last snapshot)."""
    q = (select(runs.c.cycle, func.max(runs.c.attempt))
         .where(runs.c.cycle.is_not(None), runs.c.attempt.is_not(None),
                runs.c.snapshot.is_not(None))
         .group_by(runs.c.cycle))
    return {str(cycle): int(attempt) for cycle, attempt in conn.execute(q)}


def _chunks(items: Sequence[int], n: int) -> list[Sequence[int]]:
    return [items[i:i + n] for i in range(0, len(items), n)]


def _run_dict(row: Any) -> dict[str, Any]:
    out: dict[str, Any] = {}
    for c in RUN_COLUMNS:
        value = row[c]
        if c in ("started_at", "finished_at", "recorded_at"):
            value = _utc_iso(value)
        elif c in ("counts", "inputs", "evaluated_cycles"):
            value = _json(value)
        out[c] = value
    out["user"] = out.pop("os_user")
    return out


def result_dict(row: Any) -> dict[str, Any]:
    """A stored result as in the JSON contract (``check`` for ``check_name``)."""
    out = {c: row[c] for c in RESULT_COLUMNS}
    out["check"] = out.pop("check_name")
    out["warn"] = _json(out["warn"])
    out["fail"] = _json(out["fail"])
    return out


def breaches(conn: Connection, *, segment: str | None = None,
             measure: str | None = None) -> list[dict[str, Any]]:
    """Figures breached now: check × segment × measure × lag whose latest judged result is
    ``warn``, ``fail`` or ``waived``.

    Each cycle counts once, by its last recorded attempt that judged the figure. For each
    figure: ``first_cycle`` of the current unbroken run of breached cycles, ``cycles`` (how
    many in a row), ``last_cycle``/``last_attempt``, the last ``status``, ``value``, ``unit``,
    ``warn``/``fail`` bounds and ``waiver_id`` of the last result. Skipped and error results
    neither break nor extend a run. Computed in SQL (window functions), not in Python.
    """
    key = [results.c.check_name, results.c.segment, results.c.measure, results.c.lag]
    where: list[ColumnElement[bool]] = [
        results.c.measure.is_not(None), runs.c.cycle.is_not(None), results.c.status.in_(_JUDGED)]
    if segment is not None:
        where.append(results.c.segment == segment)
    if measure is not None:
        where.append(results.c.measure == measure)
    per_cycle = (
        select(*key, results.c.status, results.c.value, results.c.unit, results.c.warn,
               results.c.fail, results.c.waiver_id, runs.c.cycle, runs.c.attempt,
               func.row_number().over(partition_by=[*key, runs.c.cycle],
                                      order_by=[runs.c.attempt.desc(), runs.c.id.desc()])
               .label("rn"))
        .join(runs, runs.c.id == results.c.run_pk)
        .where(*where)
        .cte("per_cycle")
    )
    pkey = [per_cycle.c.check_name, per_cycle.c.segment, per_cycle.c.measure, per_cycle.c.lag]
    ranked = (
        select(per_cycle,
               func.row_number().over(partition_by=pkey, order_by=per_cycle.c.cycle.desc())
               .label("k"))
        .where(per_cycle.c.rn == 1)
        .cte("ranked")
    )
    rkey = [ranked.c.check_name, ranked.c.segment, ranked.c.measure, ranked.c.lag]
    first_ok = func.min(case((~ranked.c.status.in_(_BREACHED), ranked.c.k), else_=None)) \
        .over(partition_by=rkey)
    n = func.count().over(partition_by=rkey)
    streaked = select(ranked, first_ok.label("first_ok"), n.label("n")).cte("streaked")
    in_streak = streaked.c.k < func.coalesce(streaked.c.first_ok, streaked.c.n + 1)
    skey = [streaked.c.check_name, streaked.c.segment, streaked.c.measure, streaked.c.lag]
    final = select(
        streaked,
        func.min(case((in_streak, streaked.c.cycle), else_=None)).over(partition_by=skey)
        .label("first_cycle"),
    ).cte("final")
    q = (
        select(final)
        .where(and_(final.c.k == 1, final.c.status.in_(_BREACHED)))
        .order_by(final.c.segment, final.c.measure, final.c.lag, final.c.check_name)
    )
    out = []
    for r in conn.execute(q).mappings():
        first_ok_k = r["first_ok"]
        out.append({
            "check": r["check_name"],
            "segment": r["segment"],
            "measure": r["measure"],
            "lag": r["lag"],
            "status": r["status"],
            "first_cycle": r["first_cycle"],
            "cycles": int(first_ok_k - 1) if first_ok_k is not None else int(r["n"]),
            "last_cycle": r["cycle"],
            "last_attempt": r["attempt"],
            "value": r["value"],
            "unit": r["unit"],
            "warn": _json(r["warn"]),
            "fail": _json(r["fail"]),
            "waiver_id": r["waiver_id"],
        })
    return out


#: the fields of each row of :func:`trail_of_figures`, in order
TRAIL_COLUMNS = ("check", "segment", "measure", "lag", "variant", "cycle", "status", "value")


def trail_of_figures(conn: Connection, *, before: str | None, cycles: int,
                     accuracy_measures: Sequence[str] | None = None,
                     breached: Sequence[tuple[str, str]] = ()) -> list[tuple[Any, ...]]:
    """Recorded results of the last attempt of each of the ``cycles`` latest cycles before
    ``before`` (a cycle label; ``None``: every recorded cycle), one plain tuple each with the
    fields :data:`TRAIL_COLUMNS`, in the order the store returns them.

    Only what the drift checks need is read: ``accuracy`` results of ``accuracy_measures``
    (every accuracy measure when ``None``) and results of the (check, measure) pairs in
    ``breached``; results without a measure never. ``variant`` is the ``variant`` of the
    result's details (``""`` when none). Two queries, every value bound.
    """
    found = conn.execute(
        select(runs.c.id, runs.c.cycle, runs.c.attempt).where(runs.c.cycle.is_not(None))
    ).all()
    last: dict[str, tuple[int, int]] = {}
    for pk, cyc, attempt in found:
        key = (int(attempt or 0), int(pk))
        if (before is None or cyc < before) and (cyc not in last or key > last[cyc]):
            last[cyc] = key
    chosen = sorted(last)[-cycles:] if cycles > 0 else []
    pk_cycle = {last[c][1]: c for c in chosen}
    wanted = []
    if accuracy_measures is None:
        wanted.append(results.c.check_name == "accuracy")
    elif accuracy_measures:
        wanted.append(and_(results.c.check_name == "accuracy",
                           results.c.measure.in_(list(accuracy_measures))))
    wanted += [and_(results.c.check_name == check, results.c.measure == measure)
               for check, measure in sorted(set(breached))]
    if not pk_cycle or not wanted:
        return []
    has_variant = results.c.details.like('%"variant"%')
    rows = conn.execute(
        select(results.c.run_pk, results.c.check_name, results.c.segment, results.c.measure,
               results.c.lag, results.c.status, results.c.value,
               case((has_variant, results.c.details), else_=None))
        .where(results.c.run_pk.in_(list(pk_cycle)), results.c.measure.is_not(None),
               or_(false(), *wanted))
    ).all()
    variants: dict[str, str] = {}  # one parse per distinct details text
    out = []
    for run_pk, check, segment, measure, lag, status, value, details in rows:
        variant = ""
        if details is not None:
            if details not in variants:
                variants[details] = str((json.loads(details) or {}).get("variant") or "")
            variant = variants[details]
        out.append((check, segment, measure, lag, variant, pk_cycle[run_pk], status, value))
    return out


#: the columns of :func:`figures_of_runs`' rows
FIGURE_ROW_COLUMNS = ("run_id", "check_name", "segment", "measure", "lag", "status", "value",
                      "unit", "warn", "fail", "waiver_id", "details")


def figures_of_runs(conn: Connection, run_ids: Sequence[str]) -> list[tuple[Any, ...]]:
    """The figures of the runs ``run_ids`` (their results with a measure), one row each with
    :data:`FIGURE_ROW_COLUMNS` (bounds and details as stored JSON text). ``details`` is kept
    only for ``drift.control_limit`` results and results with a variant (the rest is
    ``None``: the report's trends read nothing else of it). Unknown run ids are left out."""
    if not run_ids:
        return []
    pk_run = {pk: run_id for run_id, pk in conn.execute(
        select(runs.c.run_id, runs.c.id).where(runs.c.run_id.in_(list(run_ids)))).all()}
    if not pk_run:
        return []
    keep_details = or_(results.c.check_name == "drift.control_limit",
                       results.c.details.like('%"variant"%'))
    rows = conn.execute(
        select(results.c.run_pk, results.c.check_name, results.c.segment,
               results.c.measure, results.c.lag, results.c.status, results.c.value,
               results.c.unit, results.c.warn, results.c.fail, results.c.waiver_id,
               case((keep_details, results.c.details), else_=None))
        .where(results.c.run_pk.in_(list(pk_run)), results.c.measure.is_not(None))
    ).all()
    return [(pk_run[r[0]], *r[1:]) for r in rows]


def results_of_run(conn: Connection, run_id: str) -> list[Any]:
    """Every result of the run ``run_id`` in recorded order, all columns (row mappings, for
    :func:`result_dict`); empty when no such run is recorded."""
    pk = select(runs.c.id).where(runs.c.run_id == run_id).scalar_subquery()
    return list(conn.execute(
        select(results).where(results.c.run_pk == pk).order_by(results.c.seq)).mappings())
