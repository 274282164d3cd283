"""The example pipelines' forecaster: seasonal naive per series, vectorised, with quantiles.

Method (Hyndman & Athanasopoulos, *Forecasting: Principles and Practice*, 3rd ed., 2021,
§5.2 and §5.5), for series ``i`` with actuals ``y`` up to period ``T`` and season ``m``::

    point  ŷ[T+h] = y[T + h − m(k + 1)],   k = ⌊(h − 1)/m⌋          (seasonal naive)
    spread σ[h]   = σ̂ · √(k + 1)
    σ̂             = √(mean of r²),  r[t] = y[t] − y[t − m]          (in-sample residuals)
    quantile τ    = ŷ[T+h] + z_τ · σ[h],   z_τ the standard normal quantile

A series without the seasonal values it needs (less than a season of history, or a missing
actual at ``T + h − m``) falls back to the naive method: ``ŷ[T+h] = y[last observed]``,
``σ[h] = σ̂₁·√h`` with ``σ̂₁`` from the one-step residuals ``y[t] − y[t − 1]``. With fewer
than two residuals the spread is 0 (the quantiles equal the point forecast). Forecasts and
quantiles are clipped at 0 (demand); clipping is monotone, so the quantiles stay ordered.

The forecast covers every *active* series, with the gate's own definition
(``coverage.active_periods``): a non-null actual in the most recent ``active_periods``
periods that hold any non-null actual. The cycle is issued on the first period after the
last actual, on the config's ``frequency``, for ``horizon`` periods, under the config's
forecast column names (keys, period, value, quantiles, issue date). Segment columns that the
mapping does not provide are carried from each series' latest earlier cycle (``history``).

Everything is array arithmetic over a series × period matrix of the last ``2m`` periods
(no loop over series): about 8 bytes × series × 2m, e.g. 830 MB for a million weekly series.
"""

from __future__ import annotations

import os
import shutil
from collections.abc import Sequence
from dataclasses import dataclass
from pathlib import Path
from statistics import NormalDist

import numpy as np
import pandas as pd

from accuracy_checks import sources
from accuracy_checks.config import Config
from accuracy_checks.errors import InputError
from accuracy_checks.evaluation.baselines import default_seasonal_period
from accuracy_checks.evaluation.grid import grid_positions
from accuracy_checks.sources import frames as F
from accuracy_checks.sources.codes import combined_codes

__all__ = [
    "NextCycle",
    "SeasonalNaive",
    "forecast_next_cycle",
    "publish_file",
    "seasonal_naive",
    "write_forecast",
    "write_frame",
]


@dataclass(frozen=True)
class SeasonalNaive:
    """Forecasts of ``n`` series for ``H`` steps: ``point`` (n × H), ``quantiles`` (τ → n × H),
    and per series whether the seasonal (``True``) or the naive fallback was used."""

    point: np.ndarray
    quantiles: dict[float, np.ndarray]
    seasonal: np.ndarray


def _rms(residuals: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Per row: √(mean r²) over the finite residuals, and how many there were."""
    finite = np.isfinite(residuals)
    count = finite.sum(axis=1)
    total = np.where(finite, residuals * residuals, 0.0).sum(axis=1)
    rms = np.sqrt(np.divide(total, count, out=np.zeros(len(count)), where=count > 0))
    return rms, count


def _last_observed(values: np.ndarray) -> np.ndarray:
    """Per row: the last finite value (NaN when none)."""
    n, w = values.shape
    finite = np.isfinite(values)
    idx = np.where(finite, np.arange(w)[None, :], -1).max(axis=1, initial=-1)
    out = np.full(n, np.nan)
    has = idx >= 0
    out[has] = values[np.flatnonzero(has), idx[has]]
    return out


def seasonal_naive(history: np.ndarray, horizon: int, season: int,
                   quantiles: Sequence[float] = ()) -> SeasonalNaive:
    """Seasonal naive forecasts (module docstring) of each row of ``history``.

    ``history`` is series × periods (NaN where no actual); its last column is the last
    period before the forecast. ``season`` is m ≥ 1 (m = 1 is the naive method).

    >>> y = np.array([[1.0, 2.0, 3.0, 5.0, 6.0, 7.0],    # two seasons of m = 3
    ...               [np.nan, np.nan, np.nan, np.nan, 4.0, 4.0]])
    >>> fc = seasonal_naive(y, horizon=4, season=3, quantiles=[0.5])
    >>> fc.point.tolist()       # row 1 repeats the last season; row 2 falls back to naive
    [[5.0, 6.0, 7.0, 5.0], [4.0, 4.0, 4.0, 4.0]]
    >>> fc.seasonal.tolist(), fc.quantiles[0.5].tolist() == fc.point.tolist()
    ([True, False], True)
    """
    if season < 1 or horizon < 1:
        raise ValueError(f"season and horizon must be ≥ 1, got {season} and {horizon}")
    values = np.asarray(history, dtype=np.float64)
    n, w = values.shape
    h = np.arange(1, horizon + 1)
    k = (h - 1) // season
    source = (w - 1) + h - season * (k + 1)  # column of y[T + h − m(k + 1)]
    inside = source >= 0
    point_s = np.full((n, horizon), np.nan)
    point_s[:, inside] = values[:, source[inside]]
    seasonal = np.isfinite(point_s).all(axis=1)

    sigma_s, n_s = _rms(values[:, season:] - values[:, :-season]) if w > season \
        else (np.zeros(n), np.zeros(n, dtype=np.int64))
    sigma_1, n_1 = _rms(values[:, 1:] - values[:, :-1]) if w > 1 \
        else (np.zeros(n), np.zeros(n, dtype=np.int64))
    sigma_1 = np.where(n_1 >= 2, sigma_1, 0.0)
    sigma_s = np.where(n_s >= 2, sigma_s, sigma_1)

    last = _last_observed(values)
    point = np.where(seasonal[:, None], point_s, last[:, None])
    spread = np.where(seasonal[:, None], sigma_s[:, None] * np.sqrt(k + 1)[None, :],
                      sigma_1[:, None] * np.sqrt(h)[None, :])
    normal = NormalDist()
    out = {float(tau): np.clip(point + normal.inv_cdf(float(tau)) * spread, 0.0, None)
           for tau in quantiles}
    return SeasonalNaive(np.clip(point, 0.0, None), out, seasonal)


@dataclass(frozen=True)
class NextCycle:
    """The next cycle's forecast in the config's column names, and what it was made from."""

    frame: pd.DataFrame
    issued: pd.Timestamp
    n_series: int
    n_seasonal: int
    season: int
    last_actual: pd.Timestamp
    #: issue date of the latest earlier cycle in ``history`` (``None`` without history)
    latest_earlier: pd.Timestamp | None


def forecast_next_cycle(config: Config, *, actuals_path: Path | None = None) -> NextCycle:
    """Forecast every active series for the cycle after the last actual (module docstring).

    Reads the actuals (and the earlier cycles in ``history``) exactly as the gate does, so an
    unusable input raises the gate's :class:`~accuracy_checks.errors.InputError`.
    """
    keys = list(config.forecast.keys)
    actuals = sources.read_actuals(config, actuals_path)
    values = actuals[F.ACTUAL].to_numpy(dtype=np.float64, na_value=np.nan)
    periods = actuals[F.PERIOD]
    observed = np.isfinite(values) & periods.notna().to_numpy()
    if not observed.any():
        raise InputError(f"The actuals {actuals_path or config.actuals.path} hold no non-missing "
                         "value, so there is nothing to forecast from.")

    # active series, exactly as coverage.missing_series defines them
    dates = periods.to_numpy(dtype="datetime64[ns]")
    recent = np.sort(pd.unique(dates[observed]))[-config.coverage.active_periods:]
    series_codes, _ = pd.factorize(combined_codes(actuals, keys))
    active_rows = observed & (dates >= recent[0])
    active = np.zeros(series_codes.max() + 1, dtype=bool)
    active[series_codes[active_rows]] = True
    index_of = np.cumsum(active) - 1  # series code → row of the matrix
    n_series = int(active.sum())

    season = config.evaluation.seasonal_period or default_seasonal_period(config.frequency)
    pos, _ = grid_positions(periods, config.frequency)
    last_pos = int(pos[observed].max())
    width = int(min(last_pos - pos[observed].min() + 1, max(2 * season, 2)))
    first_pos = last_pos - width + 1
    take = active[series_codes] & (pos >= first_pos) & (pos <= last_pos)
    matrix = np.full((n_series, width), np.nan)
    matrix[index_of[series_codes[take]], pos[take] - first_pos] = values[take]

    taus = list(config.forecast.quantiles)
    fc = seasonal_naive(matrix, config.horizon, season, taus)

    last_actual = pd.Timestamp(dates[observed].max())
    grid = pd.date_range(last_actual, periods=config.horizon + 2, freq=config.frequency)
    targets = grid[grid_positions(grid, config.frequency)[0] > last_pos][: config.horizon]
    issued = targets[0]

    first_row = np.full(series_codes.max() + 1, -1, dtype=np.int64)
    first_row[series_codes[::-1]] = np.arange(len(series_codes))[::-1]
    key_rows = first_row[np.flatnonzero(active)]
    fcfg = config.forecast
    horizon = config.horizon
    columns: dict[str, object] = {
        k: np.repeat(actuals[k].to_numpy()[key_rows], horizon) for k in keys
    }
    columns[fcfg.period] = np.tile(targets.to_numpy(), n_series)
    columns[fcfg.value] = np.round(fc.point.ravel(), 3)
    for tau, name in fcfg.quantiles.items():
        columns[name] = np.round(fc.quantiles[float(tau)].ravel(), 3)
    columns[fcfg.issued] = np.full(n_series * horizon, issued.to_datetime64())
    frame = pd.DataFrame(columns)
    frame, latest = _with_segment_columns(frame, config)
    return NextCycle(frame, issued, n_series, int(fc.seasonal.sum()), season, last_actual,
                     latest)


def _with_segment_columns(frame: pd.DataFrame,
                          config: Config) -> tuple[pd.DataFrame, pd.Timestamp | None]:
    """Carry segment columns the mapping lacks from each series' latest earlier cycle."""
    keys = list(config.forecast.keys)
    seg_cols = list(config.segments.columns)
    mapping_cols: set[str] = set()
    if config.segments.mapping is not None:
        mapping_cols = set(sources.read_mapping(config).columns)  # type: ignore[union-attr]
    wanted = [s for s in seg_cols if s not in mapping_cols]
    earlier = [sources.read_forecast(config, p, role="history", key="history",
                                     segment_columns=wanted, allow_empty=True)
               for p in config.history_paths]
    earlier = [e for e in earlier if len(e)]
    if not earlier:
        return frame, None
    stacked = pd.concat(earlier, ignore_index=True) if len(earlier) > 1 else earlier[0]
    latest = pd.Timestamp(stacked[F.ISSUED].max())
    carried = [s for s in wanted if s in stacked.columns]
    if carried:
        last = (stacked.sort_values(F.ISSUED, kind="stable")
                .drop_duplicates(keys, keep="last")[[*keys, *carried]])
        last = last.astype({k: frame[k].dtype for k in keys})
        frame = frame.merge(last, on=keys, how="left", validate="m:1")
    return frame, latest


def write_forecast(cycle: NextCycle, config: Config, folder: Path) -> Path:
    """Write ``cycle`` to ``folder/forecast_<issue date>.csv`` (``.parquet`` when the config's
    forecast is Parquet or a folder), atomically; return the path."""
    return write_frame(cycle.frame, config, folder)


def write_frame(frame: pd.DataFrame, config: Config, folder: Path) -> Path:
    """Write a forecast frame (the config's column names) to
    ``folder/forecast_<issue date>.csv`` (``.parquet`` when the config's forecast path is
    Parquet or a folder), atomically (a reader never sees half a file); return the path."""
    folder = Path(folder)
    folder.mkdir(parents=True, exist_ok=True)
    target = config.forecast.path  # None when the forecast is a SQL table: CSV then
    parquet = target is not None and (target.is_dir()
                                      or target.suffix.lower() in (".parquet", ".pq"))
    issued = pd.Timestamp(frame[config.forecast.issued].max())
    stamp = issued.strftime("%Y-%m-%d") if issued == issued.normalize() \
        else issued.strftime("%Y-%m-%dT%H%M")
    path = folder / f"forecast_{stamp}.{'parquet' if parquet else 'csv'}"
    tmp = folder / f".{path.name}.incoming"
    if parquet:
        frame.to_parquet(tmp, index=False)
    else:
        dated = [config.forecast.period, config.forecast.issued]
        midnight = all((frame[c] == frame[c].dt.normalize()).all() for c in dated)
        frame.to_csv(tmp, index=False, date_format="%Y-%m-%d" if midnight else None)
    os.replace(tmp, path)
    return path


def publish_file(path: Path, publish_dir: Path) -> Path:
    """Copy ``path`` into ``publish_dir`` atomically (a reader never sees half a file)."""
    publish_dir = Path(publish_dir)
    publish_dir.mkdir(parents=True, exist_ok=True)
    dest = publish_dir / Path(path).name
    tmp = publish_dir / f".{dest.name}.incoming"
    shutil.copyfile(path, tmp)
    os.replace(tmp, dest)
    return dest
