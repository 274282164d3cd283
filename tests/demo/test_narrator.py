"""The narrated demo: the gate run on each cycle in order, the story it prints, the findings it
picks (invented data, see ``accuracy_checks/demo/scenario.py``)."""

from __future__ import annotations

from pathlib import Path

import pytest

from accuracy_checks.demo.narrator import run_demo
from accuracy_checks.demo.scenario import generate_scenario
from accuracy_checks.errors import UsageError
from accuracy_checks.results import RunReport


def test_run_demo_refuses_a_foreign_folder(tmp_path: Path) -> None:
    (tmp_path / "notes.txt").write_text("mine", encoding="utf-8")
    with pytest.raises(UsageError, match="not empty"):
        run_demo(tmp_path, echo=lambda _: None)
    assert [p.name for p in tmp_path.iterdir()] == ["notes.txt"]


def test_run_demo_tells_the_story(tmp_path: Path) -> None:
    reference = generate_scenario(tmp_path / "reference")  # same seed: same dates and plants
    lines: list[str] = []
    reports = run_demo(tmp_path / "demo", echo=lines.append)
    statuses = [r.status for r in reports]
    assert len(reports) == 6
    assert statuses[-1] == "fail"
    assert "fail" not in statuses[:-1]  # only the final cycle fails the gate
    assert {"pass", "warn"} & set(statuses[:-1])
    cycles = [str(r.cycle) for r in reports]
    assert cycles == [d.isoformat() for d in reference.cycle_dates]

    final = reports[-1]
    failed = [r for r in final.results if r.status == "fail"]
    assert any(r.measure == "missing_series_pct" for r in failed)
    assert any(r.measure == "bias_pct" and r.segment == "pet-care" for r in failed)
    # the pet-care bias builds up as the biased cycles fill the lag-1 window
    def pet_bias(report: RunReport) -> tuple[str, float | None]:
        (r,) = [r for r in report.results
                if r.check == "accuracy" and r.segment == "pet-care"
                and r.measure == "bias_pct" and r.lag == 1]
        return r.status, r.value

    trend = [pet_bias(r) for r in reports]
    assert [status for status, _ in trend[-3:]] == ["pass", "warn", "fail"]
    values = [value for _, value in trend[-3:] if value is not None]
    assert len(values) == 3 and values == sorted(values)  # rising
    # the gap cycle warns about the incomplete series
    gap = reports[cycles.index(reference.planted.gap_cycle.isoformat())]
    assert any(r.measure == "incomplete_series" and r.status == "warn" for r in gap.results)
    # later cycles measured earlier cycles from the archive
    assert any(c["source"] == "archive" for c in final.evaluated_cycles)

    text = "\n".join(lines)
    assert "FAIL" in text and "accuracy-checks run --config" in text
    assert "invented" in text
