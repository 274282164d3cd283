"""Where the repository's own files are, for tests in any folder."""

from pathlib import Path

REPO = Path(__file__).resolve().parents[2]
FIXTURES = REPO / "fixtures"
DATA = REPO / "tests" / "data"
