"""Fixtures shared by every test folder (the helpers themselves live in tests/support/)."""

from tests.support.project import make_project  # noqa: F401  (fixture)
from tests.support.storage import storage  # noqa: F401  (fixture)
from tests.support.store import pg_url_fixture, store_url_fixture  # noqa: F401  (fixtures)
