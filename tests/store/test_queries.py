"""The store's read queries that the report uses (``accuracy_checks/store/queries.py``):
the figures of chosen runs and every result of one run, on SQLite and PostgreSQL.
(History, breaches and the drift trail are tested in test_core.py and tests/checks.)"""

from __future__ import annotations

from accuracy_checks.results import CheckResult
from accuracy_checks.store import open_store
from accuracy_checks.store.queries import FIGURE_ROW_COLUMNS, figures_of_runs, results_of_run
from tests.support.store import (
    make_report,
    store_url_fixture,  # noqa: F401  (fixture)
)


def test_figures_of_runs_and_results_of_run(store_url: str) -> None:
    results = [
        CheckResult("accuracy", "warn", segment="tools", lag=1, measure="wape", value=31.0,
                    warn=30.0, fail=45.0, unit="%", details={"n": 1}),
        CheckResult("accuracy", "pass", segment="tools", lag=1, measure="pinball", value=2.0,
                    unit="units", details={"variant": "q0.1"}),
        CheckResult("drift.control_limit", "pass", segment="tools", lag=1, measure="wape",
                    value=31.0, details={"lower": 20.0, "upper": 40.0, "signal": False}),
        CheckResult("output.duplicate_rows", "pass"),  # no measure: not a figure
    ]
    with open_store(store_url) as store:
        first = store.record_run(make_report(results=results, run_id="run-a"))
        store.record_run(make_report("2026-03-09", run_id="run-b"))
        with store.db.read() as conn:
            rows = figures_of_runs(conn, [first.run_id, "no-such-run"])
            every = results_of_run(conn, first.run_id)
            assert results_of_run(conn, "no-such-run") == []
            assert figures_of_runs(conn, []) == []
    got = [dict(zip(FIGURE_ROW_COLUMNS, r, strict=True)) for r in rows]
    assert sorted((g["run_id"], g["check_name"], g["measure"]) for g in got) == [
        ("run-a", "accuracy", "pinball"), ("run-a", "accuracy", "wape"),
        ("run-a", "drift.control_limit", "wape")]
    # details only where the report reads them: drift limits and variants
    kept = {(g["check_name"], g["measure"]): g["details"] is not None for g in got}
    assert kept == {("accuracy", "wape"): False, ("accuracy", "pinball"): True,
                    ("drift.control_limit", "wape"): True}
    assert [r["check_name"] for r in every] == [r.check for r in results]
