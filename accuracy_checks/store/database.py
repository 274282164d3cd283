"""Connections, transactions and the write lock of the audit store.

Writes are serialised by one lock per store, taken at the start of each write transaction
and released by its commit or rollback (or by the death of the process that held it):

- SQLite: the file is in WAL mode (readers never wait for the writer); each write
  transaction starts with ``BEGIN IMMEDIATE``, which takes the database's write lock at once,
  and a busy timeout makes later writers wait their turn instead of failing.
- PostgreSQL: each write transaction first takes a transaction-level advisory lock
  (``pg_advisory_xact_lock``); a unique constraint on ``(cycle, attempt)`` backs it up.

Under the lock a writer reads the highest attempt of its cycle and takes the next one, so
attempts are unique and gap-free even for runs that start at the same moment; a run killed
mid-write loses its connection, which rolls its transaction back and frees the lock.
"""

from __future__ import annotations

import os
import time
from collections.abc import Iterator
from contextlib import contextmanager
from pathlib import Path
from typing import Any

from sqlalchemy import Connection, Engine, create_engine, event, text
from sqlalchemy.exc import DBAPIError, SQLAlchemyError
from sqlalchemy.pool import NullPool

from accuracy_checks.errors import UsageError
from accuracy_checks.store.urls import mask_secrets, mask_url, sqlite_file

#: seconds a writer waits for the write lock before giving up (SQLite busy timeout)
BUSY_TIMEOUT_S = 120.0
#: the PostgreSQL advisory lock key of a store's writes (any constant bigint; "ACCHECKS")
PG_WRITE_LOCK = 0x4143434845434B53


class StoreError(UsageError):
    """The audit store cannot be opened, read or written (exit code 2).

    The message names the store with its password masked.
    """


def make_engine(url: str, *, create: bool) -> Engine:
    """An engine for ``url`` (SQLite: WAL, busy timeout, file created with mode 0600)."""
    from sqlalchemy.engine import make_url

    try:
        parsed = make_url(url)
    except Exception:  # sqlalchemy raises ArgumentError; keep the URL masked
        raise StoreError(
            f"The audit store URL {mask_url(url)!r} is not a database URL "
            "(e.g. sqlite:///.accuracy_checks/audit.db or "
            "postgresql+psycopg://user@host/dbname)."
        ) from None
    path = sqlite_file(url)
    if parsed.get_backend_name() == "sqlite":
        if path is not None:
            _create_private_file(path, create=create)
        engine = create_engine(parsed, poolclass=NullPool,
                               connect_args={"timeout": BUSY_TIMEOUT_S})
        event.listen(engine, "connect", _sqlite_connect)
        event.listen(engine, "begin", _sqlite_begin)
        return engine
    try:
        return create_engine(parsed, poolclass=NullPool)
    except Exception as exc:  # e.g. the driver is not installed
        hint = ""
        if parsed.get_backend_name() == "postgresql":
            hint = ' Install the PostgreSQL driver: pip install "accuracy-checks[postgres]".'
        raise StoreError(
            f"Cannot use the audit store {mask_url(url)}: {mask_secrets(str(exc))}.{hint}"
        ) from None


def _create_private_file(path: Path, *, create: bool) -> None:
    """Create the SQLite file readable by its owner only (SQLite's -wal and -shm files copy
    the database file's mode)."""
    if path.exists():
        return
    if not create:
        raise StoreError(f"No audit store at {path}: no run has been recorded there yet.")
    path.parent.mkdir(parents=True, exist_ok=True)
    try:
        fd = os.open(path, os.O_CREAT | os.O_EXCL | os.O_WRONLY, 0o600)
    except FileExistsError:  # another process created it first
        return
    os.close(fd)


def _sqlite_connect(dbapi_conn: Any, _record: Any) -> None:
    # let SQLAlchemy's begin event emit BEGIN itself (the pysqlite driver's own transaction
    # handling would defer it and break BEGIN IMMEDIATE)
    dbapi_conn.isolation_level = None
    cur = dbapi_conn.cursor()
    try:
        cur.execute(f"PRAGMA busy_timeout = {int(BUSY_TIMEOUT_S * 1000)}")
        cur.execute("PRAGMA foreign_keys = ON")
        mode = cur.execute("PRAGMA journal_mode").fetchone()[0]
        deadline = time.monotonic() + BUSY_TIMEOUT_S
        while str(mode).lower() != "wal":
            # switching to WAL needs a moment alone with the file: retry while others hold it
            try:
                mode = cur.execute("PRAGMA journal_mode = WAL").fetchone()[0]
            except Exception:
                if time.monotonic() > deadline:
                    raise
                time.sleep(0.05)
    finally:
        cur.close()


def _sqlite_begin(conn: Connection) -> None:
    mode = conn.get_execution_options().get("accuracy_checks_begin", "DEFERRED")
    conn.exec_driver_sql(f"BEGIN {mode}")


class Database:
    """An engine plus the store's read and write transactions, with errors worded."""

    def __init__(self, url: str, *, create: bool = True) -> None:
        self.url = url
        self.display_url = mask_url(url)
        self.engine = make_engine(url, create=create)
        self.dialect = self.engine.dialect.name

    @contextmanager
    def write(self) -> Iterator[Connection]:
        """A transaction that holds the store's write lock until it commits or rolls back."""
        with self._errors("write to"), self.engine.connect() as conn:
            if self.dialect == "sqlite":
                conn = conn.execution_options(accuracy_checks_begin="IMMEDIATE")
            with conn.begin():
                if self.dialect == "postgresql":
                    conn.execute(text("SELECT pg_advisory_xact_lock(:key)"),
                                 {"key": PG_WRITE_LOCK})
                yield conn

    @contextmanager
    def read(self) -> Iterator[Connection]:
        """A read transaction (a consistent snapshot; never waits for writers on SQLite WAL)."""
        with self._errors("read"), self.engine.connect() as conn, conn.begin():
            yield conn

    @contextmanager
    def _errors(self, doing: str) -> Iterator[None]:
        try:
            yield
        except StoreError:
            raise
        except DBAPIError as exc:
            detail = mask_secrets(str(exc.orig)).strip().replace("\n", " ")
            raise StoreError(
                f"Cannot {doing} the audit store {self.display_url}: {detail}"
            ) from None
        except SQLAlchemyError as exc:
            raise StoreError(
                f"Cannot {doing} the audit store {self.display_url}: "
                f"{mask_secrets(str(exc))}"
            ) from None

    def dispose(self) -> None:
        self.engine.dispose()


def validate_url(url: str) -> None:
    """Raise :class:`StoreError` if ``url`` is not a database URL (no connection is made)."""
    from sqlalchemy.engine import make_url

    try:
        make_url(url)
    except Exception:
        raise StoreError(
            f"The audit store URL {mask_url(url)!r} is not a database URL "
            "(e.g. sqlite:///.accuracy_checks/audit.db or "
            "postgresql+psycopg://user@host/dbname); fix `store:` in the config."
        ) from None
