"""Where an input is: a local path, a URL (:class:`Url`: object storage, ``memory://``,
``https://``), or a table or query in a database (``sql: {url, table}`` or
``sql: {url, query}``). Declarations only, as the rest of the config: the reading is
:mod:`accuracy_checks.sources.datasets`' (URLs) and :mod:`accuracy_checks.sources.sql`'s.

Every field that takes a path takes a URL too (:data:`Location`): a text with ``scheme://``
becomes a :class:`Url` when its scheme is one of :data:`SCHEMES`, ``file://`` becomes the
local path it names, and any other scheme is refused (never read as a relative folder named
``s3:``).
"""

from __future__ import annotations

import re
from pathlib import Path
from typing import Annotated, Any
from urllib.parse import unquote, urlsplit

from pydantic import (
    BaseModel,
    BeforeValidator,
    ConfigDict,
    Discriminator,
    Field,
    Tag,
    field_validator,
    model_validator,
)

from accuracy_checks.config.urls import env_names, mask_location, mask_url

__all__ = ["SCHEMES", "Location", "Place", "PlaceEntry", "SqlPlace", "SqlSource", "Url",
           "entry_kind", "one_place", "to_location"]

#: the URL schemes a path field takes (``file://`` is read as the local path it names),
#: with what serves them
SCHEMES = {
    "s3": "Amazon S3 and S3-compatible stores (pyarrow's S3 filesystem)",
    "gs": "Google Cloud Storage (pyarrow's GCS filesystem)",
    "gcs": "Google Cloud Storage (pyarrow's GCS filesystem)",
    "az": "Azure Blob Storage / ADLS Gen2 (pyarrow's Azure filesystem)",
    "abfs": "Azure Blob Storage / ADLS Gen2 (pyarrow's Azure filesystem)",
    "abfss": "Azure Blob Storage / ADLS Gen2 (pyarrow's Azure filesystem)",
    "memory": "fsspec's in-process memory filesystem (extra `cloud`)",
    "https": "one file over HTTPS",
    "http": "one file over HTTP",
    "file": "a local path",
}
_SCHEME = re.compile(r"^(?P<scheme>[A-Za-z][A-Za-z0-9+.\-]*)://")


class Url:
    """A place given as a URL (``s3://bucket/forecasts/``, ``memory://x/actuals.parquet``).

    ``url`` is kept as written, ``${NAME}`` included: the variables are replaced only when the
    data is read (:func:`accuracy_checks.config.urls.expand_env`), so a secret never sits in
    the config. ``str()`` (and so every message, the audit record and the report) shows the
    URL with any secret masked (:func:`~accuracy_checks.config.urls.mask_location`).
    """

    __slots__ = ("url",)

    def __init__(self, url: str) -> None:
        self.url = url

    @property
    def scheme(self) -> str:
        """The scheme, lower case (``s3``, ``gs``, ``memory``…)."""
        return self.url.split("://", 1)[0].lower()

    @property
    def name(self) -> str:
        """The last part of the path (``forecast.parquet``; ``""`` for a prefix ending in /)."""
        return urlsplit(self.url).path.rsplit("/", 1)[-1]

    @property
    def suffix(self) -> str:
        """The file suffix of :attr:`name`, as :attr:`pathlib.Path.suffix`."""
        return Path(self.name).suffix if self.name else ""

    def __str__(self) -> str:
        return mask_location(self.url)

    def __repr__(self) -> str:
        return f"Url({str(self)!r})"

    def __eq__(self, other: object) -> bool:
        return isinstance(other, Url) and other.url == self.url

    def __hash__(self) -> int:
        return hash(("Url", self.url))

    @classmethod
    def __get_pydantic_core_schema__(cls, source: Any, handler: Any) -> Any:
        from pydantic_core import core_schema

        return core_schema.no_info_plain_validator_function(
            _url_only, serialization=core_schema.plain_serializer_function_ser_schema(
                lambda u: u.url if isinstance(u, Url) else str(u)))

    @classmethod
    def __get_pydantic_json_schema__(cls, schema: Any, handler: Any) -> dict[str, Any]:
        return {"type": "string", "format": "uri"}


def _url_only(value: object) -> Url:
    if isinstance(value, Url):
        return value
    raise ValueError("expected a URL")


def to_location(value: object) -> object:
    """A path field's value: a :class:`Url` for ``scheme://`` text with a known scheme, the
    local :class:`~pathlib.Path` of a ``file://`` URL, anything else unchanged (pydantic then
    makes it a path). Raises ``ValueError`` for an unknown scheme, naming the known ones.

    >>> to_location("s3://bucket/forecasts/")
    Url('s3://bucket/forecasts/')
    >>> to_location("file:///data/f%20x.csv")
    PosixPath('/data/f x.csv')
    >>> to_location("data/forecast.csv")
    'data/forecast.csv'
    """
    text = str(value) if isinstance(value, Path) and "://" in str(value) else value
    if not isinstance(text, str):
        return value
    found = _SCHEME.match(text)
    if found is None:
        if re.match(r"^[A-Za-z][A-Za-z0-9+.\-]*:/[^/]", text) and isinstance(value, Path):
            # a URL already squeezed by Path ("s3:/bucket"): refuse it too
            found = re.match(r"^(?P<scheme>[A-Za-z][A-Za-z0-9+.\-]*):", text)
        else:
            return value
    assert found is not None
    scheme = found["scheme"].lower()
    if scheme not in SCHEMES or "://" not in text:
        raise ValueError(
            f"the URL scheme {found['scheme']!r} is not supported; give a local path or a URL "
            f"with one of {', '.join(s + '://' for s in SCHEMES)} (memory:// needs "
            "pip install \"accuracy-checks[cloud]\"; a database table goes under `sql:`)"
        )
    if scheme == "file":
        parts = urlsplit(text)
        if parts.netloc not in ("", "localhost"):
            raise ValueError(f"a file:// URL names a local path (file:///data/x.csv); "
                             f"got the host {parts.netloc!r}")
        return Path(unquote(parts.path))
    if not text[found.end():].strip("/"):
        raise ValueError(f"the URL {mask_location(text)} names no bucket or path")
    return Url(text)


#: a path field: a local path or a :class:`Url`
Location = Annotated[Path | Url, BeforeValidator(to_location)]


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


#: where an input is: a local path, a URL, or a table or query in a database
Place = Path | Url | SqlSource


def entry_kind(value: object) -> str:
    """Which form a history entry or mapping takes (so errors name that form only)."""
    if isinstance(value, list):
        return "list"
    return "SqlPlace" if isinstance(value, dict | SqlPlace) else "Path"


#: a history entry or the mapping: a path or URL, or ``{sql: {…}}``
PlaceEntry = Annotated[
    Annotated[Location, Tag("Path")] | Annotated[SqlPlace, Tag("SqlPlace")],
    Discriminator(entry_kind),
]


def one_place(section: str, path: Path | Url | None, sql: SqlSource | None) -> None:
    if (path is None) == (sql is None):
        raise ValueError(
            f"give exactly one of `{section}.path` (a file or folder) or `{section}.sql` "
            "(a database table or query: {url, table} or {url, query})"
        )
