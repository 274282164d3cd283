"""``python -m accuracy_checks`` does what the ``accuracy-checks`` command does."""

import sys

from accuracy_checks.cli import main

sys.exit(main())
