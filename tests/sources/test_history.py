"""The actuals history read a few periods at a time and reduced to the actuals index
(sources/history.py): the same index, the same series and every result of a run the same as
with every row held; any row the reduction would lose makes it read every row instead."""

from __future__ import annotations

from collections.abc import Callable
from pathlib import Path

import numpy as np
import pandas as pd
import pyarrow as pa
import pyarrow.parquet as pq
import pytest

from accuracy_checks.engine import evaluate
from accuracy_checks.errors import InputError
from accuracy_checks.evaluation.baselines import ActualsIndex
from accuracy_checks.evaluation.join import finite_actuals
from accuracy_checks.measures.catalogue import load_config
from accuracy_checks.sources.history import read_reduced
from accuracy_checks.sources.load import load_inputs
from accuracy_checks.sources.prereads import actual_series
from accuracy_checks.sources.readers import read_actuals
from tests.support.project import CONFIG, CURRENT, Project

KEYS = ["store", "product"]
WEEKS = pd.date_range("2024-09-02", CURRENT - pd.Timedelta(weeks=1), freq="W-MON")  # 78


def long_actuals(seed: int = 1) -> pd.DataFrame:
    """78 weeks of 2 stores × 6 products with gaps (missing rows), zeros and a series that
    ends early; every value finite."""
    rng = np.random.default_rng(seed)
    stores, products = ["S1", "S2"], [f"P{i}" for i in range(1, 7)]
    grid = pd.MultiIndex.from_product([stores, products, WEEKS], names=["store", "product",
                                                                        "week"]).to_frame(
        index=False)
    grid["units_sold"] = rng.integers(0, 60, len(grid)).astype(float)
    keep = rng.random(len(grid)) > 0.1
    keep &= ~((grid["product"] == "P6") & (grid["week"] > WEEKS[30]))
    return grid.loc[keep].reset_index(drop=True)


def write_parquet(path: Path, frame: pd.DataFrame, *, layout: str = "by_week") -> None:
    """``by_week``: one row group per week; ``sorted``: sorted by week in row groups of 50
    (some hold two weeks); ``shuffled``: the rows shuffled in row groups of 50 (each spans
    most weeks)."""
    frame = frame.assign(week=frame["week"].astype("datetime64[us]"))
    if layout == "shuffled":
        frame = frame.sample(frac=1.0, random_state=3).reset_index(drop=True)
    elif layout == "sorted":
        frame = frame.sort_values("week", kind="stable").reset_index(drop=True)
    table = pa.Table.from_pandas(frame, preserve_index=False)
    if layout == "by_week":
        with pq.ParquetWriter(path, table.schema) as writer:
            for week in frame["week"].unique():
                writer.write_table(pa.Table.from_pandas(frame.loc[frame["week"] == week],
                                                        schema=table.schema,
                                                        preserve_index=False))
    else:
        pq.write_table(table, path, row_group_size=50)


def every_measure() -> str:
    """The small project's config with every measure and a 6-week tracking window."""
    text = CONFIG.format(extra="")
    assert "\n  min_obs: 2\n" in text
    return text.replace("\n  min_obs: 2\n",
                        "\n  min_obs: 2\n  measures: [all]\n  tracking_window: 6\n")


@pytest.fixture
def long_project(make_project: Callable[..., Project]) -> Callable[..., Project]:
    """The small project with 78 weeks of Parquet actuals and every measure (MASE, FVA…)."""

    def make(actuals: pd.DataFrame | None = None, *, layout: str = "by_week") -> Project:
        text = every_measure().replace("data/actuals.csv", "data/actuals.parquet")
        project = make_project(config_text=text)
        write_parquet(project.data / "actuals.parquet",
                      long_actuals() if actuals is None else actuals, layout=layout)
        return project

    return make


@pytest.mark.parametrize(("layout", "chunk_rows"), [
    ("by_week", 1), ("by_week", 100), ("by_week", 10_000), ("sorted", 100), ("sorted", 10_000)])
def test_reduced_index_answers_as_the_index_of_every_row(
        long_project: Callable[..., Project], storage: str, layout: str,
        chunk_rows: int) -> None:
    config = load_config(long_project(layout=layout).config)
    reduced = read_reduced(config, None, keep=8, chunk_rows=chunk_rows)
    assert reduced is not None
    every = read_actuals(config)
    # a run's frames share sorted categories (sources/load.py), so its index numbers the
    # series in key order, as the reduced index does
    every = every.assign(**{k: every[k].cat.set_categories(sorted(every[k].cat.categories))
                            for k in KEYS})
    whole = ActualsIndex(finite_actuals(every), KEYS, "W-MON")
    index = reduced.index
    assert index._dense == whole._dense == (storage == "dense")
    assert (index.n_series, index.p0, index.span) == (whole.n_series, whole.p0, whole.span)
    queries = pd.concat([every[[*KEYS, "period"]],
                         pd.DataFrame({"store": ["S9"], "product": ["P1"],
                                       "period": [WEEKS[3]]})], ignore_index=True)
    codes = index.codes_of(queries)
    np.testing.assert_array_equal(codes, whole.codes_of(queries))
    assert codes[-1] == -1
    pos = whole.positions(queries["period"])
    for shift in (0, 3):
        np.testing.assert_array_equal(index.values_at(codes, pos - shift),
                                      whole.values_at(codes, pos - shift))
        np.testing.assert_array_equal(index.last_value_before(codes, pos - shift),
                                      whole.last_value_before(codes, pos - shift))
    for m, before in ((1, whole.p0 + 40), (52, whole.p0 + 70), (4, whole.p0 + 200)):
        for got, want in zip(index.scales(m, before), whole.scales(m, before), strict=True):
            np.testing.assert_array_equal(got, want)
    # the rows of the last 8 periods, every series, every row read
    last = sorted(every["period"].unique())[-8:]
    kept = every.loc[every["period"].isin(last)]
    assert len(reduced.rows) == len(kept) and reduced.n_read == len(every)
    assert set(reduced.rows["period"]) == set(last)
    series = {tuple(r) for r in reduced.series[KEYS].astype(str).itertuples(index=False)}
    assert series == {tuple(r) for r in actual_series(config)[KEYS].astype(str).itertuples(
        index=False)}


def result_dicts(project: Project, *, reduce: bool, reduced: bool | None = None
                 ) -> tuple[list[dict[str, object]], int]:
    config = load_config(project.config)
    inputs = load_inputs(config, reduce_history=reduce)
    assert (inputs.history is not None) == (reduce if reduced is None else reduced)
    return [r.to_dict() for r in evaluate(config, inputs)], len(inputs.actuals)


@pytest.mark.parametrize("layout", ["by_week", "sorted", "shuffled"])
def test_a_run_on_reduced_actuals_gives_every_result_of_a_run_on_every_row(
        long_project: Callable[..., Project], layout: str) -> None:
    # a shuffled file is read whole (each chunk would open every row group)
    project = long_project(layout=layout)
    reduced, n_reduced = result_dicts(project, reduce=True, reduced=layout != "shuffled")
    every, n_every = result_dicts(project, reduce=False)
    assert (n_reduced < n_every) == (layout != "shuffled")
    assert reduced == every
    measured = {r["measure"] for r in reduced if r.get("value") is not None}
    assert {"mase", "fva_naive", "fva_seasonal_naive", "tracking_signal"} <= measured


def with_old(frame: pd.DataFrame, **change: object) -> pd.DataFrame:
    """``frame`` with the row of S1/P1 in week 5 changed (or dropped: ``drop=True``)."""
    at = (frame["store"] == "S1") & (frame["product"] == "P1") & (frame["week"] == WEEKS[5])
    if change.pop("drop", False):
        return frame.loc[~at].reset_index(drop=True)
    out = frame.copy()
    for column, value in change.items():
        out.loc[at, column] = value
    return out


@pytest.mark.parametrize("case", ["missing", "infinite", "empty_week"])
def test_rows_the_reduction_would_lose_make_it_read_every_row(
        long_project: Callable[..., Project], case: str) -> None:
    frame = long_actuals()
    if case == "missing":
        frame = with_old(frame, units_sold=np.nan)
    elif case == "infinite":
        frame = with_old(frame, units_sold=np.inf)
    else:  # a week whose every actual is empty: not a period with actuals
        frame = pd.concat([frame, pd.DataFrame({"store": "S1", "product": "P1",
                                                "week": [WEEKS[0] - pd.Timedelta(weeks=1)],
                                                "units_sold": [np.nan]})], ignore_index=True)
    project = long_project(frame)
    config = load_config(project.config)
    assert read_reduced(config, None, keep=8) is None
    reduced, n_reduced = result_dicts(project, reduce=False)
    inputs = load_inputs(config, reduce_history=True)
    assert inputs.history is None and len(inputs.actuals) == n_reduced
    assert [r.to_dict() for r in evaluate(config, inputs)] == reduced


@pytest.mark.parametrize("case", ["repeated", "missing_key"])
def test_older_rows_refused_by_the_reader_are_refused_as_for_every_row(
        long_project: Callable[..., Project], case: str) -> None:
    # the refusal names the whole file's rows, not a chunk's
    frame = long_actuals()
    if case == "repeated":
        frame = pd.concat([frame, frame.iloc[[40, 41]]], ignore_index=True)
    else:
        frame = frame.assign(store=frame["store"].astype(object))
        frame.loc[40, "store"] = None
    config = load_config(long_project(frame).config)
    with pytest.raises(InputError) as every:
        load_inputs(config)
    with pytest.raises(InputError) as reduced:
        load_inputs(config, reduce_history=True)
    assert str(reduced.value) == str(every.value)
    assert ("rows that repeat" if case == "repeated" else "is empty in 1 rows") in str(every.value)


def test_csv_actuals_are_read_whole(make_project: Callable[..., Project]) -> None:
    config = load_config(make_project(config_text=every_measure()).config)
    assert read_reduced(config, None, keep=2) is None
    assert load_inputs(config, reduce_history=True).history is None
