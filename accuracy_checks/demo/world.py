"""The invented demo's world: a fictional chain of garden centres, its weekly demand and a
simple forecaster (no files, no engine: arrays in, arrays and tables out).

Nothing here is real: no company, brand or person. Eight stores (``S01``–``S08``) sell about
300 products (``P0001``…) in five segments (:data:`SEGMENTS`).

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
from dataclasses import dataclass

import numpy as np
import pyarrow as pa

__all__ = [
    "HORIZON",
    "LEVEL_WEEKS",
    "N_STORES",
    "SEASON_WEEKS",
    "SEGMENTS",
    "SegmentSpec",
    "World",
    "forecast",
    "forecast_table",
    "season_profile",
    "simulate",
]

#: Weeks each cycle forecasts.
HORIZON = 13
#: Weeks of actuals the forecaster uses for a series' recent level.
LEVEL_WEEKS = 8
#: Length of a year on the weekly grid.
SEASON_WEEKS = 52
N_STORES = 8
#: Share of the catalogue each store carries.
RANGE_SHARE = 0.85


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


@dataclass(frozen=True)
class World:
    """The simulated catalogue and demand (series × weeks)."""

    store: np.ndarray  # str, one per series
    product: np.ndarray  # str, one per series
    segment_of_series: np.ndarray  # int index into SEGMENTS
    product_ids: np.ndarray
    product_segment: np.ndarray
    weeks: np.ndarray  # datetime64[D], the Mondays of the actuals grid
    units: np.ndarray  # int64 (series, weeks)
    first_week: dt.date

    def index_of(self, day: dt.date) -> int:
        """The column of the week that starts on ``day``."""
        return (day - self.first_week).days // 7


def simulate(rng: np.random.Generator, first_week: dt.date, n_weeks: int) -> World:
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
    return World(
        store=store_ids[s_idx],
        product=product_ids[p_idx],
        segment_of_series=seg,
        product_ids=product_ids,
        product_segment=product_segment,
        weeks=weeks,
        units=units,
        first_week=first_week,
    )


def forecast(
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


def forecast_table(
    world: World, issue_index: int, *, factor: np.ndarray | None = None
) -> pa.Table:
    """One cycle's forecast as a long table (series × horizon rows), values rounded to 0.01."""
    point, p10, p90 = forecast(world.units[:, :issue_index], world.segment_of_series)
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
