"""The audit store's tables (SQLAlchemy 2 Core), its schema version and the migrations.

Tables (schema version 2):

``schema_version``
    one row per schema version applied to this store (``version``, ``applied_at``,
    ``tool_version``); the store's version is the highest.
``runs``
    one row per recorded run: ``run_id``, ``cycle`` (the issue date label), ``attempt``
    (unique per cycle, gap-free, allocated by the store), ``status`` (the verdict), start,
    finish and record times (UTC), ``tool_version``, the config's path, text (passwords
    masked) and SHA-256 of that text, input fingerprints (file SHA-256, bytes, rows), the
    cycles accuracy was measured on, result counts, the archive snapshot, host, OS user, an
    optional pipeline run ``label`` and ``digest``: the SHA-256 chain over every run and its
    results (see :mod:`accuracy_checks.store.record`).
``results``
    every check result of a run, field by field as in the JSON contract (``check`` is
    ``check_name``; bounds and examples as JSON text), with ``waiver_id`` when a waiver turned
    a breach into ``waived``.
``waivers``
    one row per waiver granted: segment, measure, optional lag, the last day it applies
    (``until``, inclusive, UTC), reason, who and when.
``waiver_revocations``
    one row per waiver revoked: which, why, who and when.

Every table is append-only: triggers reject ``UPDATE`` and ``DELETE`` (and ``TRUNCATE`` on
PostgreSQL); a correction is a new row, never an edit.

Versions:

1. the first layout: ``runs`` without ``label`` and ``digest``; ``results`` without ``unit``,
   ``details`` and ``waiver_id``; a revocation was recorded by updating the waiver's
   ``revoked_at``, ``revoked_by`` and ``revoke_reason``; no append-only triggers.
2. run labels, the digest chain, result units/details/waiver links, revocations as rows of
   their own (:func:`_migrate_1_to_2` moves the old ones over), append-only triggers.

:func:`ensure_schema` creates a new store or upgrades an older one in place, inside one
transaction under the store's write lock, so that processes opening the same store at once
neither race nor see half a migration.
"""

from __future__ import annotations

from collections.abc import Callable
from datetime import UTC, datetime

from sqlalchemy import (
    BigInteger,
    Column,
    Connection,
    Date,
    DateTime,
    Float,
    ForeignKey,
    Index,
    Integer,
    MetaData,
    String,
    Table,
    Text,
    UniqueConstraint,
    func,
    inspect,
    select,
    text,
)

SCHEMA_VERSION = 2

#: 64-bit integer ids on PostgreSQL, SQLite's rowid alias on SQLite
BigId = BigInteger().with_variant(Integer, "sqlite")
Timestamp = DateTime(timezone=True)

metadata = MetaData()


def _texts(*names: str) -> list[Column[str]]:
    """Nullable ``TEXT`` columns of these names, in this order (free text or JSON documents)."""
    return [Column(name, Text) for name in names]


schema_version = Table(
    "schema_version",
    metadata,
    Column("version", Integer, primary_key=True, autoincrement=False),
    Column("applied_at", Timestamp, nullable=False),
    Column("tool_version", String(32), nullable=False),
)

runs = Table(
    "runs",
    metadata,
    Column("id", BigId, primary_key=True),
    Column("run_id", String(64), nullable=False, unique=True),
    Column("cycle", String(32)),
    Column("attempt", Integer),
    Column("status", String(8), nullable=False),
    Column("started_at", Timestamp, nullable=False),
    Column("finished_at", Timestamp),
    Column("recorded_at", Timestamp, nullable=False),
    Column("tool_version", String(32), nullable=False),
    *_texts("config_path", "config_text"),
    Column("config_hash", String(64)),
    *_texts("inputs", "evaluated_cycles", "counts", "snapshot"),
    Column("host", String(255)),
    Column("os_user", String(255)),
    Column("label", Text),
    Column("digest", String(64)),
    UniqueConstraint("cycle", "attempt", name="uq_runs_cycle_attempt"),
    Index("ix_runs_started_at", "started_at"),
)

results = Table(
    "results",
    metadata,
    Column("id", BigId, primary_key=True),
    Column("run_pk", BigId, ForeignKey("runs.id"), nullable=False),
    Column("seq", Integer, nullable=False),
    Column("check_name", String(64), nullable=False),
    Column("status", String(8), nullable=False),
    Column("segment", Text),
    Column("lag", Integer),
    Column("measure", String(64)),
    Column("value", Float),
    *_texts("warn", "fail"),
    Column("n_series", BigInteger),
    Column("n_obs", BigInteger),
    Column("message", Text),
    Column("reason", String(64)),
    Column("examples", Text),
    Column("unit", String(16)),
    Column("details", Text),
    Column("waiver_id", Integer),
    Index("ix_results_run_pk", "run_pk"),
    Index("ix_results_segment_measure", "segment", "measure"),
)

waivers = Table(
    "waivers",
    metadata,
    Column("id", Integer, primary_key=True),
    Column("segment", Text, nullable=False),
    Column("measure", String(64), nullable=False),
    Column("lag", Integer),
    Column("until", Date, nullable=False),
    Column("reason", Text, nullable=False),
    Column("created_by", String(255), nullable=False),
    Column("created_at", Timestamp, nullable=False),
)

waiver_revocations = Table(
    "waiver_revocations",
    metadata,
    Column("id", Integer, primary_key=True),
    Column("waiver_id", Integer, ForeignKey("waivers.id"), nullable=False, unique=True),
    Column("reason", Text, nullable=False),
    Column("revoked_by", String(255), nullable=False),
    Column("revoked_at", Timestamp, nullable=False),
)

APPEND_ONLY = ("runs", "results", "waivers", "waiver_revocations", "schema_version")


def current_version(conn: Connection) -> int:
    """The store's schema version: 0 for an empty database."""
    if not inspect(conn).has_table("schema_version"):
        return 0
    return int(conn.execute(select(func.max(schema_version.c.version))).scalar() or 0)


def ensure_schema(conn: Connection, tool_version: str) -> int:
    """Create the tables or migrate them to :data:`SCHEMA_VERSION`; return the old version.

    Call inside a transaction that holds the store's write lock. Raises ``RuntimeError`` when
    the store was written by a newer schema than this tool knows (the caller words it).
    """
    found = current_version(conn)
    if found == SCHEMA_VERSION:
        return found
    if found > SCHEMA_VERSION:
        raise RuntimeError(f"schema version {found} is newer than this tool's {SCHEMA_VERSION}")
    if found == 0:
        if inspect(conn).has_table("runs"):
            raise RuntimeError("the database has a `runs` table but no `schema_version`")
        metadata.create_all(conn)
        _append_only_triggers(conn)
        _stamp(conn, SCHEMA_VERSION, tool_version)
        return 0
    for version in range(found + 1, SCHEMA_VERSION + 1):
        MIGRATIONS[version](conn)
        _stamp(conn, version, tool_version)
    return found


def _stamp(conn: Connection, version: int, tool_version: str) -> None:
    conn.execute(schema_version.insert().values(
        version=version, applied_at=datetime.now(UTC), tool_version=tool_version))


def _migrate_1_to_2(conn: Connection) -> None:
    """v1 → v2: new columns, revocations as rows of their own, append-only triggers."""
    for ddl in (
        "ALTER TABLE runs ADD COLUMN label TEXT",
        "ALTER TABLE runs ADD COLUMN digest VARCHAR(64)",
        "ALTER TABLE results ADD COLUMN unit VARCHAR(16)",
        "ALTER TABLE results ADD COLUMN details TEXT",
        "ALTER TABLE results ADD COLUMN waiver_id INTEGER",
    ):
        conn.execute(text(ddl))
    waiver_revocations.create(conn)
    conn.execute(text(
        "CREATE INDEX IF NOT EXISTS ix_results_segment_measure ON results (segment, measure)"))
    # v1 kept a revocation in the waiver row itself; carry each over as a revocation row
    conn.execute(text(
        "INSERT INTO waiver_revocations (waiver_id, reason, revoked_by, revoked_at) "
        "SELECT id, COALESCE(revoke_reason, '(no reason recorded)'), "
        "COALESCE(revoked_by, 'unknown'), revoked_at FROM waivers WHERE revoked_at IS NOT NULL"
    ))
    _append_only_triggers(conn)


MIGRATIONS: dict[int, Callable[[Connection], None]] = {2: _migrate_1_to_2}


def _append_only_triggers(conn: Connection) -> None:
    """Reject UPDATE and DELETE (and TRUNCATE) on every table: the store is append-only."""
    if conn.dialect.name == "postgresql":
        conn.execute(text(
            "CREATE OR REPLACE FUNCTION accuracy_checks_append_only() RETURNS trigger "
            "LANGUAGE plpgsql AS $$ BEGIN RAISE EXCEPTION "
            "'accuracy-checks: table % is append-only (a correction is a new row)', "
            "TG_TABLE_NAME; END $$"
        ))
        for table in APPEND_ONLY:
            conn.execute(text(
                f"CREATE TRIGGER {table}_append_only BEFORE UPDATE OR DELETE ON {table} "
                "FOR EACH ROW EXECUTE FUNCTION accuracy_checks_append_only()"))
            conn.execute(text(
                f"CREATE TRIGGER {table}_no_truncate BEFORE TRUNCATE ON {table} "
                "FOR EACH STATEMENT EXECUTE FUNCTION accuracy_checks_append_only()"))
        return
    for table in APPEND_ONLY:
        for action in ("UPDATE", "DELETE"):
            conn.execute(text(
                f"CREATE TRIGGER IF NOT EXISTS {table}_no_{action.lower()} BEFORE {action} "
                f"ON {table} BEGIN SELECT RAISE(ABORT, 'accuracy-checks: table {table} is "
                "append-only (a correction is a new row)'); END"))
