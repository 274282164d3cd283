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

No wait is unbounded. PostgreSQL connections give up after :data:`PG_CONNECT_TIMEOUT_S`
(libpq's ``connect_timeout``) and each statement after :data:`PG_STATEMENT_TIMEOUT_S` (the
server's ``statement_timeout``, the advisory-lock wait included), unless the user set either
(the URL's ``connect_timeout`` or ``PGCONNECT_TIMEOUT``; ``statement_timeout`` through the
URL's ``options``, ``PGOPTIONS`` or a role or database default): then theirs applies. A
timeout is a :class:`StoreError` naming the server (password masked).
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
from accuracy_checks.store.archive import can_write
from accuracy_checks.store.urls import mask_secrets, mask_url, sqlite_file

#: seconds a writer waits for the write lock before giving up (SQLite busy timeout)
BUSY_TIMEOUT_S = 120.0
#: the SQLite page cache of a connection, in KiB (SQLite's default is 2 MiB)
SQLITE_CACHE_KIB = 64 * 1024
#: the PostgreSQL advisory lock key of a store's writes (any constant bigint; "ACCHECKS")
PG_WRITE_LOCK = 0x4143434845434B53
#: seconds a PostgreSQL connection attempt may take unless the URL or PGCONNECT_TIMEOUT says
PG_CONNECT_TIMEOUT_S = 10
#: seconds a PostgreSQL statement may run unless the user's session settings say otherwise
PG_STATEMENT_TIMEOUT_S = 60


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
        _bind_none_directly()
        engine = create_engine(parsed, poolclass=NullPool,
                               connect_args={"timeout": BUSY_TIMEOUT_S})
        event.listen(engine, "connect", _sqlite_connect)
        event.listen(engine, "begin", _sqlite_begin)
        return engine
    connect_args: dict[str, Any] = {}
    is_pg = parsed.get_backend_name() == "postgresql"
    if is_pg and "connect_timeout" not in parsed.query and not os.environ.get("PGCONNECT_TIMEOUT"):
        connect_args["connect_timeout"] = PG_CONNECT_TIMEOUT_S
    try:
        engine = create_engine(parsed, poolclass=NullPool, connect_args=connect_args)
        if is_pg:
            event.listen(engine, "connect", _pg_connect)
        return engine
    except Exception as exc:  # e.g. the driver is not installed
        hint = ""
        if parsed.get_backend_name() == "postgresql":
            hint = ' Install the PostgreSQL driver: pip install "accuracy-checks[postgres]".'
        raise StoreError(
            f"Cannot use the audit store {mask_url(url)}: {mask_secrets(str(exc))}.{hint}"
        ) from None


def _pg_connect(dbapi_conn: Any, _record: Any) -> None:
    # a default statement timeout only where none is set (URL options, PGOPTIONS, role or
    # database defaults all show in current_setting); committed, so a rollback keeps it
    cur = dbapi_conn.cursor()
    try:
        cur.execute("SELECT set_config('statement_timeout', %s, false) "
                    "WHERE current_setting('statement_timeout') = '0'",
                    (f"{int(PG_STATEMENT_TIMEOUT_S * 1000)}ms",))
    finally:
        cur.close()
    dbapi_conn.commit()


def check_sqlite_location(path: Path) -> None:
    """Raise :class:`StoreError` unless the SQLite store ``path`` can be created or written:
    neither it nor a folder above it is in the way (a file where a folder is needed, a
    folder where the database file is) and its folder may be written (SQLite writes its
    ``-wal`` and ``-shm`` files beside the database). Creates nothing."""
    if path.is_dir():
        raise StoreError(
            f"The audit store {path} is a folder, not an SQLite database file. Point `store:` "
            "at a file (e.g. sqlite:///.accuracy_checks/audit.db), or move the folder away."
        )
    folder = path.parent
    while not folder.exists() and folder.parent != folder:
        folder = folder.parent
    if not folder.is_dir():
        raise StoreError(
            f"The audit store {path} cannot be created: {folder} is a file, not a folder. "
            "Point `store:` in the config (or `archive:`, next to which the default store "
            "lives) at a folder, or move that file away."
        )
    if not can_write(folder):
        raise StoreError(
            f"The audit store {path} cannot be written: no permission to create files in "
            f"{folder} (SQLite writes the database and its -wal and -shm files there). Give "
            "the user running the checks write access to it, or point `store:` elsewhere."
        )


def _create_private_file(path: Path, *, create: bool) -> None:
    """Create the SQLite file readable by its owner only (SQLite's -wal and -shm files copy
    the database file's mode)."""
    if path.exists():
        return
    if not create:
        raise StoreError(f"No audit store at {path}: no run has been recorded there yet.")
    try:
        path.parent.mkdir(parents=True, exist_ok=True)
        fd = os.open(path, os.O_CREAT | os.O_EXCL | os.O_WRONLY, 0o600)
    except FileExistsError:  # another process created it first (or a file is in the way)
        if path.exists():
            return
        check_sqlite_location(path)
        raise
    except OSError as exc:
        check_sqlite_location(path)  # words the usual causes
        raise StoreError(f"The audit store {path} cannot be created: "
                         f"{exc.strerror or exc}.") from None
    os.close(fd)


_NOTHING: dict[Any, None] = {}
#: a C-level callable that returns ``None`` for any one argument
_NONE_TO_NONE = _NOTHING.get


def _bind_none_directly() -> None:
    """Register an adapter of ``None`` to ``None`` with Python's ``sqlite3`` module, unless
    one is registered already.

    Its driver binds ``None`` through the adaptation protocol: with no adapter registered,
    each ``None`` costs a failed look-up of ``__adapt__`` and of ``__conform__`` (about
    0.27 µs here, 0.05 s for the 175 000 ``NULL`` values of 50 000 results in
    ``bench/record_bench.py``); with one, a dictionary hit and a C call. The registry is
    process-wide; this adapter changes no value anywhere (``None`` is bound as ``NULL``
    either way)."""
    import sqlite3

    if (type(None), sqlite3.PrepareProtocol) not in getattr(sqlite3, "adapters", {}):
        sqlite3.register_adapter(type(None), _NONE_TO_NONE)


def _sqlite_connect(dbapi_conn: Any, _record: Any) -> None:
    # let SQLAlchemy's begin event emit BEGIN itself (the pysqlite driver's own transaction
    # handling would defer it and break BEGIN IMMEDIATE)
    dbapi_conn.isolation_level = None
    cur = dbapi_conn.cursor()
    try:
        cur.execute(f"PRAGMA busy_timeout = {int(BUSY_TIMEOUT_S * 1000)}")
        cur.execute("PRAGMA foreign_keys = ON")
        # a run's results (tens of MB for 50 k results with their indexes) stay in the page
        # cache until the commit instead of spilling to the WAL mid-transaction; memory is
        # taken only as pages are used
        cur.execute(f"PRAGMA cache_size = -{SQLITE_CACHE_KIB}")
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
                f"{self._timeout_hint(exc.orig)}"
            ) from None
        except SQLAlchemyError as exc:
            raise StoreError(
                f"Cannot {doing} the audit store {self.display_url}: "
                f"{mask_secrets(str(exc))}"
            ) from None

    def _timeout_hint(self, orig: BaseException | None) -> str:
        """A sentence on what timed out and where, for PostgreSQL timeouts ('' otherwise)."""
        if self.dialect != "postgresql" or orig is None:
            return ""
        server = _server_of(self.url)
        if type(orig).__name__ == "ConnectionTimeout":
            return (f" (no answer from the server at {server} within {_connect_wait(self.url)} "
                    "s; check that PostgreSQL runs there and is reachable. The store URL's "
                    "connect_timeout parameter sets the wait, default "
                    f"{PG_CONNECT_TIMEOUT_S} s). Nothing was recorded.")
        if getattr(orig, "sqlstate", None) == "57014":  # query_canceled: statement_timeout
            return (f" (a statement on {server} ran longer than the statement timeout: the "
                    "server is overloaded, or another session holds a lock on the store. "
                    "Set it with options=-c statement_timeout=… in the store URL, default "
                    f"{PG_STATEMENT_TIMEOUT_S} s). Nothing was recorded.")
        return ""

    def dispose(self) -> None:
        self.engine.dispose()


def _connect_wait(url: str) -> str:
    """The connect timeout in force for ``url``, as libpq reads it (URL, env, our default)."""
    from sqlalchemy.engine import make_url

    given = make_url(url).query.get("connect_timeout") or os.environ.get("PGCONNECT_TIMEOUT")
    return str(given or PG_CONNECT_TIMEOUT_S)


def _server_of(url: str) -> str:
    """``host:port`` of a database URL (for messages; no user, no password)."""
    from sqlalchemy.engine import make_url

    try:
        parsed = make_url(url)
    except Exception:
        return "the store's host"
    host = parsed.host or parsed.query.get("host") or "localhost"
    return f"{host}:{parsed.port or 5432}"


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
