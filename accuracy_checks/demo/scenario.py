"""The invented demo: a fictional chain of garden centres and a few weeks of forecast cycles.

Nothing here is real: no company, brand or person. Eight stores (``S01``–``S08``) sell about
300 products (``P0001``…) in five segments. Weekly unit demand is simulated, a simple forecaster
is run once per weekly cycle on the actuals known before its issue date, and a few problems are
planted in the forecasts so that the gate has something to find:

- ``pet-care`` forecasts are 18 % too low from the fourth-last cycle on (the 3rd of 6):
  an under-forecast bias that shows once those cycles are measured against actuals: a warning
  when half the lag-1 window is biased, a failure when three quarters are;
- in that same cycle a few series lack one week in the middle of the horizon (a gap: warning);
- in the final cycle every series of one store is absent (a missing store: failure).

With the defaults (6 cycles, seed 7) the verdicts read WARN, WARN, WARN, PASS, WARN, FAIL: the
first two warn mildly (lag-4 bias of small segments measured on one or two weeks), the third
shows the gap, the fifth the pet-care bias building up and the sixth fails on the missing store
and the pet-care bias.

:func:`generate_scenario` writes the files (this module: data only, no engine);
:func:`~accuracy_checks.demo.narrator.run_demo` runs the gate on each cycle in order, the way
a weekly job would, and narrates the verdicts.

The demand and the forecaster are in :mod:`accuracy_checks.demo.world`.
"""

from __future__ import annotations

import datetime as dt
import shutil
from collections.abc import Sequence
from dataclasses import dataclass
from pathlib import Path

import numpy as np
import pyarrow as pa
import pyarrow.csv as pa_csv

from accuracy_checks.demo.world import (
    HORIZON,
    LEVEL_WEEKS,
    N_STORES,
    SEASON_WEEKS,
    SEGMENTS,
    World,
    forecast_table,
    simulate,
)
from accuracy_checks.errors import UsageError

__all__ = [
    "CONFIG_MARKER",
    "FIRST_DEMO_CYCLE",
    "HORIZON",
    "N_STORES",
    "SEGMENTS",
    "PlantedProblems",
    "Scenario",
    "describe_planted",
    "generate_scenario",
    "is_demo_folder",
    "prepare_folder",
]

#: Issue date of the first demo cycle (a Monday in early spring, when garden centres get busy).
FIRST_DEMO_CYCLE = dt.date(2025, 4, 7)
#: Earlier cycles written to the history file, issued weekly before the first demo cycle.
EARLIER_CYCLES = 4
#: Weeks of actuals before the final cycle's issue date (about two years).
HISTORY_WEEKS = 104
#: Most demo cycles: the first earlier cycle still needs SEASON_WEEKS + LEVEL_WEEKS + 1 weeks.
MAX_CYCLES = HISTORY_WEEKS - EARLIER_CYCLES - (SEASON_WEEKS + LEVEL_WEEKS + 1) + 1

#: Invented town names (no real places intended).
TOWNS = (
    "Mossbury Cross",
    "Fernwhistle",
    "Quillhaven",
    "Bramblewick",
    "Pebblecombe",
    "Wrenfold",
    "Cloverdeep",
    "Hollyrise",
)

#: The planted problems.
BIASED_SEGMENT = "pet-care"
BIAS_FACTOR = 0.82  # forecasts 18 % below what the forecaster would say
MISSING_STORE = "S06"
GAP_SERIES = 5
GAP_STEP = 7  # the 7th of 13 weeks: the middle of the horizon

#: Header of the generated config; the demos only clear folders that carry it.
CONFIG_MARKER = "# accuracy-checks demo scenario (invented data)"


@dataclass(frozen=True)
class PlantedProblems:
    """Where the demo's planted problems sit (tests and the narration read this)."""

    bias_from: dt.date
    missing_cycle: dt.date
    gap_cycle: dt.date
    gap_week: dt.date
    gap_series: tuple[tuple[str, str], ...]
    biased_segment: str = BIASED_SEGMENT
    bias_factor: float = BIAS_FACTOR
    missing_store: str = MISSING_STORE


class _File:
    """A file of a scenario, by its path under the scenario's folder (read as an attribute of
    the :class:`Scenario`: the full path)."""

    def __init__(self, *parts: str) -> None:
        self.parts = parts

    def __get__(self, scenario: Scenario, owner: type | None = None) -> Path:
        return scenario.out_dir.joinpath(*self.parts)


@dataclass(frozen=True)
class Scenario:
    """A generated scenario: its folder, the issue dates of its cycles, its planted problems.

    The paths of its files (all under :attr:`out_dir`) are derived from the folder: its
    layout is written down here once, and :func:`generate_scenario` writes to these paths.
    """

    out_dir: Path
    #: issue dates (Mondays) of the demo cycles
    cycle_dates: tuple[dt.date, ...]
    #: issue dates of the earlier cycles in the history file
    earlier_dates: tuple[dt.date, ...]
    planted: PlantedProblems
    n_series: int

    config_path = _File("accuracy-checks.yaml")
    #: every actual: about two years up to the final cycle's issue date
    actuals_path = _File("data", "actuals.csv")
    products_path = _File("data", "products.csv")
    stores_path = _File("data", "stores.csv")
    #: the earlier cycles' forecasts
    history_path = _File("data", "earlier_forecasts.csv")

    @property
    def forecast_paths(self) -> tuple[Path, ...]:
        """The forecast file of each demo cycle, in issue order."""
        return tuple(self.out_dir / "data" / "forecasts" / f"forecast_{day.isoformat()}.csv"
                     for day in self.cycle_dates)

    @property
    def cycle_actuals_paths(self) -> tuple[Path, ...]:
        """The actuals known at each demo cycle (weeks before its issue date), in issue
        order."""
        return tuple(self.out_dir / "data" / "actuals" / f"actuals_{day.isoformat()}.csv"
                     for day in self.cycle_dates)


def is_demo_folder(out_dir: Path) -> bool:
    """Whether ``out_dir`` holds a config written by the demo (:data:`CONFIG_MARKER`)."""
    try:
        return (out_dir / "accuracy-checks.yaml").read_text(encoding="utf-8").startswith(
            CONFIG_MARKER)
    except OSError:
        return False


def prepare_folder(out_dir: Path, *, run_state: Sequence[str] = (".accuracy_checks",),
                   hint: str = "Pass a new or empty folder.") -> None:
    """Refuse a folder that holds someone else's work (:class:`UsageError` ending in
    ``hint``); remove an earlier demo's run state (the subfolders ``run_state``)."""
    if out_dir.exists() and not out_dir.is_dir():
        raise UsageError(f"Demo output {out_dir} exists and is not a folder; pass a folder path.")
    if out_dir.is_dir() and any(out_dir.iterdir()) and not is_demo_folder(out_dir):
        raise UsageError(
            f"Demo output folder {out_dir} is not empty and does not hold an earlier demo "
            f"(no accuracy-checks.yaml written by the demo). {hint}"
        )
    for name in run_state:
        if (out_dir / name).is_dir():
            shutil.rmtree(out_dir / name)


def _csv_bytes(table: pa.Table) -> bytes:
    """Plain CSV: an unquoted header, no quotes (no value holds a comma, quote or newline)."""
    sink = pa.BufferOutputStream()
    sink.write((",".join(table.column_names) + "\n").encode("utf-8"))
    pa_csv.write_csv(table, sink, pa_csv.WriteOptions(include_header=False, quoting_style="none"))
    return bytes(sink.getvalue())


def _write_csv(table: pa.Table, path: Path) -> None:
    path.parent.mkdir(parents=True, exist_ok=True)
    path.write_bytes(_csv_bytes(table))


def _drop_rows(table: pa.Table, drop: np.ndarray) -> pa.Table:
    return table.filter(pa.array(~drop))


def _config_text(forecast: str, actuals: str) -> str:
    return f"""{CONFIG_MARKER}
# The demo runs every cycle with --forecast/--actuals overrides; as written, this file checks
# the first demo cycle against the actuals known on its issue date.
version: 1
forecast:
  path: {forecast}
  keys: [store, product]
  period: week
  value: units
  issued: issued_on
  quantiles: {{0.1: p10, 0.9: p90}}
actuals:
  path: {actuals}
  period: week
  value: units_sold
history: data/earlier_forecasts.csv
archive: .accuracy_checks/archive
store: sqlite:///.accuracy_checks/audit.db
frequency: W-MON
horizon: {HORIZON}
segments:
  columns: [category]
  mapping: data/products.csv
coverage:
  active_periods: 8
evaluation:
  lags: [1, 4]
  window: 4
  min_obs: 20
thresholds:
  default:
    bias_pct: {{warn: 5, fail: 10}}
    wape: {{warn: 35, fail: 50}}
    missing_series_pct: {{warn: 0, fail: 1}}
    incomplete_series: {{warn: 0, fail: 50}}
  segments:
    seasonal-plants:            # spring peak: harder to forecast
      wape: {{warn: 45, fail: 60}}
    garden-furniture:           # few, slow-selling lines
      wape: {{warn: 60, fail: 80}}
      bias_pct: {{warn: 8, fail: 15}}
    pet-care:                   # keeps well; running out costs more than overstock
      bias_pct: {{warn: [-8, 5], fail: [-15, 10]}}
"""


def _clear_own_files(out_dir: Path) -> None:
    """Remove files a previous generation wrote (their names carry dates that may differ)."""
    for folder in (out_dir / "data" / "forecasts", out_dir / "data" / "actuals"):
        if folder.is_dir():
            for f in folder.glob("*_????-??-??.csv"):
                f.unlink()


def generate_scenario(out_dir: Path, *, cycles: int = 6, seed: int = 7) -> Scenario:
    """Write the invented scenario into ``out_dir`` and describe it.

    Files (relative to ``out_dir``): ``accuracy-checks.yaml``; ``data/actuals.csv`` (store,
    product, week, units_sold: about two years up to the final cycle's issue date);
    ``data/actuals/actuals_<date>.csv`` (the same, cut at each demo cycle's issue date);
    ``data/products.csv`` (product, category); ``data/stores.csv`` (store, town);
    ``data/earlier_forecasts.csv`` (the four weekly cycles before the first demo cycle) and
    ``data/forecasts/forecast_<date>.csv`` per demo cycle (store, product, week, units, p10,
    p90, issued_on). The same ``seed`` gives byte-identical files.

    ``cycles`` runs from 3 (a clean cycle, the gap, the failing final cycle) to
    :data:`MAX_CYCLES` (40: the forecaster needs 61 weeks of actuals before the first cycle).
    """
    if not 3 <= cycles <= MAX_CYCLES:
        raise UsageError(
            f"the demo runs 3 to {MAX_CYCLES} cycles (a clean cycle, the gap, the failing final "
            f"cycle; the forecaster needs a year of actuals before the first); got {cycles}"
        )
    out_dir = Path(out_dir)
    (out_dir / "data").mkdir(parents=True, exist_ok=True)
    _clear_own_files(out_dir)
    rng = np.random.default_rng(seed)
    final_issue = FIRST_DEMO_CYCLE + dt.timedelta(weeks=cycles - 1)
    world = simulate(rng, final_issue - dt.timedelta(weeks=HISTORY_WEEKS), HISTORY_WEEKS)
    cycle_dates = tuple(FIRST_DEMO_CYCLE + dt.timedelta(weeks=k) for k in range(cycles))
    earlier_dates = tuple(
        FIRST_DEMO_CYCLE - dt.timedelta(weeks=EARLIER_CYCLES - k) for k in range(EARLIER_CYCLES)
    )
    planted, gap_rows = _plant(world, rng, cycle_dates)
    scenario = Scenario(out_dir, cycle_dates, earlier_dates, planted, len(world.store))
    _write_actuals(world, scenario)
    _write_reference_tables(world, scenario)
    # earlier cycles (clean) → history file
    _write_csv(
        pa.concat_tables([forecast_table(world, world.index_of(day)) for day in earlier_dates]),
        scenario.history_path,
    )
    _write_forecasts(world, scenario, gap_rows)
    scenario.config_path.write_text(
        _config_text(
            forecast=scenario.forecast_paths[0].relative_to(out_dir).as_posix(),
            actuals=scenario.cycle_actuals_paths[0].relative_to(out_dir).as_posix(),
        ),
        encoding="utf-8",
    )
    return scenario


def _plant(
    world: World, rng: np.random.Generator, cycle_dates: tuple[dt.date, ...]
) -> tuple[PlantedProblems, np.ndarray]:
    """Where the problems go, and the rows (series) of the gap.

    Positions count from the end, so any number of cycles ≥ 3 tells the same story. The gap
    takes a few steady sellers (sales in every recent week) outside the missing store.
    """
    cycles = len(cycle_dates)
    gap_cycle = cycle_dates[max(1, cycles - 4)]
    recent = world.units[:, world.index_of(gap_cycle) - LEVEL_WEEKS : world.index_of(gap_cycle)]
    steady = np.flatnonzero((recent > 0).all(axis=1) & (world.store != MISSING_STORE))
    gap_rows = np.sort(rng.choice(steady, size=GAP_SERIES, replace=False))
    planted = PlantedProblems(
        bias_from=cycle_dates[max(1, cycles - 4)],
        missing_cycle=cycle_dates[-1],
        gap_cycle=gap_cycle,
        gap_week=gap_cycle + dt.timedelta(weeks=GAP_STEP - 1),
        gap_series=tuple((str(world.store[i]), str(world.product[i])) for i in gap_rows),
    )
    return planted, gap_rows


def _write_actuals(world: World, scenario: Scenario) -> None:
    """Every actual, week by week (as a weekly feed appends them), and its prefix known at each
    cycle: the file cut before the first row of the cycle's issue week."""
    n_series = scenario.n_series
    actuals = pa.table(
        {
            "store": np.tile(world.store, HISTORY_WEEKS),
            "product": np.tile(world.product, HISTORY_WEEKS),
            "week": pa.array(np.repeat(world.weeks, n_series), pa.date32()),
            "units_sold": world.units.T.ravel(),
        }
    )
    text = _csv_bytes(actuals)
    line_ends = np.flatnonzero(np.frombuffer(text, dtype=np.uint8) == ord("\n"))
    scenario.actuals_path.write_bytes(text)
    for day, path in zip(scenario.cycle_dates, scenario.cycle_actuals_paths, strict=True):
        rows = world.index_of(day) * n_series  # weeks before the issue date; + 1 header line
        path.parent.mkdir(exist_ok=True)
        path.write_bytes(text[: line_ends[rows] + 1])


def _write_reference_tables(world: World, scenario: Scenario) -> None:
    """The segment (category) of each product; the town of each store."""
    seg_names = np.array([s.name for s in SEGMENTS])
    _write_csv(
        pa.table({"product": world.product_ids, "category": seg_names[world.product_segment]}),
        scenario.products_path,
    )
    store_ids = np.unique(world.store)
    _write_csv(
        pa.table({"store": store_ids, "town": list(TOWNS[: len(store_ids)])}),
        scenario.stores_path,
    )


def _write_forecasts(world: World, scenario: Scenario, gap_rows: np.ndarray) -> None:
    """Each demo cycle's forecast with the planted problems: the bias from its cycle on, the
    gap in its cycle, the missing store in the final cycle."""
    p, n_series = scenario.planted, scenario.n_series
    biased = np.array([s.name for s in SEGMENTS])[world.segment_of_series] == p.biased_segment
    factor = np.where(biased, p.bias_factor, 1.0)
    store_of_row = np.repeat(world.store, HORIZON)
    step_of_row = np.tile(np.arange(1, HORIZON + 1), n_series)
    gap_of_row = np.repeat(np.isin(np.arange(n_series), gap_rows), HORIZON) & (
        step_of_row == GAP_STEP
    )
    for day, path in zip(scenario.cycle_dates, scenario.forecast_paths, strict=True):
        table = forecast_table(
            world, world.index_of(day), factor=factor if day >= p.bias_from else None
        )
        if day == p.gap_cycle:
            table = _drop_rows(table, gap_of_row)
        if day == p.missing_cycle:
            table = _drop_rows(table, store_of_row == p.missing_store)
        _write_csv(table, path)


def describe_planted(scenario: Scenario) -> Sequence[str]:
    """One line per planted problem, for readers of the generated data."""
    p = scenario.planted
    return (
        f"{p.biased_segment} forecasts are {round((1 - p.bias_factor) * 100)} % too low "
        f"from the cycle of {p.bias_from} on",
        f"{len(p.gap_series)} series lack the week of {p.gap_week} in the cycle of {p.gap_cycle}",
        f"store {p.missing_store} is absent from the cycle of {p.missing_cycle}",
    )
