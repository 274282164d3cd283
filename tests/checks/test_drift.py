"""Drift checks across cycles from the audit trail: sustained-breach escalation and control
limits (SQLite and PostgreSQL), the trail read through the store's query, the config keys, and
the engine wiring (drift results waived and recorded). The rules themselves:
test_drift_rules.py."""

from __future__ import annotations

from collections.abc import Callable
from datetime import date
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from accuracy_checks import load_config, run_checks
from accuracy_checks.checks.drift import (
    CONTROL_LIMIT,
    SUSTAINED_BREACH,
    drift_checks,
    drift_results,
    load_trail,
)
from accuracy_checks.errors import ConfigError
from accuracy_checks.measures.catalogue import parse_config
from accuracy_checks.results import CheckResult
from accuracy_checks.store import open_store
from tests.support.configs import levels, small_config
from tests.support.project import CURRENT, EARLIER, Project
from tests.support.store import make_report, store_url_fixture  # noqa: F401  (fixture)


def config_for(store: str = "sqlite:///unused.db", drift: str = "") -> object:
    """A config of the given store, WAPE 30/45 and bias 5/10 %, and ``drift: {<drift>}``."""
    return parse_config(small_config(
        store=store, thresholds={"default": {"wape": levels(30, 45), "bias_pct": levels(5, 10)}},
        drift=f"{{{drift}}}"))


# --------------------------------------------------------------- from the audit trail


def warn_result(status: str = "warn", segment: str = "tools", value: float = 33.0,
                **kw: object) -> CheckResult:
    return CheckResult("accuracy", status, segment=segment, lag=1,  # type: ignore[arg-type]
                       measure="wape", value=value, warn=30.0, fail=45.0, unit="%",
                       n_series=12, n_obs=48, **kw)  # type: ignore[arg-type]


def record(store_url: str, statuses: list[str], *, start: int = 0) -> list[str]:
    """One run per cycle with the given status of tools' WAPE at lag 1; returns the cycles."""
    cycles = []
    with open_store(store_url) as store:
        for i, st in enumerate(statuses):
            cycle = (date(2026, 1, 5) + pd.Timedelta(weeks=start + i)).isoformat()
            store.record_run(make_report(cycle, results=[warn_result(st)]))
            cycles.append(cycle)
    return cycles


@pytest.mark.parametrize(("earlier", "streak", "status", "since"), [
    (["warn", "warn"], 3, "fail", 0),              # third cycle in a row escalates
    (["warn", "pass", "warn"], 2, "pass", 2),      # a pass breaks the run
    (["warn", "skipped", "warn"], 3, "fail", 0),   # skipped neither breaks nor extends
    (["waived", "fail"], 3, "fail", 0),            # a waived breach is still a breach
    (["pass"], 1, "pass", None),
])
def test_sustained_breach_escalates_after_m_cycles(store_url: str, earlier: list[str],
                                                   streak: int, status: str,
                                                   since: int | None) -> None:
    cycles = record(store_url, earlier)
    config = config_for(store_url, "sustained_cycles: 3")
    current = (date(2026, 1, 5) + pd.Timedelta(weeks=len(earlier))).isoformat()
    with open_store(store_url) as store:
        found = drift_checks(config, [warn_result()], store, cycle=current)  # type: ignore[arg-type]
    [sustained] = [r for r in found if r.check == SUSTAINED_BREACH]
    assert sustained.value == streak and sustained.status == status
    assert (sustained.segment, sustained.measure, sustained.lag) == ("tools", "wape", 1)
    assert sustained.fail == 2.0 and sustained.unit == "cycles"
    assert f"{streak} cycle" in sustained.message
    assert sustained.details["since_cycle"] == (cycles[since] if since is not None else None)
    assert ("escalated to fail" in sustained.message) == (status == "fail")


def test_sustained_uses_the_last_attempt_of_each_cycle_and_only_earlier_cycles(
        store_url: str) -> None:
    record(store_url, ["warn", "warn"])
    with open_store(store_url) as store:
        # a re-run of the second cycle that passed: its last attempt breaks the run
        store.record_run(make_report("2026-01-12", results=[warn_result("pass")]))
        # a later cycle recorded already (a backfill of 2026-01-19 runs after it)
        store.record_run(make_report("2026-02-02", results=[warn_result("warn")]))
        trail = load_trail(store, before="2026-01-19", cycles=10, accuracy_measures=[],
                           breached=[("accuracy", "wape")])
    assert trail["cycle"].tolist() == ["2026-01-05", "2026-01-12"]
    assert trail["status"].tolist() == ["warn", "pass"]
    config = config_for(store_url)
    [sustained] = [r for r in drift_results(config, [warn_result()], trail)  # type: ignore[arg-type]
                   if r.check == SUSTAINED_BREACH]
    assert sustained.value == 1 and sustained.status == "pass"


def test_sustained_status_and_switches_are_configurable(store_url: str) -> None:
    record(store_url, ["warn", "warn", "warn"])
    current = "2026-01-26"
    with open_store(store_url) as store:
        soft = drift_checks(config_for(store_url, "sustained_status: warn"),  # type: ignore[arg-type]
                            [warn_result()], store, cycle=current)
        off = drift_checks(config_for(store_url, "sustained_cycles: 0"),  # type: ignore[arg-type]
                           [warn_result()], store, cycle=current)
        none = drift_checks(config_for(store_url, "enabled: false"),  # type: ignore[arg-type]
                            [warn_result()], store, cycle=current)
    assert [(r.check, r.status, r.warn) for r in soft if r.check == SUSTAINED_BREACH] == [
        (SUSTAINED_BREACH, "warn", 2.0)]
    assert not [r for r in off if r.check == SUSTAINED_BREACH] and none == []


def test_control_limit_from_the_trail_with_variants_and_message(store_url: str) -> None:
    values = [20.0, 21.0, 19.0, 20.5, 19.5, 20.0, 21.0, 19.0]
    with open_store(store_url) as store:
        for i, v in enumerate(values):
            cycle = (date(2026, 1, 5) + pd.Timedelta(weeks=i)).isoformat()
            store.record_run(make_report(cycle, results=[
                warn_result("pass", value=v),
                warn_result("pass", segment="*", value=v),
                CheckResult("accuracy", "pass", segment="tools", lag=1, measure="pinball",
                            value=v, unit="units", details={"variant": "q0.9"}),
                CheckResult("accuracy", "pass", segment="tools", lag=1, measure="pinball",
                            value=100 + v, unit="units", details={"variant": "q0.1"}),
            ]))
        current = [warn_result("pass", value=27.0), warn_result("pass", segment="*", value=20.2),
                   CheckResult("accuracy", "pass", segment="tools", lag=1, measure="pinball",
                               value=27.0, unit="units", details={"variant": "q0.9"}),
                   CheckResult("accuracy", "pass", segment="tools", lag=1, measure="pinball",
                               value=120.2, unit="units", details={"variant": "q0.1"})]
        config = config_for(store_url, "min_history: 8, measures: [all]")
        found = drift_checks(config, current, store, cycle="2026-03-02")  # type: ignore[arg-type]
    by = {(r.segment, r.measure, r.details.get("variant")): r for r in found
          if r.check == CONTROL_LIMIT}
    tools = by[("tools", "wape", None)]
    assert tools.status == "warn" and tools.details["signal"]
    assert tools.warn == pytest.approx(np.mean(values) + 3 * np.std(values, ddof=1))
    assert tools.details["n_history"] == 8 and tools.details["first_cycle"] == "2026-01-05"
    assert "above its drift limit" in tools.message and "worse than its own history" in \
        tools.message
    assert by[("*", "wape", None)].status == "pass"
    # each variant is its own figure
    assert by[("tools", "pinball", "q0.9")].status == "warn"
    assert by[("tools", "pinball", "q0.1")].status == "pass"
    # by default only thresholded measures are watched: pinball has none
    with open_store(store_url) as store:
        default = drift_checks(config_for(store_url, "min_history: 8"), current, store,  # type: ignore[arg-type]
                               cycle="2026-03-02")
    assert {r.measure for r in default} == {"wape"}


def test_too_few_cycles_is_skipped_with_a_reason(store_url: str) -> None:
    record(store_url, ["pass", "pass"])
    with open_store(store_url) as store:
        found = drift_checks(config_for(store_url), [warn_result("pass")], store,  # type: ignore[arg-type]
                             cycle="2026-03-02")
    [r] = found
    assert r.check == CONTROL_LIMIT and r.status == "skipped" and r.reason == "too_few_cycles"
    assert "2 earlier cycle(s)" in r.message and "8 needed" in r.message


@pytest.mark.parametrize(("text", "words"), [
    ("min_history: 20", "cannot exceed drift.cycles"),
    ("sustained_cycles: 1", "escalate every breach at once"),
    ("measures: [wap]", "did you mean 'wape'"),
    ("k: 0", "greater than 0"),
    ("cycle: 5", "unknown key `drift.cycle`"),
])
def test_drift_config_errors_name_the_key(text: str, words: str) -> None:
    with pytest.raises(ConfigError, match=words):
        config_for(drift=text)


# ---------------------------------------------------------------------- engine wiring


def test_run_checks_adds_drift_results_that_are_waivable_and_recorded(
        make_project: Callable[..., Project], tmp_path: Path) -> None:
    project = make_project(extra="drift: {min_history: 3, cycles: 4}\n")
    config = load_config(project.config)
    probe = run_checks(config, snapshot=False)  # learn this cycle's figures
    wape = {(r.segment, r.lag): r.value for r in probe.results
            if r.check == "accuracy" and r.measure == "wape"}
    # earlier cycles (before the history's) whose WAPE was far lower: today's is a worsening
    with open_store(config) as store:
        for i in range(4):
            cycle = (EARLIER[0] - pd.Timedelta(weeks=4 - i)).date().isoformat()
            store.record_run(make_report(cycle, results=[
                CheckResult("accuracy", "pass", segment=seg, lag=lag, measure="wape",
                            value=float(v) / 3 + 0.01 * i, unit="%")
                for (seg, lag), v in wape.items()]))
    report = run_checks(config, snapshot=False)
    drift = [r for r in report.results if r.check == CONTROL_LIMIT]
    assert {r.measure for r in drift} == {"wape", "bias_pct"}  # the thresholded measures
    assert all(r.status == "skipped" for r in drift if r.measure == "bias_pct")  # no history
    drift = [r for r in drift if r.measure == "wape"]
    assert {(r.segment, r.lag) for r in drift} == set(wape)
    assert all(r.status == "warn" for r in drift)
    assert report.to_dict()["results"]  # JSON-able
    with open_store(config) as store:
        store.waive(segment="plants", measure="wape", until=date(2099, 1, 1),
                    reason="new range", by="ana")
        waived = run_checks(config, snapshot=False)
        stored = store.results_of(waived.run_id)
    plants = [r for r in waived.results if r.check == CONTROL_LIMIT and r.segment == "plants"
              and r.measure == "wape"]
    assert plants and all(r.status == "waived" for r in plants)
    assert all(r.message.startswith("Waived (warn without it) by ana") for r in plants)
    recorded = [r for r in stored if r["check"] == CONTROL_LIMIT and r["measure"] == "wape"]
    assert len(recorded) == len(drift)
    assert {r["status"] for r in recorded if r["segment"] == "plants"} == {"waived"}
    assert all(r["waiver_id"] for r in recorded if r["segment"] == "plants")
    # the current cycle's own earlier attempts are never its history
    assert all(r.details["last_cycle"] < CURRENT.date().isoformat() for r in drift)
