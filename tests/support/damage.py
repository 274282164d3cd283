"""Damaged inputs for the robustness tests: the kinds of damage and how each is done.

Used by tests/cli/test_main_fuzz.py (the gate never crashes on them) and
tests/dask/test_damage_parity.py (both engines give the same answer on them).
"""

from __future__ import annotations

from collections.abc import Callable

import numpy as np
import pandas as pd
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from tests.support.project import (
    CURRENT,
    EARLIER,
    PRODUCTS,
    Project,
    actuals_frame,
    forecast_frame,
)

DAMAGE = st.sampled_from([
    "drop_column", "text_in_number", "garbage_date", "blank_key", "duplicate_rows",
    "drop_rows", "nan", "inf", "negative", "cross_quantiles", "second_issue_date",
    "empty_cells", "shuffle", "leading_zero_key", "other_date_format", "non_finite_text",
    "huge", "repeated_header", "reserved_segment",
])

#: numbers written as text the readers must take as numbers (or missing), never crash on
NON_FINITE = ["inf", "-inf", "nan", "Infinity", "-Infinity", "NaN", "1e308", "-1e308",
              "1.7976931348623157e308"]


def damaged_by(damage: st.SearchStrategy[str], examples: int = 25, *, fixed: bool = False
               ) -> Callable[[Callable[..., None]], Callable[..., None]]:
    """``examples`` of one to three kinds of ``damage`` and a seed. Each example builds its
    own project from the function-scoped fixture's factory, so reusing it is safe.
    ``fixed``: the same examples every run (hypothesis' ``derandomize``)."""
    def wrap(test: Callable[..., None]) -> Callable[..., None]:
        drawn = given(kinds=st.lists(damage, min_size=1, max_size=3),
                      seed=st.integers(0, 2**31 - 1))(test)
        return settings(max_examples=examples, deadline=None, derandomize=fixed,
                        suppress_health_check=[HealthCheck.function_scoped_fixture])(drawn)
    return wrap


def other_date_format(value: object, rng: np.random.Generator) -> object:
    """The same date written day first, month first or as a spreadsheet serial number."""
    try:
        day = pd.Timestamp(str(value))
    except ValueError:
        return value
    kind = int(rng.integers(3))
    if kind == 2:
        return str((day - pd.Timestamp("1899-12-30")).days)
    return day.strftime("%d/%m/%Y" if kind == 0 else "%m/%d/%Y")


def damage_forecast(frame: pd.DataFrame, kind: str, rng: np.random.Generator) -> pd.DataFrame:
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
    elif kind == "leading_zero_key" and list(f.columns).count("product") == 1:
        # numeric-looking keys: 007 and 7 (and 07) are different products
        f["product"] = f["product"].map({"P1": "007", "P2": "7", "P3": "07"}).fillna(
            f["product"])
    elif kind == "other_date_format":
        col = str(rng.choice(["week", "issued_on"]))
        if col in f:
            f.loc[i, col] = other_date_format(f.loc[i, col], rng)
    elif kind == "non_finite_text":
        col = str(rng.choice(["units", "p10", "p90"]))
        if col in f:
            f.loc[i, col] = str(rng.choice(NON_FINITE))
    elif kind == "huge":
        col = str(rng.choice(["units", "p10", "p90"]))
        if col in f:
            f.loc[i, col] = float(rng.choice([1e308, -1e308, 1.7976931348623157e308]))
    elif kind == "repeated_header":
        col = str(rng.choice(list(f.columns)))
        f = pd.concat([f, f[[col]].iloc[:, :1]], axis=1)  # the same name twice in the header
    elif kind == "reserved_segment":
        # a segment column in the forecast itself, holding the all-series label
        f["category"] = pd.Series("plants", index=f.index, dtype=object)
        f.loc[i, "category"] = str(rng.choice(["*", "unassigned", " * "]))
    return f


ACTUALS_DAMAGE = st.sampled_from([
    "drop_column", "text_in_number", "garbage_date", "blank_key", "duplicate_rows",
    "truncate", "nan", "negative", "all_zero", "offset_date", "mapping_repeat",
    "mapping_without_segment", "leading_zero_key", "other_date_format", "non_finite",
    "repeated_header", "mapping_reserved_segment", "mapping_leading_zero_key",
    "mapping_repeated_header", "earlier_huge",
])


def damage_actuals(actuals: pd.DataFrame, mapping: pd.DataFrame, earlier: pd.DataFrame,
                   kind: str, rng: np.random.Generator
                   ) -> tuple[pd.DataFrame, pd.DataFrame, pd.DataFrame]:
    """``kind`` of :data:`ACTUALS_DAMAGE` done to the actuals, the mapping or the earlier
    cycles (the frames as written to the project's files)."""
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
        if mapping.columns.is_unique:
            mapping = pd.concat([mapping, pd.DataFrame({"product": ["P1"],
                                                        "category": ["plants"]})])
        else:  # after a repeated header: the first row once more, column for column
            rows = mapping.to_numpy().tolist()
            mapping = pd.DataFrame([*rows, rows[0]], columns=mapping.columns)
    elif kind == "mapping_without_segment" and "category" in mapping:
        mapping = mapping.drop(columns=["category"])
    elif kind == "leading_zero_key" and "product" in has:
        actuals["product"] = actuals["product"].replace({"P1": "007", "P2": "7"})
    elif kind == "other_date_format" and "week" in has and len(actuals):
        actuals.loc[actuals.index[i], "week"] = other_date_format(actuals["week"].iloc[i],
                                                                   rng)
    elif kind == "non_finite" and "units_sold" in has and len(actuals):
        # non-finite and huge actuals: judged by the actuals' invalid-values check and the
        # overflow-safe sums (measures code, not the readers'); an exit 3 from this branch
        # belongs there
        actuals.loc[actuals.index[i], "units_sold"] = str(rng.choice(NON_FINITE))
    elif kind == "repeated_header" and len(has):
        col = str(rng.choice(list(actuals.columns)))
        actuals = pd.concat([actuals, actuals[[col]].iloc[:, :1]], axis=1)
    elif kind == "mapping_reserved_segment" and "category" in mapping:
        mapping = mapping.assign(category=mapping["category"].astype(object))
        mapping.loc[mapping.index[int(rng.integers(len(mapping)))], "category"] = str(
            rng.choice(["*", "unassigned"]))
    elif kind == "mapping_leading_zero_key":
        mapping = mapping.assign(product=mapping["product"].replace({"P1": "007",
                                                                     "P2": "7"}))
    elif kind == "mapping_repeated_header":
        col = str(rng.choice(list(mapping.columns)))
        mapping = pd.concat([mapping, mapping[[col]].iloc[:, :1]], axis=1)
    elif kind == "earlier_huge":
        # a huge earlier forecast: sums beyond float64 (overflow handling is the
        # measures' part; an exit 3 from this branch belongs there)
        earlier = earlier.astype({"units": object})
        earlier.loc[int(rng.integers(len(earlier))), "units"] = str(
            rng.choice(["1e308", "-1e308", "inf"]))
    return actuals, mapping, earlier


def damaged_forecast(kinds: list[str], rng: np.random.Generator) -> pd.DataFrame:
    """The small project's current forecast with ``kinds`` of :data:`DAMAGE` done to it."""
    frame = forecast_frame(CURRENT)
    for kind in kinds:
        frame = damage_forecast(frame, kind, rng)
    return frame


def damaged_project(make_project: Callable[..., Project], kinds: list[str],
                    rng: np.random.Generator, forecast: pd.DataFrame | None = None) -> Project:
    """The small project with ``kinds`` of :data:`ACTUALS_DAMAGE` done to its actuals,
    mapping and earlier cycles (and ``forecast`` in place of its own, when given)."""
    actuals = actuals_frame(CURRENT).astype(object)
    mapping = pd.DataFrame({"product": list(PRODUCTS), "category": list(PRODUCTS.values())})
    earlier = pd.concat([forecast_frame(d) for d in EARLIER], ignore_index=True)
    for kind in kinds:
        actuals, mapping, earlier = damage_actuals(actuals, mapping, earlier, kind, rng)
    project = make_project(forecast=forecast, actuals=actuals, earlier=earlier)
    project.write("products.csv", mapping)
    return project
