"""The ``accuracy-checks`` command line: :mod:`.main` (argparse, the gate's commands, exit
codes) and :mod:`.audit` (the audit-trail commands)."""

from accuracy_checks.cli.main import main

__all__ = ["main"]
