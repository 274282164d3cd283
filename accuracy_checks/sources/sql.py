"""Tables and queries as sources: ``sql: {url, table}`` or ``sql: {url, query}``.

The SQL twin of :mod:`accuracy_checks.sources.files`: :func:`read_sql_columns` reads the
configured columns (:class:`~accuracy_checks.sources.columns.Column`) of a table or query and
converts them with the same converters as files (:func:`~accuracy_checks.sources.columns.
convert`: keys as text, an integer key as its plain decimal text; dates as dates; numbers as
float), so a table and a file holding the same data give the same frames. The pre-reads
(:func:`cycle_starts`, :func:`actual_periods`, :func:`distinct_rows`) are ``GROUP BY`` and
``DISTINCT`` queries: the database does the grouping.

**Never pasted.** Statements are built with SQLAlchemy Core: table and column names are quoted
identifiers, a ``query`` is wrapped as a subquery (``SELECT … FROM (query) AS src``), and the
span filter (``period IN (…)``) goes into the WHERE clause as bound parameters. The filter is
pushed down only when the column holds dates or naive timestamps (the rows read are filtered
again after conversion, so the result never depends on it).

**Drivers.** ``duckdb:///file.duckdb`` is read with DuckDB's own client, results as Arrow
(extra ``warehouse``). PostgreSQL (``postgresql://``, ``postgresql+psycopg://``,
``postgresql+psycopg2://``) is read through ADBC's PostgreSQL driver when it is installed
(extra ``postgres``): the same compiled statement with ``$1``-style bound parameters, the rows
fetched as Arrow (the driver reads PostgreSQL's binary COPY format in C, no Python object per
row); without ADBC, and for any other SQLAlchemy URL, through SQLAlchemy. Arrow results go
through the same column rules as SQLAlchemy's rows (:mod:`accuracy_checks.sources.sql_arrow`):
``numeric`` is a number where a number is configured and a decimal elsewhere (a decimal key
is refused, as psycopg's ``Decimal`` is), ``timestamptz`` is shown in the session's time zone
(as psycopg shows it), types without an Arrow twin (``uuid``, ``json``, …) as their text. A
connection gives up after :data:`CONNECT_TIMEOUT_S` seconds unless the URL sets ``connect_timeout``.
``${NAME}`` in the URL is replaced from the environment when the connection opens.

**Errors** (:class:`~accuracy_checks.errors.InputError`, exit 2; the URL's password masked):
a database that cannot be reached, a missing driver, a missing table, a missing column (naming
the table's columns), a query the database refuses (with the database's message).
"""

from __future__ import annotations

import datetime as dt
import re
from collections.abc import Callable, Iterator, Mapping, Sequence
from contextlib import contextmanager, suppress
from pathlib import Path
from typing import Any

import pandas as pd
from pandas.errors import OutOfBoundsDatetime

from accuracy_checks.config import SqlSource
from accuracy_checks.config.urls import expand_env, mask_secrets
from accuracy_checks.errors import InputError
from accuracy_checks.sources.columns import Column, convert, no_rows, refuse_missing
from accuracy_checks.sources.sql_arrow import arrow_column, libpq_uri

__all__ = ["CONNECT_TIMEOUT_S", "actual_periods", "check_columns", "connect", "converted",
           "cycle_starts", "date_kind", "distinct_rows", "read_sql_columns", "sql_columns",
           "statement"]

#: seconds a connection to a database may take before the run gives up (exit 2)
CONNECT_TIMEOUT_S = 10
_DUCKDB = "duckdb:///"


# ------------------------------------------------------------------------- connections


def _adbc() -> Any | None:
    """ADBC's PostgreSQL DB-API module (``None`` when not installed: SQLAlchemy reads)."""
    with suppress(ImportError):
        import adbc_driver_postgresql.dbapi as adbc

        return adbc
    return None


class _Connection:
    """One open connection: runs SQLAlchemy Core statements, returns Arrow or pandas."""

    def __init__(self, source: SqlSource, role: str, key: str) -> None:
        self.source, self.role, self.key = source, role, key
        self.url = expand_env(source.url, f"{key}.url")
        self._duck: Any = None
        self._adbc: Any = None
        self._conn: Any = None
        self._engine: Any = None
        self._zone: str | None = None

    @property
    def adbc(self) -> bool:
        """Whether PostgreSQL is read through ADBC."""
        return self._adbc is not None

    @property
    def postgres(self) -> bool:
        """Whether the database is PostgreSQL (through ADBC or SQLAlchemy)."""
        return self.adbc or (self._engine is not None
                             and self._engine.dialect.name == "postgresql")

    @property
    def arrow(self) -> bool:
        """Whether statements return Arrow tables (DuckDB, ADBC)."""
        return self._duck is not None or self._adbc is not None

    def open(self) -> None:
        try:
            if self.url.startswith(_DUCKDB):
                import duckdb

                path = self.url[len(_DUCKDB):].partition("?")[0] or ":memory:"
                if path != ":memory:" and not Path(path).is_file():
                    raise InputError(
                        f"The {self.role} {self.source} (config key `{self.key}`): the DuckDB "
                        f"file {path} does not exist. Check the URL; a relative file is "
                        "resolved against the config file's folder."
                    )
                self._duck = duckdb.connect(path, read_only=path != ":memory:")
                return
            import sqlalchemy as sa
            from sqlalchemy.pool import NullPool

            url = sa.engine.make_url(self.url)
            libpq = (url.get_backend_name() == "postgresql"
                     and url.get_driver_name() in ("psycopg", "psycopg2", ""))
            adbc = _adbc() if libpq else None
            if adbc is not None:
                self._adbc = adbc.connect(libpq_uri(url, CONNECT_TIMEOUT_S), autocommit=True)
                return
            args: dict[str, Any] = {}
            if libpq and "connect_timeout" not in url.query:
                args["connect_timeout"] = CONNECT_TIMEOUT_S
            self._engine = sa.create_engine(url, poolclass=NullPool, connect_args=args)
            self._conn = self._engine.connect()
        except InputError:
            raise
        except ModuleNotFoundError as exc:
            raise InputError(self._no_driver(str(exc.name))) from None
        except Exception as exc:
            if type(exc).__name__ == "NoSuchModuleError":
                raise InputError(self._no_driver(str(exc))) from None
            raise InputError(
                f"Cannot connect to the database of the {self.role} {self.source} (config key "
                f"`{self.key}.url`): {self._why(exc)}. Check the host, port, database name and "
                f"credentials (a connection gives up after {CONNECT_TIMEOUT_S} s unless the "
                "URL sets connect_timeout)."
            ) from None

    def close(self) -> None:
        for handle in (self._duck, self._adbc, self._conn):
            if handle is not None:
                handle.close()
        if self._engine is not None:
            self._engine.dispose()

    def _no_driver(self, what: str) -> str:
        return (f"The {self.role} {self.source} (config key `{self.key}.url`) needs a database "
                f"driver that is not installed ({mask_secrets(what)}). Install it: "
                "pip install \"accuracy-checks[warehouse]\" for DuckDB, "
                "\"accuracy-checks[postgres]\" for PostgreSQL.")

    @staticmethod
    def _why(exc: BaseException) -> str:
        """The database's own words, one line, passwords masked (ADBC's status prefix and
        its echo of the statement left out)."""
        orig = getattr(exc, "orig", None) or exc
        text = str(orig).split("Query was:")[0]
        text = re.sub(r"^[A-Z_]+: (?:\[libpq\] )?(?:.*?ERROR: )?", "", text.strip(), flags=re.S)
        text = " ".join(text.split())
        return mask_secrets(text).rstrip(".") or type(exc).__name__

    def _compiled(self, stmt: Any) -> tuple[str, list[Any]]:
        """``stmt`` as PostgreSQL text with ``$1``-style placeholders (an ``IN`` list expanded
        to one placeholder per value) and its parameters in order."""
        from sqlalchemy.dialects import postgresql

        compiled = stmt.compile(dialect=postgresql.dialect(paramstyle="numeric_dollar"),
                                compile_kwargs={"render_postcompile": True})
        return compiled.string, [compiled.params[n] for n in compiled.positiontup or []]

    def _arrow(self, stmt: Any) -> Any:
        text, params = self._compiled(stmt)
        if self._duck is not None:
            return self._duck.sql(text, params=params).to_arrow_table()
        with self._adbc.cursor() as cur:
            cur.execute(text, parameters=params or None)
            return cur.fetch_arrow_table()

    def _refused(self, exc: BaseException) -> InputError:
        what = "query" if self.source.query is not None else "table"
        return InputError(
            f"The {self.role} {self.source} (config key `{self.key}`) cannot be read: the "
            f"database refused the statement: {self._why(exc)}. Check the {what} in the "
            "config."
        )

    def table(self, stmt: Any) -> Any:
        """The rows of a Core statement as an Arrow table (DuckDB and ADBC only)."""
        try:
            return self._arrow(stmt)
        except InputError:
            raise
        except Exception as exc:
            raise self._refused(exc) from None

    def run(self, stmt: Any, kinds: dict[str, str] | None = None) -> pd.DataFrame:
        """The rows of a Core statement as a frame; Arrow results converted column by column
        (:func:`~accuracy_checks.sources.sql_arrow.arrow_column`; ``kinds``: column → kind)."""
        if self.arrow:
            table = self.table(stmt)
            frame = pd.DataFrame({i: arrow_column(table.column(i), (kinds or {}).get(n),
                                                  adbc=self.adbc, zone=self.zone)
                                  for i, n in enumerate(table.column_names)})
            frame.columns = pd.Index(table.column_names, dtype=object)
            return frame
        try:
            result = self._conn.execute(stmt)
            # plain tuples: pandas probes every row object, and a SQLAlchemy Row answers its
            # attribute probes slowly (half the read time at 100 k series on PostgreSQL)
            return pd.DataFrame.from_records([tuple(r) for r in result],
                                             columns=list(result.keys()))
        except InputError:
            raise
        except Exception as exc:
            raise self._refused(exc) from None

    def zone(self) -> str:
        """The session's time zone (PostgreSQL's ``TimeZone``), asked once."""
        if self._zone is None:
            import sqlalchemy as sa

            rows = self.table(sa.select(sa.func.current_setting("TimeZone")))
            self._zone = str(rows.column(0)[0].as_py())
        return self._zone

    def has_table(self) -> bool:
        import sqlalchemy as sa

        schema, name = self.source.table_parts
        if self._adbc is not None:
            # the relation as the search path resolves it; parts quoted, so matched as stored
            quoted = ".".join('"' + p.replace('"', '""') + '"' for p in (schema, name) if p)
            stmt = sa.select(sa.func.to_regclass(quoted).is_not(None))
            return bool(self.table(stmt).column(0)[0].as_py())
        if self._duck is not None:
            tables = sa.table("tables", sa.column("table_schema"), sa.column("table_name"),
                              schema="information_schema")
            stmt = sa.select(tables.c.table_name).where(tables.c.table_name == name)
            if schema is not None:
                stmt = stmt.where(tables.c.table_schema == schema)
            return len(self.run(stmt)) > 0
        try:
            return bool(sa.inspect(self._conn).has_table(name, schema=schema))
        except Exception:
            return True  # a dialect without the inspection: the read names the problem


@contextmanager
def connect(source: SqlSource, role: str, key: str) -> Iterator[_Connection]:
    conn = _Connection(source, role, key)
    conn.open()
    try:
        yield conn
    finally:
        conn.close()

# ---------------------------------------------------------------------------- statements


def _from(source: SqlSource, names: Sequence[str]) -> Any:
    """The source as a Core selectable with ``names`` as its columns: the (quoted) table, or
    the query as a subquery ``src``."""
    import sqlalchemy as sa

    columns: list[Any] = [sa.column(n) for n in dict.fromkeys(names)]
    if source.table is not None:
        schema, name = source.table_parts
        return sa.table(name, *columns, schema=schema)
    # a colon is literal text in the user's query, never a bound parameter
    text = source.query.strip().rstrip(";").replace(":", "\\:")  # type: ignore[union-attr]
    return sa.text(text).columns(*columns).subquery("src")


def _header(conn: _Connection) -> list[str]:
    """The column names of the source as the database gives them."""
    import sqlalchemy as sa

    src = conn.source
    if src.table is not None and not conn.has_table():
        raise InputError(
            f"The {conn.role} {src} (config key `{conn.key}.table`) does not exist. Check the "
            "table name (and its schema: `schema.table`); names are matched as the database "
            "stores them."
        )
    stmt = sa.select(sa.text("*")).select_from(_from(src, [])).where(sa.false())
    if conn.arrow:
        return [str(c) for c in conn.table(stmt).column_names]
    return [str(c) for c in conn.run(stmt).columns]


def check_columns(conn: _Connection, columns: Sequence[Column]) -> list[str]:
    present = _header(conn)
    refuse_missing(columns, present, f"{conn.role} {conn.source} (config key `{conn.key}`)",
                   "Fix the column name in the config or in the table (names are matched as "
                   "the database stores them).")
    return present


def date_kind(conn: _Connection, name: str) -> type | None:
    """``dt.date`` or ``dt.datetime`` when column ``name`` holds dates or naive timestamps
    (so a filter on it can be pushed into the WHERE clause), else ``None``."""
    import sqlalchemy as sa

    src = _from(conn.source, [name])
    col = src.c[name]
    stmt = sa.select(col).where(col.is_not(None)).limit(1)
    if conn.adbc:  # the Arrow type says it (pandas would show a date as a timestamp)
        import pyarrow as pa

        kind = conn.table(stmt).schema.field(0).type
        if pa.types.is_date(kind):
            return dt.date
        return dt.datetime if pa.types.is_timestamp(kind) and kind.tz is None else None
    value = conn.run(stmt)
    if not len(value):
        return None
    first = value.iloc[0, 0]
    if isinstance(first, pd.Timestamp):
        first = first.to_pydatetime()
    if isinstance(first, dt.datetime):
        return dt.datetime if first.tzinfo is None else None
    return dt.date if isinstance(first, dt.date) else None


def _params(kind: type, dates: Sequence[pd.Timestamp]) -> list[Any]:
    stamps = [pd.Timestamp(d) for d in dates]
    if kind is dt.date:
        return [s.date() for s in stamps]
    return [s.to_pydatetime() for s in stamps]


# ------------------------------------------------------------------------------- reading


def sql_columns(source: SqlSource, role: str, key: str) -> list[str]:
    """The column names of a table or query."""
    with connect(source, role, key) as conn:
        return _header(conn)


def read_sql_columns(source: SqlSource, columns: Sequence[Column], *, role: str, key: str,
                     allow_empty: bool = False,
                     row_filter: tuple[str, Sequence[pd.Timestamp]] | None = None,
                     pairs: tuple[str, Mapping[pd.Timestamp, Sequence[pd.Timestamp]]] | None
                     = None) -> pd.DataFrame:
    """Read ``columns`` of a table or query and convert them to their kinds (as files).

    ``row_filter`` = (date column, dates): when the column holds dates or naive timestamps,
    only the rows on those dates are read (``column IN (…)``, bound parameters). ``pairs`` =
    (issue-date column, issue date → dates of ``row_filter``'s column): when both columns are
    dates, only those pairs too (``issued = … AND column IN (…) OR …``)."""
    with connect(source, role, key) as conn:
        check_columns(conn, columns)
        raw = conn.run(statement(conn, columns, row_filter, pairs),
                       {c.name: c.kind for c in reversed(columns)})
    if len(raw) == 0 and not allow_empty:
        raise no_rows(f"The {role} {source} (config key `{key}`)")
    return converted(raw, source, columns, role)


def statement(conn: _Connection, columns: Sequence[Column],
              row_filter: tuple[str, Sequence[pd.Timestamp]] | None = None,
              pairs: tuple[str, Mapping[pd.Timestamp, Sequence[pd.Timestamp]]] | None = None
              ) -> Any:
    """The Core ``SELECT`` of :func:`read_sql_columns` (its filters as bound parameters)."""
    import sqlalchemy as sa

    names = list(dict.fromkeys(c.name for c in columns))
    src = _from(conn.source, [*names, *(f[0] for f in (row_filter, pairs) if f is not None)])
    stmt = sa.select(*[src.c[n] for n in names])
    if row_filter is not None:
        kind = date_kind(conn, row_filter[0])
        if kind is not None:
            col = src.c[row_filter[0]]
            stmt = stmt.where(col.in_(_params(kind, row_filter[1])))
            issued = date_kind(conn, pairs[0]) if pairs and any(pairs[1].values()) else None
            if pairs is not None and issued is not None:
                stmt = stmt.where(sa.or_(*[
                    sa.and_(src.c[pairs[0]] == _params(issued, [i])[0],
                            col.in_(_params(kind, dates)))
                    for i, dates in pairs[1].items() if len(dates)]))
    return stmt


def converted(raw: pd.DataFrame, source: SqlSource, columns: Sequence[Column],
              role: str) -> pd.DataFrame:
    """Rows read by :func:`statement` converted by the files' converters, canonical names."""
    shown: Any = source  # messages name it by its str(): the table or query, password masked
    out: dict[str, pd.Series] = {}
    for c in columns:
        if c.name not in out:
            out[c.name] = convert(raw[c.name], shown, c, role, 1)
    return pd.DataFrame(out).rename(columns={c.name: c.canonical for c in columns if c.canonical})


def _grouped(source: SqlSource, role: str, key: str, names: Sequence[str],
             build: Callable[[Any, _Connection], Any | None]) -> pd.DataFrame | None:
    """Run the statement ``build(selectable, conn)`` makes (``None``: give up) when every
    column of ``names`` exists; ``None`` otherwise (the full read reports the problem)."""
    with connect(source, role, key) as conn:
        if not set(names) <= set(_header(conn)):
            return None
        stmt = build(_from(source, names), conn)
        return None if stmt is None else conn.run(stmt)


def cycle_starts(source: SqlSource, issued: str, period: str, *, role: str = "history",
                 key: str = "history") -> pd.Series | None:
    """The first period of every cycle: ``SELECT issued, MIN(period) … GROUP BY issued``
    (``None`` when a date column is not a date type: the full read then names it)."""
    import sqlalchemy as sa

    def build(src: Any, conn: _Connection) -> Any | None:
        if date_kind(conn, issued) is None or date_kind(conn, period) is None:
            return None
        return sa.select(src.c[issued].label("i"), sa.func.min(src.c[period]).label("p")
                         ).group_by(src.c[issued])

    rows = _grouped(source, role, key, [issued, period], build)
    if rows is None:
        return None
    try:
        index = pd.DatetimeIndex(pd.to_datetime(rows["i"])).as_unit("ns")
        values = pd.to_datetime(rows["p"]).astype("datetime64[ns]").to_numpy()
    except (OutOfBoundsDatetime, OverflowError, ValueError):
        return None  # dates beyond the calendar: the full read names them
    return pd.Series(values, index=index, dtype="datetime64[ns]").groupby(level=0).min()


def _index_skip(conn: _Connection, period: str, value: str) -> Any | None:
    """On a PostgreSQL table with an index led by the period column, the distinct periods
    with an actual by one index probe per period (a recursive query: the next period after
    the last, ``LIMIT 1``) instead of a scan of every row; ``None`` otherwise."""
    import sqlalchemy as sa
    from sqlalchemy.dialects import postgresql

    schema, name = conn.source.table_parts
    if conn.source.table is None or not conn.postgres:
        return None
    quoted = ".".join('"' + p.replace('"', '""') + '"' for p in (schema, name) if p)
    indexed = sa.text("SELECT count(*) FROM pg_index i JOIN pg_attribute a ON a.attrelid = "
                      "i.indrelid AND a.attnum = i.indkey[0] WHERE i.indrelid = to_regclass(:t) "
                      "AND a.attname = :c AND i.indisvalid").bindparams(t=quoted, c=period)
    if not int(conn.run(indexed).iloc[0, 0]):
        return None
    q = postgresql.dialect().identifier_preparer
    t, p, v = q.format_table(sa.table(name, schema=schema)), q.quote(period), q.quote(value)
    return sa.text(
        f"WITH RECURSIVE w(p) AS ((SELECT {p} FROM {t} WHERE {p} IS NOT NULL AND {v} IS NOT "
        f"NULL ORDER BY {p} LIMIT 1) UNION ALL SELECT (SELECT {p} FROM {t} WHERE {p} > w.p AND "
        f"{v} IS NOT NULL ORDER BY {p} LIMIT 1) FROM w WHERE w.p IS NOT NULL) "
        "SELECT p FROM w WHERE p IS NOT NULL")


def actual_periods(source: SqlSource, period: str, value: str) -> pd.DatetimeIndex | None:
    """The sorted distinct periods holding at least one actual: ``SELECT DISTINCT period …
    WHERE value IS NOT NULL`` (:func:`_index_skip` on an indexed PostgreSQL table; ``None``
    when the period column is not a date type)."""
    import sqlalchemy as sa

    def build(src: Any, conn: _Connection) -> Any | None:
        if date_kind(conn, period) is None:
            return None
        skip = _index_skip(conn, period, value)
        if skip is not None:
            return skip
        return sa.select(src.c[period]).where(src.c[value].is_not(None)).distinct()

    rows = _grouped(source, "actuals", "actuals.sql", [period, value], build)
    if rows is None:
        return None
    try:
        return pd.DatetimeIndex(pd.to_datetime(rows.iloc[:, 0])).as_unit("ns").sort_values()
    except (OutOfBoundsDatetime, OverflowError, ValueError):
        return None


def distinct_rows(source: SqlSource, names: Sequence[str], *, role: str,
                  key: str) -> pd.DataFrame:
    """The distinct combinations of columns ``names``: ``SELECT DISTINCT …`` (raw values)."""
    import sqlalchemy as sa

    def build(src: Any, conn: _Connection) -> Any:
        return sa.select(*[src.c[n] for n in names]).distinct()

    rows = _grouped(source, role, key, names, build)
    if rows is None:
        raise InputError(f"The {role} {source} (config key `{key}`) lacks one of the columns "
                         f"{', '.join(names)}.")
    return rows
