"""The command line's process keeps the memory it frees (glibc), with the same results."""

from __future__ import annotations

import json
import os
import subprocess
import sys
from collections.abc import Callable
from pathlib import Path

import pytest

from tests.support.project import Project

REPO = Path(__file__).resolve().parents[2]

glibc = pytest.mark.skipif(
    not sys.platform.startswith("linux")
    or not (os.confstr("CS_GNU_LIBC_VERSION") or "").startswith("glibc"),
    reason="the settings are glibc's malloc's")

# A child process: 200 MB allocated, written and freed; prints whether the settings took and
# how many MB of the freed array the process still holds (resident pages, /proc/self/statm).
PROBE = """
import os, numpy as np
from accuracy_checks.cli.memory import keep_freed_memory
kept = keep_freed_memory()
page = os.sysconf("SC_PAGE_SIZE")
rss = lambda: int(open("/proc/self/statm").read().split()[1]) * page
before = rss()
a = np.ones(25_000_000)  # 200 MB
del a
print(kept, round((rss() - before) / 1e6))
"""


def _probe(**env: str) -> tuple[str, int]:
    out = subprocess.run([sys.executable, "-c", PROBE], capture_output=True, text=True,
                         check=True, cwd=REPO, env={**os.environ, **env}).stdout.split()
    return out[0], int(out[1])


@glibc
def test_freed_arrays_stay_with_the_process_for_reuse() -> None:
    kept, held = _probe()
    assert kept == "True" and held >= 150  # the 200 MB stay resident, ready for reuse
    kept, held = _probe(ACCURACY_CHECKS_MALLOC="default")
    assert kept == "False" and held < 50  # glibc's default: returned to the kernel on free


@glibc
def test_a_run_gives_the_same_results_with_either_setting(
        make_project: Callable[..., Project], tmp_path: Path) -> None:
    project = make_project()
    results = []
    for setting in ("", "default"):
        out = tmp_path / f"run-{setting or 'kept'}.json"
        proc = subprocess.run(
            [sys.executable, "-m", "accuracy_checks", "run", "--config", str(project.config),
             "--no-snapshot", "--json", str(out), "-q"], capture_output=True, text=True,
            cwd=REPO, env={**os.environ, "ACCURACY_CHECKS_MALLOC": setting}, check=False)
        assert proc.returncode in (0, 1), proc.stderr
        results.append(json.loads(out.read_text())["results"])
    assert results[0] == results[1] and len(results[0]) > 10
