"""Store URLs: the default store, and masking passwords wherever a URL could be shown.

The masking itself (:func:`mask_url`, :func:`mask_secrets`) lives in
:mod:`accuracy_checks.config.urls`, shared with the SQL sources; it is re-exported here.

A password in a store URL never leaves this package in clear: console lines, error messages,
JSON and the audit record itself (the config text kept with each run) show ``***`` instead.
Prefer to keep it out of the URL altogether: psycopg reads ``PGPASSWORD`` and ``~/.pgpass``.
"""

from __future__ import annotations

from pathlib import Path
from typing import TYPE_CHECKING

from accuracy_checks.config.urls import MASK, mask_secrets, mask_url

if TYPE_CHECKING:
    from accuracy_checks.config import Config

__all__ = ["MASK", "default_store_url", "mask_secrets", "mask_url", "sqlite_file"]


def default_store_url(config: Config) -> str:
    """The store of ``config``: its ``store`` URL, else ``audit.db`` next to the archive folder.

    An archive on object storage has no folder next to it: without ``store`` that is a
    :class:`~accuracy_checks.errors.ConfigError`.

    >>> from pathlib import Path
    >>> class C:  # a stand-in with the two attributes read here
    ...     store, archive = None, Path("/data/.accuracy_checks/archive")
    >>> default_store_url(C())
    'sqlite:////data/.accuracy_checks/audit.db'
    """
    if config.store:
        return config.store
    from accuracy_checks.store.archive import archive_url

    url = archive_url(config.archive)
    if url is not None:
        from accuracy_checks.errors import ConfigError
        from accuracy_checks.store.remote_archive import display_location

        where = f" in {config.source}" if getattr(config, "source", None) else ""
        raise ConfigError(
            f"`archive`{where} is a URL ({display_location(url)}), so the audit store cannot "
            "default to a file next to it: set `store:` to a database URL, such as "
            "postgresql+psycopg://gate@db.example/audit (nothing then lives on the worker's "
            "disk) or sqlite:////var/lib/accuracy-checks/audit.db.")
    return "sqlite:///" + str(Path(str(config.archive)).parent / "audit.db")


def sqlite_file(url: str) -> Path | None:
    """The database file of an SQLite URL (``None`` for other databases and ``:memory:``).

    >>> sqlite_file("sqlite:////tmp/a/audit.db"), sqlite_file("postgresql://db/x")
    (PosixPath('/tmp/a/audit.db'), None)
    """
    from sqlalchemy.engine import make_url

    parsed = make_url(url)
    if parsed.get_backend_name() != "sqlite":
        return None
    if not parsed.database or parsed.database == ":memory:":
        return None
    return Path(parsed.database)
