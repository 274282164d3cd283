"""Arrow results of table reads (:mod:`accuracy_checks.sources.sql`): the libpq URI ADBC's
PostgreSQL driver connects with, and Arrow columns turned into the pandas values SQLAlchemy's
rows would give the converters (:func:`~accuracy_checks.sources.columns.convert`), so a table
read through ADBC or DuckDB gives the frames and the messages a SQLAlchemy read gives."""

from __future__ import annotations

from collections.abc import Callable
from contextlib import suppress
from typing import Any

import pandas as pd

__all__ = ["arrow_column", "libpq_uri"]


def libpq_uri(url: Any, timeout: int) -> str:
    """A SQLAlchemy PostgreSQL URL as a libpq connection URI: every part percent-encoded (libpq
    reads ``+`` as itself, never as a blank), the query parameters kept (they are libpq's, as
    psycopg passes them), ``connect_timeout`` defaulting to ``timeout`` seconds."""
    from urllib.parse import quote

    def q(part: object) -> str:
        return quote(str(part), safe="")

    auth = ""
    if url.username is not None:
        auth = q(url.username) + (f":{q(url.password)}" if url.password is not None else "") + "@"
    host = url.host or ""
    host = f"[{host}]" if ":" in host else q(host)
    port = f":{url.port}" if url.port else ""
    query = {"connect_timeout": str(timeout), **dict(url.query)}
    pairs = [(k, v) for k, vs in query.items() for v in (vs if isinstance(vs, tuple) else (vs,))]
    return (f"postgresql://{auth}{host}{port}/{q(url.database or '')}?"
            + "&".join(f"{q(k)}={q(v)}" for k, v in pairs))


def arrow_column(column: Any, kind: str | None, *, adbc: bool,
                 zone: Callable[[], str]) -> pd.Series:
    """One Arrow result column as the pandas values SQLAlchemy's rows would give the
    converters: decimals (DuckDB) as floats; PostgreSQL ``numeric`` (ADBC: its text) as floats
    for a number column, else as ``Decimal`` values (refused as a key, as psycopg's are);
    other PostgreSQL types without an Arrow twin as their text; ``timestamptz`` in the
    session's time zone (``zone()``, asked only then); dates as ``datetime64`` (through ADBC
    as date values where no date is configured, as psycopg gives them)."""
    import pyarrow as pa
    import pyarrow.compute as pc

    kind_of = column.type
    if isinstance(kind_of, pa.BaseExtensionType):
        column = pa.chunked_array([c.storage for c in column.chunks], type=kind_of.storage_type)
        if getattr(kind_of, "type_name", None) == "numeric":
            if kind == "number":
                with suppress(pa.ArrowInvalid, pa.ArrowNotImplementedError):
                    column = pc.cast(column, pa.float64())  # else: text the converter names
            else:
                from decimal import Decimal

                import numpy as np

                codes = column.combine_chunks().dictionary_encode()
                values = np.empty(len(codes.dictionary) + 1, dtype=object)  # last: NULL
                values[:-1] = [Decimal(v) for v in codes.dictionary.to_pylist()]
                return pd.Series(values[codes.indices.fill_null(-1).to_numpy()])
    elif pa.types.is_decimal(kind_of):
        column = pc.cast(column, pa.float64())
    elif pa.types.is_timestamp(kind_of) and kind_of.tz is not None and adbc:
        try:
            column = column.cast(pa.timestamp(kind_of.unit, tz=zone()))
            return column.to_pandas()
        except (pa.ArrowInvalid, ValueError, KeyError):
            pass  # a zone pandas does not know: UTC
    return column.to_pandas(date_as_object=adbc and kind not in (None, "date"))
