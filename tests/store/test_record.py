"""The audit rows and the digest chain (``accuracy_checks/store/record.py``) held to the bytes
recorded stores carry: the rows and digests below were made by the code before its speed-up
(commit a0f52de), so every run recorded since still verifies."""

from __future__ import annotations

from datetime import UTC, date, datetime
from typing import Any

import numpy as np
import pytest

from accuracy_checks.results import CheckResult, RunReport, Status
from accuracy_checks.store import open_store
from accuracy_checks.store import record as R
from tests.support.store import (
    make_report,
    store_url_fixture,  # noqa: F401  (fixture)
)


def tricky_results() -> list[CheckResult]:
    """NumPy scalars, NaN and infinities, non-ASCII and control characters, bools, odd
    waivers, objects JSON does not know (encoded as their ``str``), keys of other types."""
    return [
        CheckResult("accuracy", "fail", segment="pet-care", lag=1, measure="bias_pct",
                    value=17.9, warn=(-5.0, 8.0), fail=(-10.0, 15.0), n_series=48, n_obs=192,
                    message="Bias %: under-forecast by 17.9 %", unit="%",
                    details={"cycles": [{"cycle": "2026-02-23", "attempt": 1}], "b": 1}),
        CheckResult("accuracy", Status.WARN, segment="épicerie «fine» ☕", lag=np.int64(4),
                    measure="wape", value=np.float64(1e-05), warn=np.float64(25), fail=40,
                    n_series=np.int64(7), n_obs=True, message='quote " back \\ nl \n tab \t',
                    examples=[{"z": float("nan"), "a": float("inf"), "d": date(2026, 3, 2),
                               "t": datetime(2026, 3, 2, 6, tzinfo=UTC),
                               "k": {1: "a", 2.5: "b"}, "n": np.int64(3),
                               "f": np.float64(2.5), "l": (1, 2.0)}],
                    details={"waiver": {"id": np.int64(12), "by": "ann"}, "x": 1e16,
                             "y": -0.0, "u": "\u2028\x00"}),
        CheckResult("accuracy", "skipped", segment="tools", lag=None, measure="mape",
                    value=float("nan"), warn=(float("-inf"), 8), fail=None,
                    reason="zero_actual", unit="%"),
        CheckResult("accuracy", "pass", segment=None, measure="rmse", value=float("inf"),
                    warn=25.0, fail=(-10.0, 40.0), details={"waiver": "not a dict"}),
        CheckResult("output.duplicate_rows", "fail", n_obs=3, value=3,
                    examples=[{"store": "S1", "product": "P1", "week": "2026-03-02"}],
                    details={"waiver": {"no_id": 1}}),
        CheckResult("accuracy", "waived", segment="tools", lag=2, measure="wape",
                    value=-1.5e300, warn=25.0, fail=(-10.0, 40.0),
                    details={"waiver": {"id": "7"}}),
    ]


#: ``result_rows(tricky_results())`` as made by commit a0f52de
OLD_ROWS = [
    (0, 'accuracy', 'fail', 'pet-care', 1, 'bias_pct', 17.9, '[-5.0,8.0]', '[-10.0,15.0]', 48,
     192, 'Bias %: under-forecast by 17.9 %', None, None, '%',
     '{"b":1,"cycles":[{"attempt":1,"cycle":"2026-02-23"}]}', None),
    (1, 'accuracy', 'warn', 'épicerie «fine» ☕', 4, 'wape', 1e-05, '25.0', '40.0', 7, 1,
     'quote " back \\ nl \n tab \t', None,
     '[{"a":null,"d":"2026-03-02","f":2.5,"k":{"1":"a","2.5":"b"},"l":[1,2.0],"n":"3",'
     '"t":"2026-03-02 06:00:00+00:00","z":null}]', None,
     '{"u":"\u2028\\u0000","waiver":{"by":"ann","id":"12"},"x":1e+16,"y":-0.0}', 12),
    (2, 'accuracy', 'skipped', 'tools', None, 'mape', None, '[null,8.0]', None, None, None, '',
     'zero_actual', None, '%', None, None),
    (3, 'accuracy', 'pass', None, None, 'rmse', None, '25.0', '[-10.0,40.0]', None, None, '',
     None, None, None, '{"waiver":"not a dict"}', None),
    (4, 'output.duplicate_rows', 'fail', None, None, None, 3.0, None, None, None, 3, '', None,
     '[{"product":"P1","store":"S1","week":"2026-03-02"}]', None, '{"waiver":{"no_id":1}}',
     None),
    (5, 'accuracy', 'waived', 'tools', 2, 'wape', -1.5e+300, '25.0', '[-10.0,40.0]', None,
     None, '', None, None, None, '{"waiver":{"id":"7"}}', 7),
]
#: ``chain_digest`` of that run after no digest and after 64 zeros (commit a0f52de)
OLD_DIGESTS = ("ddf1d0b2626fa99a9d68132b1796bc0a1add6da548b2c24208754d5b54a1f3bd",
               "06bf654b7e52955c5ded7f94774cac72d187d0e612d1938231e296f7d98a3a7e")


def golden_run(rows: list[tuple[Any, ...]] | None) -> dict[str, Any]:
    report = RunReport(run_id="golden", cycle="2026-03-02", attempt=None,
                       results=tricky_results(), started_at="2026-03-02T06:00:00+01:00",
                       finished_at="2026-03-02T06:01:00+00:00")
    run = R.run_row(report, config=None, rows=rows, recorded_at=datetime(2026, 3, 2, 7,
                                                                         tzinfo=UTC),
                    fingerprints={"forecast": {"path": "f.parquet", "sha256": "ab", "rows": 3}})
    run.update(attempt=1, host="h", os_user="u", tool_version="0")
    return run


def test_rows_and_digests_are_those_of_the_code_before() -> None:
    rows = R.result_rows(tricky_results())
    assert rows == OLD_ROWS
    # same types too (1 == 1.0 == True, but JSON tells them apart)
    assert [[type(v) for v in r] for r in rows] == [[type(v) for v in r] for r in OLD_ROWS]
    for given in (rows, None):  # status and counts from the rows, or from the report
        run = golden_run(given)
        assert R.chain_digest(None, run, rows) == OLD_DIGESTS[0]
        assert R.chain_digest("0" * 64, run, rows) == OLD_DIGESTS[1]
    # rows read back from a database come as other sequences: the same digest
    assert R.chain_digest(None, golden_run(None), [list(r) for r in rows]) == OLD_DIGESTS[0]


def test_the_fast_encoder_writes_what_the_json_encoder_writes(
        monkeypatch: pytest.MonkeyPatch) -> None:
    values: list[Any] = [
        None, "", "é\u2028\x00\"\\", 0, -1, 2**70, 1.5, -0.0, 1e16, 1e-7, True, [], {},
        (1, "a"), {"b": [1, {"z": 1, "a": None}], "a": date(2026, 1, 1)}, {3: "x", 1: "y"},
        [{"n": float("nan")}], {"i": float("-inf")}, np.float64(0.1), {"k": np.int64(5)},
    ]
    fast = [R.dumps(v) for v in values]
    rows = R.result_rows(tricky_results())
    body = R._encode(rows)
    monkeypatch.setattr(R, "_chunks", R._one_chunk)  # the plain json path
    assert [R.dumps(v) for v in values] == fast
    assert R._encode(rows) == body
    assert R.chain_digest(None, golden_run(None), rows) == OLD_DIGESTS[0]


def test_a_store_written_before_and_after_verifies(store_url: str) -> None:
    # a run recorded by the code of the past (its rows and digest as that code made them,
    # inserted as they were) followed by runs recorded now: one chain, all verified
    with open_store(store_url) as store:
        store.record_run(make_report("2026-02-23", n=3))
        with store.db.write() as conn:
            from sqlalchemy import func, select

            from accuracy_checks.store.schema import runs

            previous = conn.execute(select(runs.c.digest).order_by(runs.c.id.desc())
                                    .limit(1)).scalar()
            run = golden_run(None)
            run["digest"] = R.chain_digest(previous, run, OLD_ROWS)
            pk = conn.execute(runs.insert().values(**run)).inserted_primary_key[0]
            R.insert_results(conn, int(pk), OLD_ROWS)
            assert conn.execute(select(func.count()).select_from(runs)).scalar() == 2
        store.record_run(make_report("2026-03-09", n=4))
        store.record_run(make_report("2026-03-09", n=0))
        assert store.verify() == []
        stored = store.results_of("golden")
    assert [r["segment"] for r in stored] == [r[3] for r in OLD_ROWS]


def test_none_is_bound_as_null_through_a_registered_adapter(
        tmp_path: Any, monkeypatch: pytest.MonkeyPatch) -> None:
    import sqlite3

    from accuracy_checks.store.database import _bind_none_directly

    key = (type(None), sqlite3.PrepareProtocol)
    mine = {}.get
    monkeypatch.setitem(sqlite3.adapters, key, mine)
    _bind_none_directly()  # someone else's adapter of None stays
    assert sqlite3.adapters[key] is mine
    monkeypatch.delitem(sqlite3.adapters, key)
    with open_store(f"sqlite:///{tmp_path / 'audit.db'}") as store:
        assert key in sqlite3.adapters
        store.record_run(make_report(n=2))
        with store.db.read() as conn:
            nulls = conn.exec_driver_sql(
                "SELECT COUNT(*) FROM results WHERE reason IS NULL AND waiver_id IS NULL "
                "AND typeof(reason) = 'null'").scalar()
    assert nulls == 2
