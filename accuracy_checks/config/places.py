"""Where an input is: a local path, or a table or query in a database (``sql: {url, table}``
or ``sql: {url, query}``). Declarations only, as the rest of the config: the reading is
:mod:`accuracy_checks.sources.sql`'s.
"""

from __future__ import annotations

import re
from pathlib import Path
from typing import Annotated, Any

from pydantic import (
    BaseModel,
    ConfigDict,
    Discriminator,
    Field,
    Tag,
    field_validator,
    model_validator,
)

from accuracy_checks.config.urls import env_names, mask_url

__all__ = ["Place", "PlaceEntry", "SqlPlace", "SqlSource", "entry_kind", "one_place"]


class _Strict(BaseModel):
    model_config = ConfigDict(extra="forbid", frozen=True)


#: a SQL identifier part: letters, digits, ``_`` and ``$`` (quoted when the query is built)
_IDENTIFIER = re.compile(r"[^\s.\"]+")


class SqlSource(_Strict):
    """A table or a query in a database: ``{url, table}`` or ``{url, query}``.

    ``url`` is any SQLAlchemy URL (``postgresql+psycopg://…``, ``duckdb:///dw.duckdb``);
    ``${NAME}`` in it is replaced by that environment variable when the connection opens, and
    its password is masked wherever it is shown (``str(source)``). ``table`` may be
    schema-qualified (``analytics.forecast``); it is quoted as identifiers, never pasted. A
    ``query`` is read as a subquery, so the span filters still go into a WHERE clause.
    """

    url: Annotated[str, Field(min_length=1)]
    table: str | None = None
    query: str | None = None

    @field_validator("url")
    @classmethod
    def _url(cls, url: str) -> str:
        if not re.match(r"^[A-Za-z][A-Za-z0-9+.\-]*://", url):
            raise ValueError(
                "give a database URL with a scheme, such as "
                "\"postgresql+psycopg://user@host/db\" or \"duckdb:///warehouse.duckdb\""
            )
        return url

    @model_validator(mode="after")
    def _table_or_query(self) -> SqlSource:
        if (self.table is None) == (self.query is None):
            raise ValueError("give exactly one of `table` (a table name) or `query` (a SELECT)")
        if self.table is not None:
            parts = self.table.split(".")
            if not 1 <= len(parts) <= 3 or not all(_IDENTIFIER.fullmatch(p) for p in parts):
                raise ValueError(
                    f"`table`: {self.table!r} is not a table name; give `table` or "
                    "`schema.table` (names without blanks or quotes)"
                )
        if self.query is not None and not self.query.strip():
            raise ValueError("`query` is empty; give a SELECT statement")
        return self

    @property
    def table_parts(self) -> tuple[str | None, str]:
        """``(schema, table)`` of a table source (schema ``None`` when not qualified)."""
        assert self.table is not None
        schema, _, name = self.table.rpartition(".")
        return (schema or None), name

    @property
    def env_names(self) -> list[str]:
        """The environment variables the URL names (``${NAME}``)."""
        return env_names(self.url)

    def __repr_args__(self) -> Any:
        # a repr (a debugger, a log line) never shows the URL's password either
        for name, value in super().__repr_args__():
            yield name, mask_url(value) if name == "url" else value

    def __str__(self) -> str:
        """How messages name it, the password masked: ``table analytics.forecast in
        postgresql+psycopg://gate:***@db/dw`` or ``query in duckdb:///dw.duckdb``."""
        what = f"table {self.table}" if self.table is not None else "query"
        return f"{what} in {mask_url(self.url)}"


class SqlPlace(_Strict):
    """A history entry or the segment mapping read from a database: ``{sql: {url, table}}``."""

    sql: SqlSource


#: where an input is: a local path, or a table or query in a database
Place = Path | SqlSource


def entry_kind(value: object) -> str:
    """Which form a history entry or mapping takes (so errors name that form only)."""
    if isinstance(value, list):
        return "list"
    return "SqlPlace" if isinstance(value, dict | SqlPlace) else "Path"


#: a history entry or the mapping: a path, or ``{sql: {…}}``
PlaceEntry = Annotated[
    Annotated[Path, Tag("Path")] | Annotated[SqlPlace, Tag("SqlPlace")],
    Discriminator(entry_kind),
]


def one_place(section: str, path: Path | None, sql: SqlSource | None) -> None:
    if (path is None) == (sql is None):
        raise ValueError(
            f"give exactly one of `{section}.path` (a file or folder) or `{section}.sql` "
            "(a database table or query: {url, table} or {url, query})"
        )
