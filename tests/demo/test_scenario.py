"""The invented demo scenario: determinism, file schemas, the planted problems, honesty in time.

Everything here is invented data (see ``accuracy_checks/demo/scenario.py``); the expected figures
are the scenario's own design (e.g. pet-care forecasts scaled by 0.82), not outside references.
The forecaster's own test is in ``test_world.py``, the narrated run in ``test_narrator.py``.
"""

from __future__ import annotations

import datetime as dt
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from accuracy_checks.demo import scenario as demo
from accuracy_checks.demo.scenario import Scenario, generate_scenario
from accuracy_checks.errors import UsageError

FORECAST_COLUMNS = ["store", "product", "week", "units", "p10", "p90", "issued_on"]
ACTUALS_COLUMNS = ["store", "product", "week", "units_sold"]
SEGMENT_NAMES = {s.name for s in demo.SEGMENTS}


@pytest.fixture(scope="module")
def scenario(tmp_path_factory: pytest.TempPathFactory) -> Scenario:
    return generate_scenario(tmp_path_factory.mktemp("demo"))


def read(path: Path) -> pd.DataFrame:
    """An actuals file."""
    return pd.read_csv(path, parse_dates=["week"])


def read_forecast(path: Path) -> pd.DataFrame:
    return pd.read_csv(path, parse_dates=["week", "issued_on"])


def all_files(root: Path) -> dict[str, bytes]:
    return {p.relative_to(root).as_posix(): p.read_bytes()
            for p in sorted(root.rglob("*")) if p.is_file()}


# --------------------------------------------------------------------------- determinism


def test_same_seed_gives_identical_files(tmp_path: Path, scenario: Scenario) -> None:
    again = generate_scenario(tmp_path / "again")
    first, second = all_files(scenario.out_dir), all_files(again.out_dir)
    assert sorted(first) == sorted(second)
    assert len(first) == 1 + 4 + 2 * len(scenario.cycle_dates)  # config, 4 tables, per cycle
    different = [name for name in first if first[name] != second[name]]
    assert different == []
    assert again.planted == scenario.planted


def test_other_seed_gives_other_data(tmp_path: Path, scenario: Scenario) -> None:
    other = generate_scenario(tmp_path / "other", seed=8)
    assert other.actuals_path.read_bytes() != scenario.actuals_path.read_bytes()
    assert other.cycle_dates == scenario.cycle_dates  # the calendar does not depend on the seed


def test_regenerating_removes_files_of_other_dates(tmp_path: Path) -> None:
    generate_scenario(tmp_path, cycles=4)
    small = generate_scenario(tmp_path, cycles=3)
    assert sorted(p.name for p in (tmp_path / "data" / "forecasts").iterdir()) == sorted(
        p.name for p in small.forecast_paths
    )


def test_cycles_out_of_range_is_a_usage_error(tmp_path: Path) -> None:
    assert demo.MAX_CYCLES == 40
    for cycles in (2, demo.MAX_CYCLES + 1):
        with pytest.raises(UsageError, match="3 to 40 cycles"):
            generate_scenario(tmp_path, cycles=cycles)
    assert not (tmp_path / "data").exists()  # refused before writing anything


# --------------------------------------------------------------------------- schemas


def test_calendar(scenario: Scenario) -> None:
    days = [*scenario.earlier_dates, *scenario.cycle_dates]
    assert all(d.weekday() == 0 for d in days)  # Mondays (W-MON)
    assert np.all(np.diff([d.toordinal() for d in days]) == 7)  # weekly, no gap between them
    assert len(scenario.earlier_dates) == 4
    assert len(scenario.cycle_dates) == 6


def test_actuals_schema(scenario: Scenario) -> None:
    a = read(scenario.actuals_path)
    assert list(a.columns) == ACTUALS_COLUMNS
    assert a["units_sold"].dtype == np.int64
    assert (a["units_sold"] >= 0).all()
    assert (a["week"].dt.day_of_week == 0).all()
    assert not a.duplicated(["store", "product", "week"]).any()
    n_weeks = a["week"].nunique()
    assert 100 <= n_weeks <= 110  # about two years
    # every series has every week (explicit zeros), so the frame is a full grid
    assert len(a) == scenario.n_series * n_weeks
    assert a.groupby(["store", "product"]).ngroups == scenario.n_series
    # some intermittent, low-volume series with zeros
    share_zero = (a["units_sold"] == 0).groupby([a["store"], a["product"]]).mean()
    assert (share_zero > 0.5).sum() >= 50


def test_reference_tables(scenario: Scenario) -> None:
    products = pd.read_csv(scenario.products_path)
    assert list(products.columns) == ["product", "category"]
    assert products["product"].is_unique
    assert products["product"].str.fullmatch(r"P\d{4}").all()
    assert 280 <= len(products) <= 320
    assert set(products["category"]) == SEGMENT_NAMES
    stores = pd.read_csv(scenario.stores_path)
    assert list(stores.columns) == ["store", "town"]
    assert stores["store"].tolist() == [f"S{i:02d}" for i in range(1, 9)]
    actual_products = set(read(scenario.actuals_path)["product"])
    assert actual_products <= set(products["product"])  # every sold product has a segment


@pytest.mark.parametrize("which", ["history", "cycles"])
def test_forecast_schema_and_quantile_order(scenario: Scenario, which: str) -> None:
    paths = [scenario.history_path] if which == "history" else list(scenario.forecast_paths)
    for path in paths:
        f = read_forecast(path)
        assert list(f.columns) == FORECAST_COLUMNS, path
        assert not f.isna().any().any(), path
        assert not f.duplicated(["store", "product", "week", "issued_on"]).any(), path
        lag = (f["week"] - f["issued_on"]).dt.days // 7 + 1
        assert lag.between(1, demo.HORIZON).all(), path
        assert ((f["week"] - f["issued_on"]).dt.days % 7 == 0).all(), path
        # quantiles ordered and demand never negative
        assert (f["p10"] >= 0).all(), path
        assert (f["p10"] <= f["units"]).all(), path
        assert (f["units"] <= f["p90"]).all(), path
        assert (f["p10"] < f["p90"]).any(), path
    if which == "cycles":
        for day, path in zip(scenario.cycle_dates, scenario.forecast_paths, strict=True):
            issued = read_forecast(path)["issued_on"].unique()
            assert [pd.Timestamp(x).date() for x in issued] == [day]
            assert path.name == f"forecast_{day.isoformat()}.csv"
    else:
        history = read_forecast(paths[0])
        issued = sorted(pd.Timestamp(x).date() for x in history["issued_on"].unique())
        assert issued == list(scenario.earlier_dates)


def test_config_matches_the_files(scenario: Scenario) -> None:
    from accuracy_checks.measures.catalogue import load_config

    config = load_config(scenario.config_path)
    assert config.forecast.path == scenario.forecast_paths[0].resolve()
    assert config.actuals.path == scenario.cycle_actuals_paths[0].resolve()
    assert config.history_paths == [scenario.history_path.resolve()]
    assert config.segments.mapping == scenario.products_path.resolve()
    assert config.frequency == "W-MON"
    assert config.horizon == demo.HORIZON
    assert config.archive == (scenario.out_dir / ".accuracy_checks" / "archive").resolve()
    # every segment-specific threshold names a real segment
    assert set(config.thresholds.segments) <= SEGMENT_NAMES


# --------------------------------------------------------------------------- honesty in time


def test_no_cycle_sees_later_actuals(scenario: Scenario) -> None:
    full = read(scenario.actuals_path)
    final = pd.Timestamp(scenario.cycle_dates[-1])
    assert full["week"].max() == final - pd.Timedelta(weeks=1)
    for day, path in zip(scenario.cycle_dates, scenario.cycle_actuals_paths, strict=True):
        known = read(path)
        issue = pd.Timestamp(day)
        assert known["week"].max() < issue, path
        # nothing known before the issue date is withheld either
        expected = full.loc[full["week"] < issue].reset_index(drop=True)
        pd.testing.assert_frame_equal(known, expected)


# --------------------------------------------------------------------------- planted problems


def series_of(frame: pd.DataFrame) -> set[tuple[str, str]]:
    return set(zip(frame["store"], frame["product"], strict=True))


def test_missing_store(scenario: Scenario) -> None:
    p = scenario.planted
    assert p.missing_cycle == scenario.cycle_dates[-1]
    active = series_of(read(scenario.cycle_actuals_paths[-1]))
    for day, path in zip(scenario.cycle_dates, scenario.forecast_paths, strict=True):
        f = read_forecast(path)
        stores = set(f["store"])
        if day == p.missing_cycle:
            assert p.missing_store not in stores
            assert len(stores) == demo.N_STORES - 1
            absent = active - series_of(f)
            assert absent and {s for s, _ in absent} == {p.missing_store}
        else:
            assert p.missing_store in stores, day
            assert len(stores) == demo.N_STORES, day
            assert series_of(f) == active, day  # every series forecast


def test_gap_at_one_horizon_step(scenario: Scenario) -> None:
    p = scenario.planted
    assert len(p.gap_series) == demo.GAP_SERIES
    assert p.gap_week == p.gap_cycle + dt.timedelta(weeks=demo.GAP_STEP - 1)
    assert scenario.cycle_dates[0] < p.gap_cycle < scenario.cycle_dates[-1]
    for day, path in zip(scenario.cycle_dates, scenario.forecast_paths, strict=True):
        f = read_forecast(path)
        rows = f.groupby(["store", "product"]).size()
        if day != p.gap_cycle:
            assert (rows == demo.HORIZON).all(), day
            continue
        short = rows[rows < demo.HORIZON]
        assert sorted(short.index) == sorted(p.gap_series)
        assert (short == demo.HORIZON - 1).all()  # one week each, not more
        gap = f.set_index(["store", "product"]).loc[list(p.gap_series)]
        assert pd.Timestamp(p.gap_week) not in set(gap["week"])
        # the missing week sits inside the horizon: weeks on both sides are present
        assert gap["week"].min() == pd.Timestamp(p.gap_cycle)
        assert gap["week"].max() == pd.Timestamp(p.gap_cycle) + pd.Timedelta(weeks=12)


def forecast_vs_actual(scenario: Scenario) -> pd.DataFrame:
    """Every demo-cycle and history forecast row whose week already has actuals."""
    forecasts = pd.concat(
        [read_forecast(scenario.history_path)]
        + [read_forecast(p) for p in scenario.forecast_paths],
        ignore_index=True,
    )
    products = pd.read_csv(scenario.products_path)
    return forecasts.merge(read(scenario.actuals_path), on=["store", "product", "week"]).merge(
        products, on="product"
    )


def test_pet_care_is_biased_about_18_percent_low(scenario: Scenario) -> None:
    p = scenario.planted
    m = forecast_vs_actual(scenario)
    late = (m["issued_on"] >= pd.Timestamp(p.bias_from)).to_numpy()
    pet = (m["category"] == p.biased_segment).to_numpy()
    f = m["units"].to_numpy()
    y = m["units_sold"].to_numpy(dtype=np.float64)

    def relative(mask: np.ndarray) -> float:
        """Σforecast/Σactual − 1 in percent (negative: forecast below actual)."""
        return 100.0 * (f[mask].sum() / y[mask].sum() - 1.0)

    assert late.sum() > 1000 and (pet & late).sum() > 500
    # the planted segment, in the cycles from the bias on: about 18 % too low
    assert relative(pet & late) == pytest.approx(-18.0, abs=4.0)
    # the same segment before: unbiased within a few percent
    assert abs(relative(pet & ~late)) < 5.0
    # the other segments in the same cycles: unbiased within a few percent
    assert abs(relative(~pet & late)) < 5.0
    # in the sign convention of the tool (e = actual − forecast): under-forecast, bias % > 0
    e = y - f
    bias_pct = 100.0 * e[pet & late].sum() / np.abs(y[pet & late]).sum()
    assert 14.0 < bias_pct < 22.0


def test_describe_planted_names_each_problem(scenario: Scenario) -> None:
    text = " ".join(demo.describe_planted(scenario))
    assert "pet-care" in text and "18 %" in text
    assert scenario.planted.missing_store in text
    assert scenario.planted.gap_week.isoformat() in text
