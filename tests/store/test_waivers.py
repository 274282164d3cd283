"""Waivers: applying them to results, expiry on the right day (UTC, inclusive), revocation
as a row of its own, validation, and the gate end to end (SQLite and PostgreSQL)."""

from __future__ import annotations

from collections.abc import Callable
from datetime import UTC, date, datetime, timedelta

import pandas as pd
import pytest
from sqlalchemy import func, select

from accuracy_checks import load_config, run_checks
from accuracy_checks.results import CheckResult, worst_status
from accuracy_checks.store import StoreError, Waiver, apply_waivers, open_store
from accuracy_checks.store.schema import waiver_revocations, waivers
from tests.support.project import EARLIER, Project, forecast_frame
from tests.support.store import store_url_fixture  # noqa: F401  (fixture)

GRANTED = datetime(2026, 3, 2, 9, 30, tzinfo=UTC)


def _waiver(wid: int = 1, *, lag: int | None = None, until: date = date(2026, 3, 31),
            segment: str = "pet-care", measure: str = "bias_pct") -> Waiver:
    return Waiver(wid, segment, measure, lag, until, "spring promotion", "ana", GRANTED)


def _result(status: str, lag: int = 1, segment: str = "pet-care",
            measure: str = "bias_pct") -> CheckResult:
    return CheckResult("accuracy", status, segment=segment, lag=lag, measure=measure,  # type: ignore[arg-type]
                       value=17.9, warn=(-5.0, 8.0), fail=(-10.0, 15.0),
                       message="Bias %: under-forecast by 17.9 %")


def test_a_waiver_turns_warn_and_fail_into_waived_and_says_why() -> None:
    results = [_result("fail", 1), _result("warn", 2), _result("pass", 3),
               _result("skipped", 4), _result("error", 5), _result("fail", 1, segment="tools")]
    out = apply_waivers(results, [_waiver()])
    assert [r.status for r in out] == ["waived", "waived", "pass", "skipped", "error", "fail"]
    first = out[0]
    assert first.message.startswith("Waived (fail without it) by ana until 2026-03-31, "
                                    "waiver #1: spring promotion.")
    assert first.message.endswith("Bias %: under-forecast by 17.9 %")
    assert first.details["waiver"] == {"id": 1, "by": "ana", "until": "2026-03-31",
                                       "reason": "spring promotion"}
    assert first.details["waived_status"] == "fail"
    assert worst_status([r.status for r in out[:5]]) == "fail"  # the error still fails
    assert worst_status([r.status for r in out[:4]]) == "pass"
    assert apply_waivers(results, []) == results


def test_a_lag_waiver_covers_only_its_lag_and_beats_an_every_lag_one() -> None:
    every, lag2 = _waiver(1), _waiver(2, lag=2, until=date(2026, 3, 10))
    out = apply_waivers([_result("fail", 1), _result("fail", 2)], [lag2])
    assert [r.status for r in out] == ["fail", "waived"]
    out = apply_waivers([_result("fail", 1), _result("fail", 2)], [every, lag2])
    assert [r.details["waiver"]["id"] for r in out] == [1, 2]


def test_state_on_a_day_and_at_an_instant() -> None:
    w = _waiver(until=date(2026, 3, 31))
    assert w.state(date(2026, 3, 31)) == "active"  # through the until day, inclusive
    assert w.state(date(2026, 4, 1)) == "expired"
    assert w.state(datetime(2026, 3, 31, 23, 59, 59, tzinfo=UTC)) == "active"
    assert w.state(datetime(2026, 4, 1, 0, 0, tzinfo=UTC)) == "expired"
    # a run at 01:30 on 1 April in UTC+2 is still 31 March in UTC: covered
    assert w.state(datetime.fromisoformat("2026-04-01T01:30:00+02:00")) == "active"
    assert w.state(date(2026, 3, 2)) == "active"  # granted during that day
    assert w.state(datetime(2026, 3, 2, 9, 0, tzinfo=UTC)) == "pending"  # before granted


def test_waivers_expire_on_their_own_after_the_until_day(store_url: str) -> None:
    until = date(2099, 3, 31)
    with open_store(store_url) as store:
        w = store.waive(segment="pet-care", measure="bias_pct", until=until,
                        reason="spring promotion", by="ana")
        assert w.created_by == "ana" and w.until == until
        assert [x.id for x in store.active_waivers(on=until)] == [w.id]
        assert store.active_waivers(on=until + timedelta(days=1)) == []
        assert [x.id for x in store.active_waivers(
            on=datetime(2099, 3, 31, 23, 59, 59, tzinfo=UTC))] == [w.id]
        assert store.active_waivers(on=datetime(2099, 4, 1, tzinfo=UTC)) == []
        assert [x.id for x in store.active_waivers()] == [w.id]  # today
        assert store.waivers(include_inactive=True)[0].state(until + timedelta(1)) == "expired"


def test_revoking_is_recorded_and_ends_the_waiver(store_url: str) -> None:
    with open_store(store_url) as store:
        w = store.waive(segment="tools", measure="wape", lag=1, until=date(2099, 1, 1),
                        reason="new supplier", by="ana")
        before = datetime.now(UTC)
        revoked = store.revoke(w.id, reason="supplier switched back", by="ben")
        assert revoked.state() == "revoked" and store.active_waivers() == []
        assert (revoked.revoked_by, revoked.revoke_reason) == ("ben", "supplier switched back")
        assert revoked.created_by == "ana" and revoked.reason == "new supplier"  # untouched
        assert [x.id for x in store.active_waivers(on=before)] == [w.id]  # it did apply then
        with store.db.read() as conn:
            assert conn.execute(select(func.count()).select_from(waivers)).scalar() == 1
            assert conn.execute(
                select(func.count()).select_from(waiver_revocations)).scalar() == 1
        with pytest.raises(StoreError, match="already revoked by ben"):
            store.revoke(w.id, reason="again", by="cy")
        with pytest.raises(StoreError, match="no waiver #999"):
            store.revoke(999, reason="typo")
        with pytest.raises(StoreError, match="append-only"), store.db.write() as conn:
            conn.execute(waivers.update().values(until=date(2100, 1, 1)))


def test_waive_refuses_what_cannot_be_meant(store_url: str) -> None:
    with open_store(store_url) as store:
        with pytest.raises(StoreError, match="did you mean 'wape'"):
            store.waive(segment="tools", measure="wap", until=date(2099, 1, 1), reason="x")
        yesterday = datetime.now(UTC).date() - timedelta(days=1)
        with pytest.raises(StoreError, match="before today"):
            store.waive(segment="tools", measure="wape", until=yesterday, reason="x")
        with pytest.raises(StoreError, match="needs a reason"):
            store.waive(segment="tools", measure="wape", until=date(2099, 1, 1), reason=" ")
        with pytest.raises(StoreError, match="--lag starts at 1"):
            store.waive(segment="tools", measure="wape", until=date(2099, 1, 1), reason="x",
                        lag=0)
        today = datetime.now(UTC).date()  # until today is fine: it covers today
        assert store.waive(segment="tools", measure="wape", until=today, reason="x").id == 1


def test_gate_reports_waived_breaches_and_passes(make_project: Callable[..., Project],
                                                 store_url: str) -> None:
    # every earlier cycle under-forecast by 7 %: bias_pct warns (warn 5, fail 10)
    earlier = pd.concat([forecast_frame(d, bias=0.93) for d in EARLIER], ignore_index=True)
    project = make_project(earlier=earlier, extra=f"store: {store_url}\n")
    config = load_config(project.config)
    first = run_checks(config, snapshot=False)
    assert first.status == "warn" and first.attempt == 1
    warned = {(r.segment, r.measure) for r in first.results if r.status == "warn"}
    assert ("*", "bias_pct") in warned
    with open_store(config) as store:
        for segment, measure in sorted(warned, key=str):
            store.waive(segment=segment or "", measure=measure or "", until=date(2099, 1, 1),
                        reason="known promotion", by="ana")

    second = run_checks(config)
    assert second.status == "pass" and second.attempt == 2
    waived = [r for r in second.results if r.status == "waived"]
    assert {(r.segment, r.measure) for r in waived} == warned
    assert all(r.message.startswith("Waived (warn without it) by ana until 2099-01-01")
               for r in waived)
    assert all(d["status"] != "warn" for d in second.to_dict()["results"])
    with open_store(config) as store:
        stored = store.results_of(second.run_id)
        [run] = store.history(cycle="2026-03-02", status="waived")
    assert run["run_id"] == second.run_id and run["counts"]["waived"] == len(waived)
    assert {r["waiver_id"] for r in stored if r["status"] == "waived"} <= set(range(1, 10))
    assert all(r["waiver_id"] is not None for r in stored if r["status"] == "waived")


def test_default_store_is_a_private_file_next_to_the_archive(
        make_project: Callable[..., Project]) -> None:
    project = make_project()
    report = run_checks(load_config(project.config))
    db = project.root / "audit.db"  # the archive is project/archive
    assert db.exists() and (db.stat().st_mode & 0o777) == 0o600
    with open_store(f"sqlite:///{db}") as store:
        [run] = store.history()
    assert run["run_id"] == report.run_id and run["snapshot"] == report.snapshot
    assert run["inputs"]["forecast"]["sha256"] and run["inputs"]["forecast"]["rows"] == 24
    assert len(run["inputs"]["history"]) == 1 and run["inputs"]["mapping"]["bytes"] > 0
    assert run["config_path"] == str(project.config)
