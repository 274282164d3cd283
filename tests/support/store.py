"""Shared fixtures and helpers of the audit-store tests (no tests of its own).

Test modules import the fixtures by their function names (``store_url_fixture``,
``pg_url_fixture``) and use them under their fixture names. ``store_url`` runs a test once
against SQLite and once against PostgreSQL. The PostgreSQL server comes from
``ACCURACY_CHECKS_TEST_PG_URL`` (``.ci/run`` starts one on loopback and sets it); each test
gets a schema of its own in that database, dropped afterwards. Without the variable the
PostgreSQL runs are skipped, with the reason in pytest's summary (and ``.ci/run`` prints a
loud warning when it cannot start the server).
"""

from __future__ import annotations

import os
import uuid
from collections.abc import Iterator
from pathlib import Path
from typing import Any

import pytest

from accuracy_checks.results import CheckResult, RunReport

PG_ENV = "ACCURACY_CHECKS_TEST_PG_URL"
INJECTION = "x'); DROP TABLE runs;--"


def pg_base_url() -> str | None:
    return os.environ.get(PG_ENV) or None


def pg_password() -> str | None:
    url = pg_base_url()
    if url is None:
        return None
    from sqlalchemy.engine import make_url

    return make_url(url).password


@pytest.fixture(name="store_url", params=["sqlite", "postgresql"])
def store_url_fixture(request: pytest.FixtureRequest, tmp_path: Path) -> Iterator[str]:
    """A URL of an empty store: an SQLite file, or a fresh schema on the PostgreSQL server."""
    if request.param == "sqlite":
        yield f"sqlite:///{tmp_path / 'store' / 'audit.db'}"
        return
    yield from _pg_schema_url()


@pytest.fixture(name="pg_url")
def pg_url_fixture() -> Iterator[str]:
    """A fresh PostgreSQL schema's URL (skipped without a server)."""
    yield from _pg_schema_url()


def _pg_schema_url() -> Iterator[str]:
    base = pg_base_url()
    if base is None:
        pytest.skip(f"{PG_ENV} is not set: no PostgreSQL server for the store tests "
                    "(.ci/run starts one)")
    from sqlalchemy import create_engine, text
    from sqlalchemy.engine import make_url
    from sqlalchemy.pool import NullPool

    schema = f"t_{uuid.uuid4().hex[:12]}"
    admin = create_engine(base, poolclass=NullPool)
    with admin.begin() as conn:
        conn.execute(text(f"CREATE SCHEMA {schema}"))
    url = make_url(base).update_query_dict({"options": f"-csearch_path={schema}"})
    try:
        yield url.render_as_string(hide_password=False)
    finally:
        with admin.begin() as conn:
            conn.execute(text(f"DROP SCHEMA {schema} CASCADE"))
        admin.dispose()


def make_report(cycle: str | None = "2026-03-02", *, n: int = 6, segment: str = "tools",
                status: str = "pass", started: str = "2026-03-02T06:00:00+00:00",
                label: str | None = None, run_id: str | None = None,
                results: list[CheckResult] | None = None) -> RunReport:
    """A report with ``n`` accuracy results (or ``results``), every one of ``status``."""
    if results is None:
        measures = ("wape", "bias_pct", "mae")
        results = [
            CheckResult("accuracy", status, segment=segment, lag=1 + i // len(measures),  # type: ignore[arg-type]
                        measure=measures[i % len(measures)], value=10.0 + i / 8,
                        warn=25.0, fail=(-10.0, 40.0), n_series=12, n_obs=48,
                        message=f"result {i} of {segment}", unit="%",
                        details={"i": i} if i % 2 else {})
            for i in range(n)
        ]
    return RunReport(
        run_id=run_id or uuid.uuid4().hex, cycle=cycle, attempt=None, results=results,
        started_at=started, finished_at=started, label=label,
    )


def table_names(url: str) -> set[str]:
    from sqlalchemy import create_engine, inspect
    from sqlalchemy.pool import NullPool

    engine = create_engine(url, poolclass=NullPool)
    try:
        with engine.connect() as conn:
            return set(inspect(conn).get_table_names())
    finally:
        engine.dispose()


def dump_text(url: str) -> str:
    """Every value of every table of the store, as one text (for leak checks)."""
    from sqlalchemy import MetaData, create_engine, select
    from sqlalchemy.pool import NullPool

    engine = create_engine(url, poolclass=NullPool)
    try:
        meta = MetaData()
        with engine.connect() as conn:
            meta.reflect(conn)
            parts: list[Any] = []
            for table in meta.sorted_tables:
                parts.extend(conn.execute(select(table)).all())
        return "\n".join(map(str, parts))
    finally:
        engine.dispose()
