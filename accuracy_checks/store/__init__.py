"""The audit store: a durable, append-only record of every run, result and waiver.

Embedded SQLite by default (``audit.db`` next to the archive folder); any SQLAlchemy URL
works, PostgreSQL through psycopg 3 (``pip install "accuracy-checks[postgres]"``).

Use::

    from accuracy_checks.store import open_store

    store = open_store(config)            # or open_store("postgresql+psycopg://…")
    store.record_run(report, config=config)
    store.history(cycle="2026-03-02"); store.breaches(); store.active_waivers()

Modules: :mod:`.schema` (tables, schema version, migrations), :mod:`.database` (connections,
the write lock), :mod:`.record` (rows of a run, digest chain), :mod:`.fingerprints` (input
fingerprints), :mod:`.waivers`, :mod:`.queries` (history, breaches), :mod:`.urls` (default
store, password masking), :mod:`.core` (the :class:`Store` that ties them together).
"""

from __future__ import annotations

from accuracy_checks.store.core import RecordedRun, Store, archived_attempts, open_store
from accuracy_checks.store.database import StoreError
from accuracy_checks.store.fingerprints import input_fingerprints
from accuracy_checks.store.urls import default_store_url, mask_secrets, mask_url
from accuracy_checks.store.waivers import Waiver, apply_waivers

__all__ = [
    "RecordedRun",
    "Store",
    "StoreError",
    "Waiver",
    "apply_waivers",
    "archived_attempts",
    "default_store_url",
    "input_fingerprints",
    "mask_secrets",
    "mask_url",
    "open_store",
]
