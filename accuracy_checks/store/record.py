"""Turning a :class:`~accuracy_checks.results.RunReport` into audit rows, and the digest chain.

A run is recorded as one ``runs`` row and one ``results`` row per check result, inserted in
one transaction with a single multi-row ``executemany`` for the results (tens of thousands of
rows take a fraction of a second on SQLite).

**Digest chain** (tamper evidence): each run row carries ``digest`` =
SHA-256(previous run's digest ‖ canonical JSON of this run's row ‖ canonical JSON of its
result rows), the canonical JSON being sorted keys, no whitespace, timestamps as ISO 8601 in
UTC. Editing, inserting or deleting any recorded run or result breaks the chain from there on;
:meth:`accuracy_checks.store.Store.verify` recomputes it.

The input fingerprints kept with a run are made by :mod:`accuracy_checks.store.fingerprints`.
"""

from __future__ import annotations

import getpass
import hashlib
import json
import math
import operator
import os
import socket
from collections import Counter
from collections.abc import Callable, Sequence
from datetime import UTC, datetime
from typing import TYPE_CHECKING, Any

from sqlalchemy import Connection

from accuracy_checks.results import DISPLAY_ORDER, CheckResult, RunReport, worst_status
from accuracy_checks.store.urls import mask_secrets
from accuracy_checks.version import __version__

if TYPE_CHECKING:
    from accuracy_checks.config import Config

#: the run fields covered by the digest (every column but ``id`` and ``digest``)
RUN_FIELDS = (
    "run_id", "cycle", "attempt", "status", "started_at", "finished_at", "recorded_at",
    "tool_version", "config_path", "config_text", "config_hash", "inputs", "evaluated_cycles",
    "counts", "snapshot", "host", "os_user", "label",
)
#: the result fields covered by the digest (every column but ``id`` and ``run_pk``)
RESULT_FIELDS = (
    "seq", "check_name", "status", "segment", "lag", "measure", "value", "warn", "fail",
    "n_series", "n_obs", "message", "reason", "examples", "unit", "details", "waiver_id",
)
_STATUS = RESULT_FIELDS.index("status")


def tool_version() -> str:
    return __version__


def parse_time(value: str | datetime | None) -> datetime | None:
    """An aware UTC datetime from an ISO string or datetime (naive means UTC).

    >>> parse_time("2026-03-02T06:00:00+01:00").isoformat()
    '2026-03-02T05:00:00+00:00'
    """
    if value is None or value == "":
        return None
    dt = value if isinstance(value, datetime) else datetime.fromisoformat(value)
    return dt.replace(tzinfo=UTC) if dt.tzinfo is None else dt.astimezone(UTC)


def iso(value: datetime | None) -> str | None:
    """ISO 8601 in UTC with seconds (microseconds when present); ``None`` stays ``None``."""
    value = parse_time(value)
    return None if value is None else value.isoformat()


def dumps(value: Any) -> str:
    """Canonical JSON: sorted keys, no spaces, NaN/inf as null, other objects as strings.

    >>> dumps({"b": float("nan"), "a": [1, 2.5]})
    '{"a":[1,2.5],"b":null}'
    """
    try:  # the fast path: plain JSON values without NaN/inf
        return "".join(_chunks(value, 0))
    except ValueError:
        return _ENCODER.encode(_finite(value))


_ENCODER = json.JSONEncoder(sort_keys=True, separators=(",", ":"), allow_nan=False,
                            ensure_ascii=False, default=str)


def _c_chunks() -> Callable[[Any, int], Sequence[str]] | None:
    """``_ENCODER.encode`` without its per-call set-up: the C encoder that ``encode`` builds on
    every call (same default, separators, key order and float repr, so the same text), built
    once; it returns the text in chunks. No check for circular containers (they end in
    ``RecursionError`` either way). ``None`` where the C accelerator is missing or its
    private signature differs; the self-check makes any difference fall back to
    ``_ENCODER.encode``."""
    from json import encoder as E

    make = getattr(E, "c_make_encoder", None)
    if make is None:
        return None
    try:
        step = make(None, _ENCODER.default, E.encode_basestring, None, ":", ",", True, False,
                    False)
        probe = {"b": [1, 2.5, -0.0, 1e16, None, True, "é\"\n"], "a": {"2": (3,)}}
        return step if "".join(step(probe, 0)) == _ENCODER.encode(probe) else None
    except Exception:
        return None


def _one_chunk(value: Any, _level: int = 0) -> Sequence[str]:
    return (_ENCODER.encode(value),)


#: the canonical JSON of a value in chunks (call with the value and 0)
_chunks: Callable[[Any, int], Sequence[str]] = _c_chunks() or _one_chunk


def _encode(value: Any) -> str:
    """The canonical JSON of ``value``; ``ValueError`` for NaN or an infinity."""
    return "".join(_chunks(value, 0))


def _finite(value: Any) -> Any:
    if isinstance(value, float) and not math.isfinite(value):
        return None
    if isinstance(value, dict):
        return {str(k): _finite(v) for k, v in value.items()}
    if isinstance(value, list | tuple):
        return [_finite(v) for v in value]
    return value


def os_user() -> str:
    try:
        return getpass.getuser()
    except Exception:  # no passwd entry (some containers)
        return f"uid {os.getuid()}" if hasattr(os, "getuid") else "unknown"


def config_record(config: Config | None) -> tuple[str | None, str | None, str | None]:
    """(path, text with passwords masked, SHA-256 of that text) of the config.

    The hash covers the text as stored, so the record can be checked against itself; it is
    the file's own SHA-256 whenever the file holds no password.
    """
    if config is None:
        return None, None, None
    raw = config.text or config.model_dump_json()
    shown = mask_secrets(raw)
    path = str(config.source) if config.source else None
    return path, shown, hashlib.sha256(shown.encode("utf-8")).hexdigest()


def run_row(report: RunReport, *, config: Config | None, fingerprints: dict[str, Any] | None,
            recorded_at: datetime,
            rows: Sequence[Sequence[Any]] | None = None) -> dict[str, Any]:
    """The ``runs`` row of ``report`` (``attempt``, ``snapshot`` and ``digest`` set later).

    ``rows``: the report's :func:`result_rows`, if made already; its status and counts are
    then taken from their ``status`` column (one C-level pass, the same figures)."""
    path, text, digest = config_record(config)
    inputs = fingerprints if fingerprints is not None else report.inputs
    if rows is None:
        status, counts = report.status, report.counts()
    else:
        found = Counter(map(operator.itemgetter(_STATUS), rows))
        status = worst_status(list(found))
        counts = {s: found.get(s, 0) for s in DISPLAY_ORDER}
    return {
        "run_id": report.run_id,
        "cycle": report.cycle,
        "attempt": None,
        "status": status,
        "started_at": parse_time(report.started_at) or recorded_at,
        "finished_at": parse_time(report.finished_at),
        "recorded_at": recorded_at,
        "tool_version": tool_version(),
        "config_path": path or report.config_path,
        "config_text": text,
        "config_hash": digest,
        "inputs": dumps(_mask_paths(inputs)),
        "evaluated_cycles": dumps(report.evaluated_cycles),
        "counts": dumps(counts),
        "snapshot": None,
        "host": socket.gethostname(),
        "os_user": os_user(),
        "label": getattr(report, "label", None),
    }


def _mask_paths(value: Any) -> Any:
    # input "paths" may be URLs (object stores, databases): never keep a password from them
    if isinstance(value, str):
        return mask_secrets(value)
    if isinstance(value, dict):
        return {k: _mask_paths(v) for k, v in value.items()}
    if isinstance(value, list):
        return [_mask_paths(v) for v in value]
    return value


def _number(x: Any) -> str:
    x = float(x)
    return repr(x) if math.isfinite(x) else "null"


def _bound(bound: Any) -> str | None:
    """A threshold level as JSON text: ``25.0`` or ``[-5.0,8.0]``."""
    if bound is None:
        return None
    if isinstance(bound, tuple | list):
        return f"[{_number(bound[0])},{_number(bound[1])}]"
    return _number(bound)


#: the fields of a :class:`CheckResult` that ``result_rows`` reads, in one C call per result
_FIELDS_OF = operator.attrgetter(
    "check", "status", "segment", "lag", "measure", "value", "warn", "fail", "n_series", "n_obs",
    "message", "reason", "examples", "unit", "details")
_NO_BOUND = object()


def result_rows(results: Sequence[CheckResult]) -> list[tuple[Any, ...]]:
    """One ``results`` row per check result, in report order (``seq`` from 0), as a tuple in
    :data:`RESULT_FIELDS` order: ``value`` a finite ``float`` or ``None``; ``lag``,
    ``n_series``, ``n_obs`` and ``waiver_id`` plain ``int`` or ``None``; bounds as JSON text
    (:func:`_bound`); examples and details as canonical JSON (:func:`dumps`), ``None`` when
    empty.

    A loop over results (one per segment × lag × measure), not over data rows; timed by
    ``bench/record_bench.py`` (each attribute read and conversion counts at 50 000 results).
    """
    rows: list[tuple[Any, ...]] = []
    append = rows.append
    isfinite = math.isfinite
    chunks, join = _chunks, "".join  # dumps' fast path, inlined (one call per text)
    bounds: dict[Any, str | None] = {}
    # results share their levels (the same objects, from the config): the last ones' text
    last_warn: Any = _NO_BOUND
    last_fail: Any = _NO_BOUND
    warn_text = fail_text = None
    for seq, (check, status, segment, lag, measure, value, warn, fail, n_series, n_obs,
              message, reason, examples, unit, details) in enumerate(map(_FIELDS_OF, results)):
        if value is not None:
            if type(value) is not float:
                value = float(value)
            if not isfinite(value):
                value = None
        if lag is not None and type(lag) is not int:
            lag = int(lag)
        if n_series is not None and type(n_series) is not int:
            n_series = int(n_series)
        if n_obs is not None and type(n_obs) is not int:
            n_obs = int(n_obs)
        if warn is not last_warn:
            if warn not in bounds:
                bounds[warn] = _bound(warn)
            last_warn, warn_text = warn, bounds[warn]
        if fail is not last_fail:
            if fail not in bounds:
                bounds[fail] = _bound(fail)
            last_fail, fail_text = fail, bounds[fail]
        waiver_id = None
        if details:
            waiver = details.get("waiver")
            if isinstance(waiver, dict) and "id" in waiver:
                waiver_id = int(waiver["id"])
            try:
                details = join(chunks(details, 0))
            except ValueError:  # NaN or infinity
                details = dumps(details)
        else:
            details = None
        if examples:
            try:
                examples = join(chunks(examples, 0))
            except ValueError:
                examples = dumps(examples)
        else:
            examples = None
        append((seq, check, status, segment, lag, measure, value, warn_text, fail_text,
                n_series, n_obs, message, reason, examples, unit, details, waiver_id))
    return rows


def chain_digest(previous: str | None, run: dict[str, Any],
                 rows: Sequence[Sequence[Any]]) -> str:
    """SHA-256 of: the previous digest, a newline, the run row as canonical JSON (its
    :data:`RUN_FIELDS`, timestamps in ISO 8601 UTC), a newline, and the result rows as one
    JSON array of arrays (fields in :data:`RESULT_FIELDS` order, floats as shortest repr)."""
    head = dumps({k: _canon(run.get(k)) for k in RUN_FIELDS})
    # tuples and lists encode as the JSON arrays they are: no copy of the rows unless some
    # row is another kind of sequence (e.g. a database row)
    if not isinstance(rows, list) or not set(map(type, rows)) <= {tuple, list}:
        rows = [r if isinstance(r, tuple | list) else list(r) for r in rows]
    digest = hashlib.sha256(f"{previous or ''}\n{head}\n".encode())
    for chunk in _chunks(rows, 0):  # the body hashed as encoded, never copied whole
        digest.update(chunk.encode("utf-8"))
    return digest.hexdigest()


def _canon(value: Any) -> Any:
    if isinstance(value, datetime):
        return iso(value)
    return value


def insert_results(conn: Connection, run_pk: int, rows: Sequence[Sequence[Any]]) -> None:
    """Insert result rows in bulk: ``COPY … FROM STDIN`` on PostgreSQL (psycopg 3), one
    ``executemany`` through the driver elsewhere (no per-row work in SQLAlchemy). Values
    travel as data (COPY rows or bound parameters), never as SQL text; only ``run_pk``, the
    integer key the database gave the run, is written into the ``executemany`` statement.
    Timed by ``bench/record_bench.py`` (50 000 results on SQLite: see ``bench/README.md``)."""
    if not rows:
        return
    from accuracy_checks.store.schema import results

    names = ("run_pk", *RESULT_FIELDS)
    quote = conn.dialect.identifier_preparer.quote
    columns = ", ".join(quote(n) for n in names)
    if conn.dialect.name == "postgresql" and conn.dialect.driver == "psycopg":
        raw = conn.connection.driver_connection
        with raw.cursor() as cur, cur.copy(  # type: ignore[union-attr]
                f"COPY {quote(results.name)} ({columns}) FROM STDIN") as copy:
            for r in rows:
                copy.write_row((run_pk, *r))
        return
    style = conn.dialect.paramstyle
    if style in ("qmark", "format", "pyformat"):
        mark = "?" if style == "qmark" else "%s"
        # the run's key is the integer the database just gave this run: written into the
        # statement (as int), so the result rows go to the driver as they are, uncopied
        sql = (f"INSERT INTO {quote(results.name)} ({columns}) "
               f"VALUES ({int(run_pk)}, {', '.join([mark] * len(RESULT_FIELDS))})")
        conn.exec_driver_sql(sql, rows if isinstance(rows, list) else list(rows))
    else:  # any other driver: SQLAlchemy's own executemany
        conn.execute(results.insert(), [dict(zip(names, (run_pk, *r), strict=True))
                                        for r in rows])
