"""Fixtures shared by every test folder (the helpers themselves live in tests/support/)."""

from tests.support.project import make_project  # noqa: F401  (fixture)
