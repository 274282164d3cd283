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

:func:`generate_scenario` writes the files; :func:`run_demo` runs the gate on each cycle in
order, the way a weekly job would, and narrates the verdicts.

Data model (all demand in units per week; weeks start on Monday, frequency ``W-MON``)::

    mean[i, t]  = level_i · season_g(i)(t) · growth(t) · shock_g(i)(t)
    units[i, t] ~ NegativeBinomial(mean = mean[i, t], shape = k_g(i))

with ``level_i`` lognormal (store × product × series effects), ``season_g`` a smooth yearly
profile per segment whose peak moves by a few days from year to year, ``growth`` +4 % a year and
``shock_g`` a common weekly shock per segment (weather, promotions).

Forecast of series ``i`` issued at week ``c`` for target week ``t = c + h`` (``h = 0 … 12``),
computed only from the actuals of weeks before ``c``::

    level_i = mean(units[i, c−8 : c])
    ratio_g = T̃_g(t − 52) / mean(T̃_g(c − 60 : c − 52))
    units   = level_i · ratio_g(i)          (never below 0)

where ``T̃_g`` is the segment's weekly total smoothed over three weeks: last year's seasonal
shape around the same weeks, scaled to this year's recent level. ``p10``/``p90`` come from a
normal approximation of the negative binomial spread, widening with the horizon.
"""

from __future__ import annotations

import datetime as dt
import shutil
from collections.abc import Callable, Sequence
from dataclasses import dataclass
from pathlib import Path
from typing import TYPE_CHECKING

import numpy as np
import pyarrow as pa
import pyarrow.csv as pa_csv

from accuracy_checks.errors import UsageError

if TYPE_CHECKING:  # the engine is only needed by run_demo
    from accuracy_checks.results import CheckResult, RunReport

__all__ = [
    "FIRST_DEMO_CYCLE",
    "HORIZON",
    "SEGMENTS",
    "PlantedProblems",
    "Scenario",
    "SegmentSpec",
    "describe_planted",
    "generate_scenario",
    "run_demo",
    "top_findings",
]

#: Issue date of the first demo cycle (a Monday in early spring, when garden centres get busy).
FIRST_DEMO_CYCLE = dt.date(2025, 4, 7)
#: Weeks each cycle forecasts.
HORIZON = 13
#: Earlier cycles written to the history file, issued weekly before the first demo cycle.
EARLIER_CYCLES = 4
#: Weeks of actuals before the final cycle's issue date (about two years).
HISTORY_WEEKS = 104
#: Weeks of actuals the forecaster uses for a series' recent level.
LEVEL_WEEKS = 8
#: Length of a year on the weekly grid.
SEASON_WEEKS = 52
#: Most demo cycles: the first earlier cycle still needs SEASON_WEEKS + LEVEL_WEEKS + 1 weeks.
MAX_CYCLES = HISTORY_WEEKS - EARLIER_CYCLES - (SEASON_WEEKS + LEVEL_WEEKS + 1) + 1

N_STORES = 8
#: Share of the catalogue each store carries.
RANGE_SHARE = 0.85
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

#: Header of the generated config; :func:`run_demo` only clears folders that carry it.
CONFIG_MARKER = "# accuracy-checks demo scenario (invented data)"


@dataclass(frozen=True)
class SegmentSpec:
    """One product segment of the invented catalogue.

    ``median`` is the median weekly units of a series; ``amplitude`` the strength of the
    yearly season (0 = flat; the peak-to-trough ratio is ``exp(2·amplitude)``), peaking in
    week ``peak_week`` of the year; ``shape`` the negative binomial shape (smaller = noisier);
    ``shock`` the standard deviation of the segment's common weekly log-shock.
    """

    name: str
    products: int
    median: float
    amplitude: float
    peak_week: float
    shape: float
    shock: float


SEGMENTS: tuple[SegmentSpec, ...] = (
    SegmentSpec("seasonal-plants", 90, 9.0, 1.1, 16.0, 8.0, 0.04),
    SegmentSpec("tools", 55, 9.0, 0.25, 18.0, 12.0, 0.02),
    SegmentSpec("pet-care", 60, 14.0, 0.0, 1.0, 30.0, 0.02),
    SegmentSpec("soil-and-feed", 65, 11.0, 0.6, 14.0, 12.0, 0.03),
    SegmentSpec("garden-furniture", 30, 4.0, 0.9, 24.0, 6.0, 0.03),
)


@dataclass(frozen=True)
class PlantedProblems:
    """Where the demo's planted problems sit (tests and the narration read this)."""

    biased_segment: str
    bias_factor: float
    bias_from: dt.date
    missing_store: str
    missing_cycle: dt.date
    gap_cycle: dt.date
    gap_week: dt.date
    gap_series: tuple[tuple[str, str], ...]


@dataclass(frozen=True)
class Scenario:
    """Paths of a generated scenario and the issue dates of its cycles."""

    out_dir: Path
    config_path: Path
    actuals_path: Path
    products_path: Path
    stores_path: Path
    history_path: Path
    #: forecast file of each demo cycle, in issue order
    forecast_paths: tuple[Path, ...]
    #: actuals known at each demo cycle (weeks before its issue date), in issue order
    cycle_actuals_paths: tuple[Path, ...]
    #: issue dates (Mondays) of the demo cycles
    cycle_dates: tuple[dt.date, ...]
    #: issue dates of the earlier cycles in the history file
    earlier_dates: tuple[dt.date, ...]
    planted: PlantedProblems
    n_series: int


def season_profile(week_of_year: np.ndarray, amplitude: float, peak_week: float) -> np.ndarray:
    """Yearly seasonal factor, mean 1 over a year: ``exp(a·cos(2π(w − peak)/52)) / I0(a)``.

    ``I0`` is the modified Bessel function of order 0 (:func:`numpy.i0`), the yearly mean of
    the numerator, so the profile averages 1.

    >>> w = np.arange(52.0)
    >>> p = season_profile(w, 1.0, 16.0)
    >>> round(float(p.mean()), 6), int(np.argmax(p))
    (1.0, 16)
    >>> season_profile(w, 0.0, 1.0).tolist() == [1.0] * 52
    True
    """
    return np.exp(amplitude * np.cos(2 * np.pi * (week_of_year - peak_week) / 52.0)) / float(
        np.i0(amplitude)
    )


# --------------------------------------------------------------------------- simulation


@dataclass(frozen=True)
class _World:
    """The simulated catalogue and demand (series × weeks)."""

    store: np.ndarray  # str, one per series
    product: np.ndarray  # str, one per series
    segment_of_series: np.ndarray  # int index into SEGMENTS
    product_ids: np.ndarray
    product_segment: np.ndarray
    weeks: np.ndarray  # datetime64[D], the Mondays of the actuals grid
    units: np.ndarray  # int64 (series, weeks)


def _simulate(rng: np.random.Generator, first_week: dt.date, n_weeks: int) -> _World:
    n_seg = len(SEGMENTS)
    seg_sizes = np.array([s.products for s in SEGMENTS])
    product_segment = rng.permutation(np.repeat(np.arange(n_seg), seg_sizes))
    n_products = len(product_segment)
    product_ids = np.char.add("P", np.char.zfill(np.arange(1, n_products + 1).astype(str), 4))
    store_ids = np.char.add("S", np.char.zfill(np.arange(1, N_STORES + 1).astype(str), 2))

    carried = rng.random((N_STORES, n_products)) < RANGE_SHARE
    s_idx, p_idx = np.nonzero(carried)  # store-major order: S01's products first
    seg = product_segment[p_idx]

    median = np.array([s.median for s in SEGMENTS])[seg]
    store_effect = rng.normal(0.0, 0.25, N_STORES)
    product_effect = rng.normal(0.0, 0.7, n_products)
    slow_mover = rng.random(n_products) < 0.08  # intermittent, low-volume products
    product_effect[slow_mover] += np.log(0.08)
    series_effect = rng.normal(0.0, 0.3, len(s_idx))
    level = median * np.exp(store_effect[s_idx] + product_effect[p_idx] + series_effect)

    weeks = np.datetime64(first_week, "D") + 7 * np.arange(n_weeks)
    day_of_year = (weeks - weeks.astype("datetime64[Y]")).astype(np.int64)
    year = weeks.astype("datetime64[Y]").astype(np.int64)
    # the season comes a few days early or late each year
    year_shift = rng.normal(0.0, 3.0, year.max() - year.min() + 1)[year - year.min()]
    woy = (day_of_year - year_shift) / 7.0
    season = np.stack([season_profile(woy, s.amplitude, s.peak_week) for s in SEGMENTS])
    shock = np.exp(
        rng.normal(0.0, 1.0, (n_seg, n_weeks)) * np.array([s.shock for s in SEGMENTS])[:, None]
    )
    growth = 1.04 ** (np.arange(n_weeks) / SEASON_WEEKS)
    mean = level[:, None] * (season * shock)[seg] * growth[None, :]
    shape = np.array([s.shape for s in SEGMENTS])[seg][:, None]
    units = rng.negative_binomial(shape, shape / (shape + mean)).astype(np.int64)
    return _World(
        store=store_ids[s_idx],
        product=product_ids[p_idx],
        segment_of_series=seg,
        product_ids=product_ids,
        product_segment=product_segment,
        weeks=weeks,
        units=units,
    )


def _forecast(
    known: np.ndarray, segment_of_series: np.ndarray
) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Point forecast, p10 and p90 (series × HORIZON) from the actuals ``known`` (series × weeks).

    ``known`` holds only weeks before the issue date, so nothing later can leak in. See the
    module docstring for the method.
    """
    c = known.shape[1]
    if c < SEASON_WEEKS + LEVEL_WEEKS + 1:
        raise ValueError(f"the forecaster needs {SEASON_WEEKS + LEVEL_WEEKS + 1} weeks; got {c}")
    n_seg = len(SEGMENTS)
    member = (segment_of_series[None, :] == np.arange(n_seg)[:, None]).astype(np.float64)
    totals = member @ known  # segment × week totals
    # three-week centred mean; smooth[:, j] is centred on week j + 1 (all weeks < c)
    smooth = (totals[:, :-2] + totals[:, 1:-1] + totals[:, 2:]) / 3.0
    targets = c + np.arange(HORIZON) - SEASON_WEEKS  # same weeks last year
    base = smooth[:, c - SEASON_WEEKS - LEVEL_WEEKS - 1 : c - SEASON_WEEKS - 1].mean(axis=1)
    ratio = np.divide(
        smooth[:, targets - 1],
        base[:, None],
        out=np.ones((n_seg, HORIZON)),
        where=base[:, None] > 0,
    )
    level = known[:, c - LEVEL_WEEKS :].mean(axis=1)
    point = np.clip(level[:, None] * ratio[segment_of_series], 0.0, None)
    shape = np.array([s.shape for s in SEGMENTS])[segment_of_series][:, None]
    widen = np.sqrt(1.0 + 0.08 * np.arange(HORIZON))[None, :]
    spread = 1.2816 * np.sqrt(point + point**2 / shape + 0.25) * widen  # z(0.9) = 1.2816
    p10 = np.clip(point - spread, 0.0, None)
    p90 = point + spread
    return point, p10, p90


def _forecast_table(
    world: _World, issue_index: int, *, factor: np.ndarray | None = None
) -> pa.Table:
    """One cycle's forecast as a long table (series × horizon rows), values rounded to 0.01."""
    point, p10, p90 = _forecast(world.units[:, :issue_index], world.segment_of_series)
    if factor is not None:
        point, p10, p90 = (a * factor[:, None] for a in (point, p10, p90))
    issue = np.datetime64(world.weeks[0], "D") + 7 * issue_index
    target = issue + 7 * np.arange(HORIZON)
    n = len(world.store)
    return pa.table(
        {
            "store": np.repeat(world.store, HORIZON),
            "product": np.repeat(world.product, HORIZON),
            "week": pa.array(np.tile(target, n), pa.date32()),
            "units": np.round(point, 2).ravel(),
            "p10": np.round(p10, 2).ravel(),
            "p90": np.round(p90, 2).ravel(),
            "issued_on": pa.array(np.full(n * HORIZON, issue), pa.date32()),
        }
    )


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
    data = out_dir / "data"
    data.mkdir(parents=True, exist_ok=True)
    _clear_own_files(out_dir)
    rng = np.random.default_rng(seed)

    final_issue = FIRST_DEMO_CYCLE + dt.timedelta(weeks=cycles - 1)
    first_week = final_issue - dt.timedelta(weeks=HISTORY_WEEKS)
    world = _simulate(rng, first_week, HISTORY_WEEKS)
    n_series = len(world.store)

    def index_of(day: dt.date) -> int:
        return (day - first_week).days // 7

    cycle_dates = tuple(FIRST_DEMO_CYCLE + dt.timedelta(weeks=k) for k in range(cycles))
    earlier_dates = tuple(
        FIRST_DEMO_CYCLE - dt.timedelta(weeks=EARLIER_CYCLES - k) for k in range(EARLIER_CYCLES)
    )

    # planted problems: positions relative to the end so any cycles ≥ 3 tells the same story
    bias_from = cycle_dates[max(1, cycles - 4)]
    gap_cycle = cycle_dates[max(1, cycles - 4)]
    missing_cycle = cycle_dates[-1]
    biased = np.array([s.name for s in SEGMENTS])[world.segment_of_series] == BIASED_SEGMENT
    factor = np.where(biased, BIAS_FACTOR, 1.0)
    # gap: a few steady sellers (weekly sales in every recent week) outside the missing store
    recent = world.units[:, index_of(gap_cycle) - LEVEL_WEEKS : index_of(gap_cycle)]
    steady = np.flatnonzero((recent > 0).all(axis=1) & (world.store != MISSING_STORE))
    gap_rows = np.sort(rng.choice(steady, size=GAP_SERIES, replace=False))
    gap_week = gap_cycle + dt.timedelta(weeks=GAP_STEP - 1)

    # actuals, week by week (as a weekly feed appends them): the actuals known at a cycle are
    # then a prefix of the file, cut before the first row of its issue week
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
    actuals_path = data / "actuals.csv"
    actuals_path.write_bytes(text)
    cycle_actuals: list[Path] = []
    (data / "actuals").mkdir(exist_ok=True)
    for day in cycle_dates:
        rows = index_of(day) * n_series  # weeks before the issue date; + 1 line of header
        path = data / "actuals" / f"actuals_{day.isoformat()}.csv"
        path.write_bytes(text[: line_ends[rows] + 1])
        cycle_actuals.append(path)

    # reference tables
    products_path = data / "products.csv"
    seg_names = np.array([s.name for s in SEGMENTS])
    _write_csv(
        pa.table({"product": world.product_ids, "category": seg_names[world.product_segment]}),
        products_path,
    )
    stores_path = data / "stores.csv"
    store_ids = np.unique(world.store)
    _write_csv(pa.table({"store": store_ids, "town": list(TOWNS[: len(store_ids)])}), stores_path)

    # earlier cycles (clean) → history file
    history_path = data / "earlier_forecasts.csv"
    _write_csv(
        pa.concat_tables([_forecast_table(world, index_of(day)) for day in earlier_dates]),
        history_path,
    )

    # demo cycles with the planted problems
    forecast_paths: list[Path] = []
    store_of_row = np.repeat(world.store, HORIZON)
    step_of_row = np.tile(np.arange(1, HORIZON + 1), n_series)
    gap_of_row = np.repeat(np.isin(np.arange(n_series), gap_rows), HORIZON) & (
        step_of_row == GAP_STEP
    )
    for day in cycle_dates:
        table = _forecast_table(world, index_of(day), factor=factor if day >= bias_from else None)
        if day == gap_cycle:
            table = _drop_rows(table, gap_of_row)
        if day == missing_cycle:
            table = _drop_rows(table, store_of_row == MISSING_STORE)
        path = data / "forecasts" / f"forecast_{day.isoformat()}.csv"
        _write_csv(table, path)
        forecast_paths.append(path)

    config_path = out_dir / "accuracy-checks.yaml"
    config_path.write_text(
        _config_text(
            forecast=forecast_paths[0].relative_to(out_dir).as_posix(),
            actuals=cycle_actuals[0].relative_to(out_dir).as_posix(),
        ),
        encoding="utf-8",
    )
    return Scenario(
        out_dir=out_dir,
        config_path=config_path,
        actuals_path=actuals_path,
        products_path=products_path,
        stores_path=stores_path,
        history_path=history_path,
        forecast_paths=tuple(forecast_paths),
        cycle_actuals_paths=tuple(cycle_actuals),
        cycle_dates=cycle_dates,
        earlier_dates=earlier_dates,
        planted=PlantedProblems(
            biased_segment=BIASED_SEGMENT,
            bias_factor=BIAS_FACTOR,
            bias_from=bias_from,
            missing_store=MISSING_STORE,
            missing_cycle=missing_cycle,
            gap_cycle=gap_cycle,
            gap_week=gap_week,
            gap_series=tuple(
                (str(world.store[i]), str(world.product[i])) for i in gap_rows
            ),
        ),
        n_series=n_series,
    )


# --------------------------------------------------------------------------- the runner


def _is_demo_folder(out_dir: Path) -> bool:
    config = out_dir / "accuracy-checks.yaml"
    try:
        return config.read_text(encoding="utf-8").startswith(CONFIG_MARKER)
    except OSError:
        return False


def _prepare_folder(out_dir: Path) -> None:
    """Refuse a folder that holds someone else's work; clear an earlier demo's run state."""
    if out_dir.exists() and not out_dir.is_dir():
        raise UsageError(f"Demo output {out_dir} exists and is not a folder; pass a folder path.")
    if out_dir.is_dir() and any(out_dir.iterdir()) and not _is_demo_folder(out_dir):
        raise UsageError(
            f"Demo output folder {out_dir} is not empty and does not hold an earlier demo "
            "(no accuracy-checks.yaml written by the demo). Pass a new or empty folder with --out."
        )
    state = out_dir / ".accuracy_checks"
    if state.is_dir():
        shutil.rmtree(state)


def _finding(result: CheckResult) -> str:
    """The result's message, led by its segment when the message does not name it."""
    text = result.message
    if not text:
        parts = [result.check]
        if result.lag is not None:
            parts.append(f"lag {result.lag}")
        if result.measure:
            value = "undefined" if result.value is None else f"{result.value:.3g}"
            parts.append(f"{result.measure} = {value}")
        text = f"{result.status}: {', '.join(parts)}"
    segment = result.segment
    if segment and segment not in text:
        text = f"{'all series' if segment == '*' else segment}: {text}"
    return text


_RANK = {"fail": 0, "error": 0, "warn": 1}


def top_findings(report: RunReport, n: int = 3) -> list[str]:
    """The ``n`` most important findings of a run, in plain words (each result's message).

    Failures and errors come before warnings. Within a status, different kinds of finding
    (check and measure) come before a second finding of the same kind, the all-series segment
    ``"*"`` before single segments, and lower lags first: so a store missing from every
    segment shows once, next to a biased segment, rather than six times.
    """
    bad = [r for r in report.results if r.status in _RANK]
    bad.sort(
        key=lambda r: (
            _RANK[r.status],
            0 if r.segment == "*" else 1,
            r.lag if r.lag is not None else 0,
        )
    )
    seen: set[tuple[str, str | None]] = set()
    first: list[CheckResult] = []
    repeats: list[CheckResult] = []
    for r in bad:
        kind = (r.check, r.measure)
        (repeats if kind in seen else first).append(r)
        seen.add(kind)
    ordered = sorted(first, key=lambda r: _RANK[r.status]) + repeats
    return [_finding(r) for r in ordered[:n]]


def _count_line(report: RunReport) -> str:
    c = report.counts()
    parts = [f"{c['pass']} passed", f"{c['warn']} warned", f"{c['fail'] + c['error']} failed"]
    if c["skipped"]:
        parts.append(f"{c['skipped']} skipped")
    if c["waived"]:
        parts.append(f"{c['waived']} waived")
    return ", ".join(parts)


def _intro(out_dir: Path, cycles: int) -> str:
    segments = ", ".join(s.name for s in SEGMENTS)
    return (
        "accuracy-checks demo: invented data, no real company, store or person.\n"
        f"It writes a fictional chain of {N_STORES} garden centres to {out_dir}:\n"
        f"weekly unit sales of about 300 products in {len(SEGMENTS)} segments\n"
        f"({segments}),\n"
        f"{EARLIER_CYCLES} earlier forecast cycles and {cycles} new weekly cycles of "
        f"{HORIZON}-week forecasts.\n"
        "Then it runs the gate once per cycle, in issue order, as a weekly job would. Each run\n"
        "checks that cycle's forecast file for missing series and weeks, measures the earlier\n"
        "cycles' forecasts against the actuals known that Monday, and judges the figures\n"
        "against the thresholds in accuracy-checks.yaml. A few problems are planted.\n"
    )


def _outro(scenario: Scenario) -> str:
    out = scenario.out_dir
    last = scenario.forecast_paths[-1].relative_to(out).as_posix()
    return (
        f"What was written to {out}:\n"
        "  data/actuals.csv           weekly units sold, about two years up to the final cycle\n"
        "  data/actuals/              the actuals as known on each cycle's issue date\n"
        "  data/forecasts/            one forecast file per cycle (13 weeks, p10/p90)\n"
        "  data/earlier_forecasts.csv the four cycles before the demo (the history)\n"
        "  data/products.csv          the segment (category) of each product; stores.csv\n"
        "  accuracy-checks.yaml       the config: inputs, horizon, lags, thresholds per segment\n"
        "  .accuracy_checks/archive/  a snapshot of every checked forecast, by cycle; later runs\n"
        "                             measure these against the actuals that arrive\n"
        + (
            "  .accuracy_checks/audit.db  the audit record of every run and result\n"
            if (out / ".accuracy_checks" / "audit.db").exists()
            else ""
        )
        + "Run one check by hand (a re-run is recorded as a new attempt of its cycle):\n"
        f"  cd {out}\n"
        "  accuracy-checks run --config accuracy-checks.yaml\n"
        f"  accuracy-checks run --config accuracy-checks.yaml --forecast {last} \\\n"
        "      --actuals data/actuals.csv --json result.json --markdown result.md\n"
        "The demo itself exits 0: the failing final cycle is part of the show.\n"
    )


def run_demo(
    out_dir: Path,
    *,
    cycles: int = 6,
    seed: int = 7,
    echo: Callable[[str], None] = print,
) -> list[RunReport]:
    """Generate the scenario in ``out_dir``, run the gate on each cycle in order, narrate it.

    Each cycle is checked with its own forecast file and the actuals known on its issue date
    (:attr:`Scenario.cycle_actuals_paths`), so no cycle sees later actuals. Returns the run
    reports in cycle order. An earlier demo's archive and audit store in ``out_dir`` are
    removed first; a non-empty folder that is not an earlier demo is refused
    (:class:`~accuracy_checks.errors.UsageError`).
    """
    out_dir = Path(out_dir)
    _prepare_folder(out_dir)
    from accuracy_checks.config import load_config
    from accuracy_checks.engine import run_checks

    echo(_intro(out_dir, cycles))
    scenario = generate_scenario(out_dir, cycles=cycles, seed=seed)
    echo(
        f"Generated {scenario.n_series} series (store × product); cycles issued "
        f"{scenario.cycle_dates[0]} to {scenario.cycle_dates[-1]}.\n"
    )
    config = load_config(scenario.config_path)
    reports: list[RunReport] = []
    for k, (day, forecast, actuals) in enumerate(
        zip(
            scenario.cycle_dates,
            scenario.forecast_paths,
            scenario.cycle_actuals_paths,
            strict=True,
        ),
        start=1,
    ):
        report = run_checks(config, forecast_path=forecast, actuals_path=actuals)
        reports.append(report)
        echo(_cycle_block(k, cycles, day, report))
    planted = "".join(f"  - {line}\n" for line in describe_planted(scenario))
    echo(f"The planted problems were:\n{planted}")
    echo(_outro(scenario))
    return reports


def _cycle_block(k: int, cycles: int, day: dt.date, report: RunReport) -> str:
    verdict = {"pass": "PASS", "warn": "WARN", "fail": "FAIL"}[report.status]
    lines = [
        f"Cycle {k}/{cycles}, issued Monday {day.isoformat()}: {verdict}  ({_count_line(report)})"
    ]
    findings = top_findings(report)
    if findings:
        lines += [f"  - {f}" for f in findings]
    else:
        lines.append("  - no warnings or failures")
    return "\n".join(lines) + "\n"


def describe_planted(scenario: Scenario) -> Sequence[str]:
    """One line per planted problem, for readers of the generated data."""
    p = scenario.planted
    return (
        f"{p.biased_segment} forecasts are {round((1 - p.bias_factor) * 100)} % too low "
        f"from the cycle of {p.bias_from} on",
        f"{len(p.gap_series)} series lack the week of {p.gap_week} in the cycle of {p.gap_cycle}",
        f"store {p.missing_store} is absent from the cycle of {p.missing_cycle}",
    )
