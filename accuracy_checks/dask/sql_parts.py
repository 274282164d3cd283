"""Tables read in partitions on the workers: :class:`SqlPart`, the planning of the partitions.

A ``sql: {url, table}`` input is read by the dask engine as ranges of one of its date columns
(the period, or for a forecast or earlier cycles the issue date when it has more distinct
values): the client asks the database for the rows per date (a ``GROUP BY`` of one column,
in the database's order) and cuts the dates into runs of about :data:`PART_ROWS` rows. Each
worker task opens its own connection (from the URL; ``${NAME}`` expanded there, the password
never shown) and runs the pandas engine's statement (:func:`~accuracy_checks.sources.sql.
statement`: the same columns, the same span filters as bound parameters) with one more bound
condition, ``low <= column < high`` (the first range also takes the rows whose date is
missing), so the ranges hold every row once whatever the dialect or the column's type. The
rows go through the pandas reader's converters (:func:`~accuracy_checks.sources.sql.
converted`) and get ``__order`` and ``__shard`` like a file's piece (:mod:`.read`).

**Reading order.** The pandas engine reads a table without ``ORDER BY``: its rows come in the
order a sequential scan gives, the table's row-id order (SQLite's and DuckDB's ``rowid``,
PostgreSQL's ``ctid``), which is what its examples and tie-breaks follow. Each partition reads
its rows' ids too; ``__order`` is the input's number · 2**40 + the row id, so the examples are
the pandas engine's. Only tables of those three databases have row ids the client can check
(:func:`order_kind`); a query, a view or another database is read on the client.

**Refusals.** A partition whose rows a converter refuses asks the whole statement's rows again,
one column at a time in the readers' order (:meth:`SqlPart.whole_error`), so the message names
the rows the pandas engine names. A text date column is checked on the client first from its
distinct values (:func:`dates_refused`): a column mixing UTC offsets is refused over the whole
read although each partition alone might hold one.
"""

from __future__ import annotations

import math
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field
from typing import Any

import numpy as np
import pandas as pd

from accuracy_checks.config import SqlSource
from accuracy_checks.dask.read import ORDER, SHARD, as_text, shard_of
from accuracy_checks.errors import InputError
from accuracy_checks.sources import sql
from accuracy_checks.sources.columns import Column, first_refusal

__all__ = ["PART_ROWS", "SqlPart", "dates_refused", "order_kind", "plan_parts"]

#: rows of a table's partition (whole dates are grouped up to about this many rows)
PART_ROWS = 2_000_000
_ROW_BITS = 40
_ROWID = "__rowid"
#: a PostgreSQL row's ``ctid`` (block, line) as one integer, in the order of a sequential scan
_CTID = "((ctid::text::point)[0]::bigint * 65536 + (ctid::text::point)[1]::bigint)"

Filter = tuple[str, Sequence[pd.Timestamp]]
Pairs = tuple[str, Mapping[pd.Timestamp, Sequence[pd.Timestamp]]]


@dataclass(frozen=True)
class SqlPart:
    """One partition of a table, read by one task (:func:`~accuracy_checks.dask.read.
    read_piece` hands it to :meth:`read`)."""

    source: SqlSource
    role: str
    #: the config key messages name (``forecast.sql``, ``actuals.sql``, ``history.sql``)
    key: str
    #: the input's number in the run's reading order
    ordinal: int
    #: how rows are numbered: ``"rowid"`` (SQLite, DuckDB) or ``"ctid"`` (PostgreSQL)
    order: str
    #: the pandas engine's filters of this input (``None``: every row)
    row_filter: Filter | None = None
    pairs: Pairs | None = None
    #: the partition: ``low <= column < high``; ``low`` ``None``: no lower bound and the
    #: rows whose date is missing too; ``high`` ``None``: no upper bound
    column: str | None = None
    low: Any = None
    high: Any = None
    #: not a Parquet piece (``read.py`` looks at it)
    row_groups: None = field(default=None, init=False)

    def _narrowed(self, stmt: Any, head: int | None) -> Any:
        import sqlalchemy as sa

        if self.column is not None and (self.low is not None or self.high is not None):
            col: Any = sa.column(self.column)
            if self.low is None:
                stmt = stmt.where(sa.or_(col < self.high, col.is_(None)))
            elif self.high is None:
                stmt = stmt.where(col >= self.low)
            else:
                stmt = stmt.where(col >= self.low, col < self.high)
        rowid: Any = sa.literal_column(_CTID if self.order == "ctid" else "rowid")
        stmt = stmt.add_columns(rowid.label(_ROWID))
        # the dataframe's column types (``head``) come from no row: the converters give every
        # column its type whatever the rows, and a refusal is never raised on the client
        return stmt.limit(0) if head is not None else stmt

    def read(self, columns: Sequence[Column], *, keys: Sequence[str] = (), n_shards: int = 0,
             rename: dict[str, str] | None = None, text: Sequence[str] = (),
             head: int | None = None, every: Sequence[Column] | None = None) -> pd.DataFrame:
        """The partition's ``columns`` as :func:`~accuracy_checks.dask.read.read_piece` gives a
        piece's (canonical names, keys as text, ``__order``, ``__shard``)."""
        with sql.connect(self.source, self.role, self.key) as conn:
            stmt = self._narrowed(sql.statement(conn, columns, self.row_filter, self.pairs),
                                  head)
            raw = conn.run(stmt, {c.name: c.kind for c in reversed(columns)})
        try:
            frame = sql.converted(raw, self.source, columns, self.role)
        except InputError:
            found = self.whole_error(every or columns)
            if found is not None:
                raise found from None
            raise
        if rename:
            frame = frame.rename(columns=rename)
        if n_shards:
            frame[SHARD] = shard_of(frame, keys, n_shards)
        for k in [*keys, *(t for t in text if t in frame.columns)]:
            frame[k] = as_text(frame[k])
        rowid = raw[_ROWID].to_numpy(dtype=np.int64)
        frame[ORDER] = (np.int64(self.ordinal) << _ROW_BITS) + rowid
        return frame

    def whole_error(self, columns: Sequence[Column]) -> InputError | None:
        """The pandas engine's refusal of this input: ``columns`` read over the whole
        statement (every partition) one at a time, in order, and converted (``None``: none
        refused). Run only when a partition is refused."""
        return first_refusal(columns, lambda c: sql.read_sql_columns(
            self.source, [c], role=self.role, key=self.key, allow_empty=True,
            row_filter=self.row_filter, pairs=self.pairs))


def order_kind(source: SqlSource, role: str, key: str) -> str | None:
    """How a table's rows are numbered in scan order (``"rowid"``, ``"ctid"``), or ``None``
    when its rows are read on the client: a query, a view, a database other than SQLite,
    DuckDB and PostgreSQL, row ids outside ``[0, 2**40)``."""
    import sqlalchemy as sa

    if source.table is None:
        return None
    url = source.url
    kind: str | None = None
    if url.startswith("duckdb:///"):
        kind = "rowid"
    else:
        try:
            backend = sa.engine.make_url(url).get_backend_name()
        except Exception:
            return None
        kind = {"sqlite": "rowid", "postgresql": "ctid"}.get(backend)
    if kind is None:
        return None
    schema, name = source.table_parts
    table = sa.table(name, schema=schema)
    try:
        with sql.connect(source, role, key) as conn:
            if kind == "ctid":
                # a plain table ('r'; a partitioned table's or a parent's rows come from
                # several relations whose ctids repeat) of fewer than 2**24 blocks
                quoted = ".".join('"' + p.replace('"', '""') + '"' for p in (schema, name) if p)
                found = conn.run(sa.text(
                    "SELECT c.relkind = 'r' AND NOT EXISTS (SELECT 1 FROM pg_inherits i WHERE "
                    "i.inhparent = c.oid) AND pg_relation_size(c.oid) / "
                    "current_setting('block_size')::bigint < 16777216 FROM pg_class c "
                    "WHERE c.oid = to_regclass(:t)").bindparams(t=quoted))
                return kind if len(found) and bool(found.iloc[0, 0]) else None
            rowid: Any = sa.literal_column("rowid")
            bounds = conn.run(sa.select(sa.func.min(rowid), sa.func.max(rowid))
                              .select_from(table))
    except InputError:
        return None
    low, high = bounds.iloc[0, 0], bounds.iloc[0, 1]
    if low is None or pd.isna(low):
        return kind  # no rows
    return kind if int(low) >= 0 and int(high) < 1 << _ROW_BITS else None


def _plain(value: Any) -> Any:
    """A value the database gave, as the Python value it is bound back as."""
    if isinstance(value, pd.Timestamp):
        return value.to_pydatetime()
    return value.item() if isinstance(value, np.generic) else value


def _grouped(conn: Any, stmt: Any, column: str) -> tuple[list[Any], list[int], int]:
    """Rows of ``stmt`` per distinct value of ``column``, in the database's order: the
    non-missing values, their counts, and the rows whose value is missing."""
    import sqlalchemy as sa

    sub = stmt.subquery("parts")
    col = sub.c[column]
    query = sa.select(col, sa.func.count()).group_by(col).order_by(col)
    if conn.arrow:
        table = conn.table(query)
        values, counts = table.column(0).to_pylist(), table.column(1).to_pylist()
    else:
        rows = conn.run(query)
        values = [_plain(v) for v in rows.iloc[:, 0].tolist()]
        counts = rows.iloc[:, 1].tolist()
    kept = [(v, int(n)) for v, n in zip(values, counts, strict=True) if not pd.isna(v)]
    missing = sum(int(n) for v, n in zip(values, counts, strict=True) if pd.isna(v))
    return [v for v, _ in kept], [n for _, n in kept], missing


def plan_parts(source: SqlSource, columns: Sequence[Column], *, role: str, key: str,
               ordinal: int, order: str, candidates: Sequence[str],
               row_filter: Filter | None = None, pairs: Pairs | None = None,
               rows: int | None = None) -> tuple[list[SqlPart], int]:
    """The partitions of a table and its rows (the pandas engine's statement of ``columns``
    with its filters): ranges of the candidate date column with the most distinct values,
    whole dates grouped up to about ``rows`` (default :data:`PART_ROWS`) rows. A table without
    rows gives no partition. Raises the pandas reader's refusals of a missing table or
    column."""
    import sqlalchemy as sa

    rows = PART_ROWS if rows is None else rows
    base = SqlPart(source, role, key, ordinal, order, row_filter, pairs)
    with sql.connect(source, role, key) as conn:
        sql.check_columns(conn, columns)
        stmt = sql.statement(conn, columns, row_filter, pairs)
        best: tuple[str, list[Any], list[int], int] | None = None
        for name in candidates:
            values, counts, missing = _grouped(conn, stmt, name)
            if best is None or len(values) > len(best[1]):
                best = (name, values, counts, missing)
            if len(candidates) > 1 and len(values) > 1:
                # a second column is asked only when the first has a single date
                break
        if best is None:
            total = conn.run(sa.select(sa.func.count()).select_from(stmt.subquery())).iloc[0, 0]
            return ([base] if int(total) else []), int(total)
    name, values, counts, missing = best
    total = sum(counts) + missing
    if not total:
        return [], 0
    n = max(1, min(len(values), math.ceil(total / rows)))
    # cut before the date at which the running count passes each n-th of the rows
    running = np.cumsum(counts)
    cuts = sorted({int(np.searchsorted(running, total * k / n, side="left")) + 1
                   for k in range(1, n)} - {0, len(values)})
    bounds = [values[c] for c in cuts if c < len(values)]
    lows: list[Any] = [None, *bounds]
    highs: list[Any] = [*bounds, None]
    parts = [SqlPart(source, role, key, ordinal, order, row_filter, pairs, name, lo, hi)
             for lo, hi in zip(lows, highs, strict=True)]
    return parts, total


def dates_refused(source: SqlSource, columns: Sequence[Column], *, role: str, key: str,
                  row_filter: Filter | None = None, pairs: Pairs | None = None) -> bool:
    """Whether the converters refuse a text date column of the input over its distinct
    values (a bad date, or UTC offsets mixed across the rows): then the pandas engine's
    message comes from :meth:`SqlPart.whole_error`."""
    with sql.connect(source, role, key) as conn:
        stmt = sql.statement(conn, columns, row_filter, pairs)
        for c in columns:
            if c.kind != "date" or sql.date_kind(conn, c.name) is not None:
                continue
            values, _, _ = _grouped(conn, stmt, c.name)
            try:
                sql.converted(pd.DataFrame({c.name: pd.Series(values, dtype=object)}),
                              source, [c], role)
            except InputError:
                return True
    return False
