"""Output checks (pandera): duplicates, invalid and negative values, quantile order, issue dates.

Every expected count below is hand-counted from the small frames built here (no outside
source: these checks are rules of this project, see docs/checks.md).
"""

from __future__ import annotations

import json
from collections.abc import Callable
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd
import pytest

from accuracy_checks.checks.output import output_checks
from accuracy_checks.checks.output_schema import (
    DUPLICATE_ROWS,
    INVALID_VALUES,
    ISSUE_DATES,
    NEGATIVE_VALUES,
    OUTPUT_CHECKS,
    QUANTILE_ORDER,
)
from accuracy_checks.cli.main import main
from accuracy_checks.errors import InputError
from accuracy_checks.results import CheckResult
from tests.support.output import ISSUED, KEYS, QCOLS, frame, negative_frame
from tests.support.project import CURRENT, Project, forecast_frame


def run(f: pd.DataFrame, **kw: Any) -> dict[str, CheckResult]:
    kw.setdefault("keys", KEYS)
    kw.setdefault("quantile_columns", QCOLS)
    results = output_checks(f, **kw)
    assert [r.check for r in results] == list(OUTPUT_CHECKS)
    return {r.check: r for r in results}


def test_clean_frame_passes_every_check() -> None:
    results = run(frame())
    for r in results.values():
        assert r.status == "pass", r
        assert r.segment == "*" and r.unit == "count"
        assert r.value == 0 and r.n_obs == 0 and r.n_series == 0
        assert r.examples == []


@pytest.mark.parametrize("qcols", [[], ["q0.1"]])
def test_quantile_order_skipped_with_fewer_than_two_quantiles(qcols: list[str]) -> None:
    r = run(frame(), quantile_columns=qcols)[QUANTILE_ORDER]
    assert r.status == "skipped" and r.reason == "no_quantiles"


def test_duplicates_counted_per_row_with_one_example_per_combination() -> None:
    f = frame()
    # S1/P1 first period given 3 times in all, S2/P1 last period twice
    f = pd.concat([f, f.iloc[[0, 0]], f.iloc[[8]]], ignore_index=True)
    r = run(f)[DUPLICATE_ROWS]
    assert r.status == "fail"
    assert (r.value, r.n_obs, r.n_series) == (5, 5, 2)
    assert r.message.startswith("5 rows repeat a (store, product, period, issued) combination")
    assert r.examples == [
        {"store": "S1", "product": "P1", "period": "2026-03-02", "issued": "2026-02-27", "rows": 3},
        {"store": "S2", "product": "P1", "period": "2026-03-16", "issued": "2026-02-27", "rows": 2},
    ]


def test_same_period_other_issue_date_is_not_a_duplicate() -> None:
    f = frame()
    other = f.iloc[:3].assign(issued=pd.Timestamp("2026-03-01"))
    results = run(pd.concat([f, other], ignore_index=True))
    assert results[DUPLICATE_ROWS].status == "pass"
    assert results[ISSUE_DATES].status == "fail"


def test_duplicate_with_missing_key_values_are_still_duplicates() -> None:
    f = frame()
    f["product"] = f["product"].astype("string")  # pd.NA-backed string dtype
    f.loc[[0, 1], "product"] = pd.NA
    f.loc[1, "period"] = f.loc[0, "period"]
    r = run(f)[DUPLICATE_ROWS]
    assert (r.status, r.n_obs) == ("fail", 2)
    assert r.examples[0]["product"] is None
    json.dumps(r.examples, allow_nan=False)


def test_invalid_values_nan_inf_and_none() -> None:
    f = frame()
    f.loc[0, "forecast"] = np.nan
    f.loc[4, "q0.9"] = np.inf
    f.loc[5, "q0.1"] = -np.inf
    f.loc[5, "forecast"] = np.nan  # same row, two bad cells: one offending row
    r = run(f)[INVALID_VALUES]
    assert r.status == "fail"
    assert (r.value, r.n_obs, r.n_series) == (3, 3, 2)
    assert r.details["by_column"] == {"forecast": 2, "q0.1": 1, "q0.9": 1}
    ex = r.examples
    assert [e["period"] for e in ex] == ["2026-03-02", "2026-03-09", "2026-03-16"]
    assert ex[0]["forecast"] is None
    assert ex[1]["q0.9"] == "infinity" and ex[2]["q0.1"] == "-infinity"
    json.dumps(ex, allow_nan=False)


def test_none_in_an_object_column_is_invalid() -> None:
    f = frame()
    f["forecast"] = f["forecast"].astype(object)
    f.loc[2, "forecast"] = None
    r = run(f)[INVALID_VALUES]
    assert (r.status, r.n_obs) == ("fail", 1)
    assert r.examples[0]["forecast"] is None


def test_non_numeric_forecast_is_an_input_error() -> None:
    f = frame()
    f["forecast"] = f["forecast"].astype(object)
    f.loc[2, "forecast"] = "twelve"
    with pytest.raises(InputError, match="'forecast'"):
        output_checks(f, keys=KEYS, quantile_columns=QCOLS)


def test_negative_values_fail_by_default() -> None:
    r = run(negative_frame())[NEGATIVE_VALUES]
    assert r.status == "fail"
    assert (r.value, r.n_series) == (2, 2)
    assert [e["segment"] for e in r.examples] == ["tools", "plants"]
    assert r.examples[0]["forecast"] == -1.0


def test_negative_values_allowed_everywhere() -> None:
    assert run(negative_frame(), allow_negative=True)[NEGATIVE_VALUES].status == "pass"


@pytest.mark.parametrize("allowed", [{"tools"}, ["tools"], "tools"])
def test_negative_values_allowed_per_segment(allowed: object) -> None:
    r = run(negative_frame(), allow_negative=allowed)[NEGATIVE_VALUES]
    assert (r.status, r.n_obs) == ("fail", 1)
    assert r.examples[0]["segment"] == "plants"
    both = run(negative_frame(), allow_negative={"tools", "plants"})[NEGATIVE_VALUES]
    assert both.status == "pass"


def test_zero_is_not_negative() -> None:
    f = frame()
    f[["forecast", "q0.1", "q0.9"]] = 0.0
    assert run(f)[NEGATIVE_VALUES].status == "pass"


def test_quantile_crossing() -> None:
    f = frame()
    f.loc[1, "q0.1"] = f.loc[1, "q0.9"] + 0.01  # crossing
    f.loc[2, "q0.1"] = f.loc[2, "q0.9"]  # equal quantiles are not a crossing
    r = run(f)[QUANTILE_ORDER]
    assert r.status == "fail"
    assert (r.n_obs, r.n_series) == (1, 1)
    assert r.examples[0]["period"] == "2026-03-09"
    assert r.examples[0]["q0.1"] > r.examples[0]["q0.9"]


def test_quantile_crossing_across_a_missing_middle_quantile() -> None:
    f = frame().assign(**{"q0.5": lambda d: d["forecast"]})
    f.loc[0, ["q0.1", "q0.5", "q0.9"]] = [5.0, np.nan, 3.0]
    results = run(f, quantile_columns=["q0.1", "q0.5", "q0.9"])
    assert results[QUANTILE_ORDER].n_obs == 1
    assert results[INVALID_VALUES].n_obs == 1


def test_quantile_crossing_is_worded_with_the_files_own_columns() -> None:
    f = frame().assign(**{"q0.5": lambda d: d["forecast"]})
    qcols = ["q0.1", "q0.5", "q0.9"]
    f.loc[1, "q0.1"] = f.loc[1, "q0.9"] + 1.0  # p10 above p50 and above p90
    f.loc[4, "q0.5"] = f.loc[4, "q0.9"] + 1.0  # p50 above p90
    r = run(f, quantile_columns=qcols, quantile_names=["p10", "p50", "p90"])[QUANTILE_ORDER]
    assert r.status == "fail" and r.n_obs == 2
    assert r.message == (
        "2 rows have crossing quantiles, a lower level above a higher one (p10 > p50 in 1 row, "
        "p10 > p90 in 1 row, p50 > p90 in 1 row); quantile forecasts must not decrease as the "
        "level rises (p10, p50, p90)"
    )
    assert "q0." not in r.message
    assert r.details == {"crossings": {"p10 > p50": 1, "p10 > p90": 1, "p50 > p90": 1}}
    assert list(r.examples[0]) == ["store", "product", "period", "issued", "p10", "p50", "p90"]
    assert r.examples[0]["p10"] > r.examples[0]["p90"]
    clean = run(frame(), quantile_names=["p10", "p90"])[QUANTILE_ORDER]
    assert clean.message == "Quantiles rise with their level (p10, p90) in every row."


def test_quantile_crossing_lists_at_most_three_pairs() -> None:
    f = frame()
    qcols = [f"q0.{k}" for k in range(1, 6)]
    f[qcols] = np.array([5.0, 4.0, 3.0, 2.0, 1.0])  # every one of the 10 pairs crosses
    names = [f"p{k}0" for k in range(1, 6)]
    r = run(f, quantile_columns=qcols, quantile_names=names)[QUANTILE_ORDER]
    assert r.n_obs == len(f)
    assert "(p10 > p20 in 9 rows, p10 > p30 in 9 rows, p10 > p40 in 9 rows, and 7 more pairs)" \
        in r.message
    assert len(r.details["crossings"]) == 10


def test_a_file_quantile_name_that_clashes_with_an_identifying_field_keeps_its_label() -> None:
    f = frame()
    f.loc[0, "q0.1"] = 99.0
    r = run(f, quantile_names=["period", "p90"])[QUANTILE_ORDER]
    example = r.examples[0]
    assert example["period"] == "2026-03-02" and example["q0.1"] == 99.0
    assert "period > p90 in 1 row" in r.message


def test_cli_names_the_files_quantile_columns(
    make_project: Callable[..., Project], capsys: pytest.CaptureFixture[str], tmp_path: Path
) -> None:
    # conftest's config maps quantiles {0.1: p10, 0.9: p90}; 3 rows get p10 above p90
    forecast = forecast_frame(CURRENT)
    forecast.loc[[0, 5, 9], ["p10", "p90"]] = forecast.loc[[0, 5, 9], ["p90", "p10"]].to_numpy()
    project = make_project(forecast=forecast)
    out = tmp_path / "r.json"
    code = main(["run", "--config", str(project.config), "-q", "--no-color", "--no-snapshot",
                 "--json", str(out)])
    assert code == 1
    console = capsys.readouterr().out
    (order,) = [r for r in json.loads(out.read_text())["results"]
                if r["check"] == QUANTILE_ORDER]
    assert order["status"] == "fail" and order["value"] == 3
    assert "(p10 > p90 in 3 rows)" in order["message"]
    assert "q0.1" not in order["message"] and "q0.9" not in order["message"]
    assert {"p10", "p90"} <= set(order["examples"][0])
    assert not {"q0.1", "q0.9"} & set(order["examples"][0])
    assert order["examples"][0]["p10"] > order["examples"][0]["p90"]
    assert "p10 > p90" in console and "q0.1" not in console


def test_two_issue_dates_listed_with_row_counts() -> None:
    f = frame()
    f.loc[:2, "issued"] = pd.Timestamp("2026-02-20")  # the 3 rows of S1/P1 are stale
    r = run(f)[ISSUE_DATES]
    assert r.status == "fail"
    assert (r.value, r.n_obs, r.n_series) == (3, 3, 1)
    assert r.examples == [
        {"issued": "2026-02-20", "rows": 3},
        {"issued": "2026-02-27", "rows": 6},
    ]
    assert r.message.startswith("The rows carry 2 different issue dates")
    assert r.message.endswith("drop the 3 rows not issued on 2026-02-27")


def test_no_issue_date_at_all() -> None:
    f = frame().assign(issued=pd.NaT)
    r = run(f)[ISSUE_DATES]
    assert (r.status, r.n_obs) == ("fail", 9)
    assert r.message.startswith("No row has an issue date")


def test_issue_date_examples_are_capped() -> None:
    f = frame({(f"S{i}", "P1"): "*" for i in range(8)}, periods=1)
    f["issued"] = pd.date_range("2026-02-01", periods=8, freq="D")
    r = run(f, max_examples=3)[ISSUE_DATES]
    assert r.n_obs == 7 and len(r.examples) == 3
    assert r.details["issue_dates"] == 8 and r.details["latest"] == "2026-02-08"
    assert "; and 3 more)" in r.message


def test_missing_issue_date_offends() -> None:
    f = frame()
    f.loc[4, "issued"] = pd.NaT
    r = run(f)[ISSUE_DATES]
    assert (r.status, r.n_obs) == ("fail", 1)
    assert r.examples[-1] == {"issued": None, "rows": 1}


def test_examples_are_capped() -> None:
    f = frame({(f"S{i}", "P1"): "tools" for i in range(12)}, periods=4)
    f["forecast"] = np.nan
    f = pd.concat([f, f], ignore_index=True)  # every row twice: 48 repeated combinations
    results = run(f, max_examples=5)
    inv = results[INVALID_VALUES]
    assert (inv.n_obs, inv.n_series, len(inv.examples)) == (96, 12, 5)
    dup = results[DUPLICATE_ROWS]
    assert (dup.n_obs, len(dup.examples)) == (96, 5)
    assert dup.details["combinations"] == 48
    assert run(f, max_examples=0)[INVALID_VALUES].examples == []


def test_every_result_is_json_ready() -> None:
    f = negative_frame()
    f.loc[1, "forecast"] = np.inf
    f.loc[2, "q0.1"] = 99.0
    f.loc[7, "issued"] = pd.Timestamp("2026-01-01")
    f = pd.concat([f, f.iloc[[6]]], ignore_index=True)
    results = output_checks(f, keys=KEYS, quantile_columns=QCOLS)
    assert {r.status for r in results} == {"fail"}
    for r in results:
        json.dumps(r.to_dict(), allow_nan=False)
        assert r.message and "\n" not in r.message


def test_monthly_frame_and_empty_frame() -> None:
    f = frame(freq="MS", start="2026-01-01")
    assert {r.status for r in output_checks(f, keys=KEYS, quantile_columns=QCOLS)} == {"pass"}
    empty = f.iloc[:0]
    results = output_checks(empty, keys=KEYS, quantile_columns=QCOLS)
    assert [(r.status, r.value) for r in results] == [("pass", 0)] * 5


def test_missing_column_is_an_input_error() -> None:
    with pytest.raises(InputError, match=r"q0\.9"):
        output_checks(frame().drop(columns=["q0.9"]), keys=KEYS, quantile_columns=QCOLS)
    with pytest.raises(InputError, match="segment"):
        output_checks(
            frame().drop(columns=["segment"]),
            keys=KEYS,
            quantile_columns=QCOLS,
            allow_negative={"tools"},
        )


def test_a_million_rows_run() -> None:
    # scale smoke test (no timing assert; the benchmark script measures speed)
    n_series, h = 100_000, 10
    codes = np.arange(n_series)
    f = pd.DataFrame(
        {
            "store": pd.array(np.char.add("S", (codes % 100).astype(str)), dtype="str").take(
                np.repeat(codes, h)
            ),
            "product": pd.array(np.char.add("P", (codes // 100).astype(str)), dtype="str").take(
                np.repeat(codes, h)
            ),
            "period": np.tile(
                pd.date_range("2026-03-02", periods=h, freq="W-MON").values, n_series
            ),
            "issued": ISSUED,
            "forecast": np.linspace(0, 100, n_series * h),
            "segment": "*",
        }
    )
    f["q0.1"] = f["forecast"] * 0.9
    f["q0.9"] = f["forecast"] * 1.1
    f.loc[123_456, "forecast"] = -1.0
    results = {r.check: r for r in output_checks(f, keys=KEYS, quantile_columns=QCOLS)}
    assert results[NEGATIVE_VALUES].n_obs == 1
    assert [results[c].status for c in OUTPUT_CHECKS if c != NEGATIVE_VALUES] == ["pass"] * 4
