"""The report in a real browser: headless Chromium opens the file, takes a screenshot and dumps
the DOM. Checks: the page rendered (a screenshot that is not blank, with the palette's
colours), every chart is in the DOM, nothing was logged to the console (script errors and
Content-Security-Policy violations are console messages), and a segment named like a script
shows as text and never runs. A negative control proves that the console check can fail.

Needs ``/usr/bin/chromium`` (Debian's package; ``.ci/run`` installs it); skipped, loudly,
only when it is absent.
"""

from __future__ import annotations

import os
import re
import shutil
import subprocess
from pathlib import Path

import numpy as np
import pytest

from accuracy_checks.report import write_report
from tests.support.report import XSS, build_store

CHROMIUM = shutil.which("chromium") or ("/usr/bin/chromium"
                                        if os.path.exists("/usr/bin/chromium") else None)
pytestmark = pytest.mark.skipif(
    CHROMIUM is None,
    reason="!!! BROWSER TEST SKIPPED: /usr/bin/chromium is not installed, so the HTML report "
           "was NOT checked in a browser. Install it with `apt-get install -y chromium` "
           "(.ci/run does) !!!")
FLAGS = ["--headless", "--no-sandbox", "--disable-gpu", "--disable-background-networking",
         "--disable-quic", "--no-first-run", "--disable-component-update", "--disable-sync",
         "--hide-scrollbars", "--enable-logging=stderr", "--v=0"]


def chromium(page: Path, profile: Path, *extra: str) -> subprocess.CompletedProcess[str]:
    assert CHROMIUM is not None
    return subprocess.run(
        [CHROMIUM, *FLAGS, f"--user-data-dir={profile}", *extra, page.as_uri()],
        capture_output=True, text=True, timeout=120, check=False,
        env={**os.environ, "HOME": str(profile)})


def console_lines(stderr: str) -> list[str]:
    """Console messages (script errors, CSP violations, console.* calls) in Chromium's log."""
    return [line for line in stderr.splitlines() if re.search(r":CONSOLE[:(]", line)]


@pytest.fixture(scope="module")
def report(tmp_path_factory: pytest.TempPathFactory) -> tuple[Path, int]:
    root = tmp_path_factory.mktemp("browser")
    built = build_store(root, n_segments=4, n_cycles=10, xss=True, step_from=7,
                        waive=("seg-001", "bias_pct", 8))
    out = root / "report.html"
    rendered = write_report(built.url, out)
    return out, rendered.charts


def test_the_report_renders_in_chromium(report: tuple[Path, int], tmp_path: Path) -> None:
    from PIL import Image

    page, _ = report
    shot = tmp_path / "shot.png"
    done = chromium(page, tmp_path / "p1", f"--screenshot={shot}", "--window-size=1280,2600")
    assert done.returncode == 0, done.stderr[-2000:]
    assert console_lines(done.stderr) == []
    image = np.asarray(Image.open(shot).convert("RGB")).astype(np.int64)
    assert image.shape == (2600, 1280, 3)
    ink = float((image.sum(axis=2) < 720).mean())
    assert ink > 0.03, f"the screenshot is nearly blank ({ink:.2%} non-white)"
    colours = np.unique(image.reshape(-1, 3), axis=0)
    assert len(colours) > 50

    def near(rgb: tuple[int, int, int]) -> bool:
        return bool((np.abs(colours - np.array(rgb)).sum(axis=1) < 30).any())

    # the pass markers' blue and the lag-1 line's blue were painted
    assert near((0x2E, 0x6E, 0x8E)) and near((0x1F, 0x4E, 0x79))


def test_every_chart_is_in_the_dom_and_the_script_named_segment_is_text(
        report: tuple[Path, int], tmp_path: Path) -> None:
    page, charts = report
    done = chromium(page, tmp_path / "p2", "--dump-dom")
    assert done.returncode == 0, done.stderr[-2000:]
    assert console_lines(done.stderr) == []
    dom = done.stdout
    assert dom.count('<svg class="chart"') == charts > 10
    assert len(re.findall(r"<figure>.*?<details>", dom, re.S)) == charts
    # the segment name is text in the DOM, and no script element exists
    assert "&lt;script&gt;alert(1)&lt;/script&gt;" in dom
    assert XSS not in dom and re.search(r"<script", dom, re.I) is None
    assert "Forecast accuracy report" in dom


def test_the_console_check_catches_a_script_the_policy_blocks(report: tuple[Path, int],
                                                              tmp_path: Path) -> None:
    # negative control: a script smuggled into the page is refused by the page's CSP, and the
    # refusal is a console message that the checks above would see
    page, _ = report
    tampered = tmp_path / "tampered.html"
    tampered.write_text(page.read_text(encoding="utf-8").replace(
        "<main>", "<main><script>document.title = 'ran'</script>", 1), encoding="utf-8")
    done = chromium(tampered, tmp_path / "p3", "--dump-dom")
    assert done.returncode == 0
    lines = console_lines(done.stderr)
    assert lines and any("Content Security Policy" in line for line in lines)
    assert "<title>ran</title>" not in done.stdout
