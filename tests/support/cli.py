"""Running the gate's command line on a test project (no tests of its own)."""

from __future__ import annotations

import pytest

from accuracy_checks.cli.main import main
from tests.support.project import Project


def run(project: Project, *args: str) -> int:
    """``accuracy-checks run`` on ``project``'s config, quiet and plain; its exit code."""
    return main(["run", "--config", str(project.config), "-q", "--no-color", *args])


def refused(project: Project, capsys: pytest.CaptureFixture[str], *args: str) -> str:
    """Run the gate on ``project`` and check that it refused it as unusable: exit 2, a
    message and no traceback or internal error, nothing archived anywhere under the
    project; return the message (stderr)."""
    code = run(project, *args)
    err = capsys.readouterr().err
    assert code == 2, err
    assert "Traceback" not in err and "internal error" not in err
    assert not list(project.root.rglob("*.parquet")), "nothing may be archived on unusable input"
    return err
