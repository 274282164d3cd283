"""Bad input is normal input: randomly damaged forecast files never crash the gate.

Whatever the damage (a dropped column, text in a number column, garbage dates, blank keys,
repeated or missing rows, NaN/inf/negative values, crossed quantiles, a second issue date),
the CLI ends with exit code 0, 1 or 2 — a verdict or one clear paragraph — never an internal
error (3) or a traceback.
"""

from __future__ import annotations

from collections.abc import Callable

import numpy as np
import pandas as pd
import pytest
from conftest import CURRENT, PRODUCTS, Project, actuals_frame, forecast_frame
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from accuracy_checks.cli import main

DAMAGE = st.sampled_from([
    "drop_column", "text_in_number", "garbage_date", "blank_key", "duplicate_rows",
    "drop_rows", "nan", "inf", "negative", "cross_quantiles", "second_issue_date",
    "empty_cells", "shuffle",
])


def damage(frame: pd.DataFrame, kind: str, rng: np.random.Generator) -> pd.DataFrame:
    f = frame.astype(object).reset_index(drop=True)
    i = int(rng.integers(len(f)))
    if kind == "drop_column":
        return f.drop(columns=[f.columns[int(rng.integers(len(f.columns)))]])
    if kind == "text_in_number":
        f.loc[i, str(rng.choice(["units", "p10", "p90"]))] = "n/a-ish"
    elif kind == "garbage_date":
        f.loc[i, str(rng.choice(["week", "issued_on"]))] = "31/02/yesterday"
    elif kind == "blank_key":
        f.loc[i, str(rng.choice(["store", "product"]))] = " "
    elif kind == "duplicate_rows":
        f = pd.concat([f, f.iloc[[i]]], ignore_index=True)
    elif kind == "drop_rows":
        f = f.drop(index=rng.choice(len(f), size=min(5, len(f) - 1), replace=False))
    elif kind == "nan":
        f.loc[i, "units"] = np.nan
    elif kind == "inf":
        f.loc[i, "p90"] = np.inf
    elif kind == "negative":
        f.loc[i, "units"] = -3.0
    elif kind == "cross_quantiles":
        f.loc[i, "p10"] = 1e6
    elif kind == "second_issue_date":
        f.loc[i, "issued_on"] = "2026-02-23"
    elif kind == "empty_cells":
        f.loc[i, str(rng.choice(list(f.columns)))] = None
    elif kind == "shuffle":
        f = f.sample(frac=1.0, random_state=int(rng.integers(1 << 31)))
    return f


@settings(max_examples=25, deadline=None,
          suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(kinds=st.lists(DAMAGE, min_size=1, max_size=3), seed=st.integers(0, 2**31 - 1))
def test_damaged_forecasts_get_a_verdict_or_a_clear_message(
        make_project: Callable[..., Project], capsys: pytest.CaptureFixture[str],
        kinds: list[str], seed: int) -> None:
    rng = np.random.default_rng(seed)
    frame = forecast_frame(CURRENT)
    for kind in kinds:
        frame = damage(frame, kind, rng)
    project = make_project(forecast=frame)
    code = main(["run", "--config", str(project.config), "-q", "--no-color", "--no-snapshot"])
    out = capsys.readouterr()
    assert code in (0, 1, 2), (kinds, out.err)
    assert "Traceback" not in out.err and "internal error" not in out.err
    if code == 2:
        assert out.err.startswith("accuracy-checks: error: ") and out.err.count("\n") == 1


ACTUALS_DAMAGE = st.sampled_from([
    "drop_column", "text_in_number", "garbage_date", "blank_key", "duplicate_rows",
    "truncate", "nan", "negative", "all_zero", "offset_date", "mapping_repeat",
    "mapping_without_segment",
])


@settings(max_examples=25, deadline=None,
          suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(kinds=st.lists(ACTUALS_DAMAGE, min_size=1, max_size=3), seed=st.integers(0, 2**31 - 1))
def test_damaged_actuals_and_mappings_get_a_verdict_or_a_clear_message(
        make_project: Callable[..., Project], capsys: pytest.CaptureFixture[str],
        kinds: list[str], seed: int) -> None:
    rng = np.random.default_rng(seed)
    actuals = actuals_frame(CURRENT).astype(object)
    mapping = pd.DataFrame({"product": list(PRODUCTS), "category": list(PRODUCTS.values())})
    for kind in kinds:
        i = int(rng.integers(len(actuals))) if len(actuals) else 0
        has = set(actuals.columns)
        if kind == "drop_column":
            actuals = actuals.drop(columns=[actuals.columns[int(rng.integers(len(has)))]])
        elif kind == "text_in_number" and "units_sold" in has and len(actuals):
            actuals.loc[actuals.index[i], "units_sold"] = "lots"
        elif kind == "garbage_date" and "week" in has and len(actuals):
            actuals.loc[actuals.index[i], "week"] = "soon"
        elif kind == "blank_key" and "store" in has and len(actuals):
            actuals.loc[actuals.index[i], "store"] = ""
        elif kind == "duplicate_rows" and len(actuals):
            actuals = pd.concat([actuals, actuals.iloc[[i]]], ignore_index=True)
        elif kind == "truncate":
            actuals = actuals.iloc[: int(rng.integers(0, len(actuals) + 1))]
        elif kind == "nan" and "units_sold" in has and len(actuals):
            actuals.loc[actuals.index[i], "units_sold"] = np.nan
        elif kind == "negative" and "units_sold" in has and len(actuals):
            actuals.loc[actuals.index[i], "units_sold"] = -5.0
        elif kind == "all_zero" and "units_sold" in has:
            actuals["units_sold"] = pd.Series(0.0, index=actuals.index, dtype=object)
        elif kind == "offset_date" and "week" in has and len(actuals):
            actuals.loc[actuals.index[i], "week"] = f"{actuals['week'].iloc[i]}T00:00:00+05:00"
        elif kind == "mapping_repeat":
            mapping = pd.concat([mapping, pd.DataFrame({"product": ["P1"],
                                                        "category": ["plants"]})])
        elif kind == "mapping_without_segment" and "category" in mapping:
            mapping = mapping.drop(columns=["category"])
    project = make_project(actuals=actuals)
    project.write("products.csv", mapping)
    code = main(["run", "--config", str(project.config), "-q", "--no-color", "--no-snapshot"])
    out = capsys.readouterr()
    assert code in (0, 1, 2), (kinds, out.err)
    assert "Traceback" not in out.err and "internal error" not in out.err
    if code == 2:
        assert out.err.startswith("accuracy-checks: error: ") and out.err.count("\n") == 1
