"""What a measure computes on: the rows of one window, grouped, with series codes and settings.

A :class:`MeasureData` holds the evaluation rows of one window (``evaluation.window`` or the
tracking window) and one grouping of them: by (lag, segment), or by lag alone for segment
``"*"``. Measures reduce rows to groups with :meth:`MeasureData.gsum` (``np.bincount`` over
integer group codes), to series within groups with :meth:`MeasureData.units`, and read the
per-series scales and per-row baselines that the engine prepared once for all groupings. No
measure loops over rows or series.

Plugin measures (:mod:`accuracy_checks.measures.plugins`) receive the same object. The stable
surface:
``rows`` (a DataFrame: key columns, ``period``, ``issued``, ``lag``, ``segment``, ``forecast``,
``actual``, quantile columns ``q<τ>``), ``groups`` (columns ``lag``, ``segment``; the row
number is the group code), ``group`` (group code per row), ``series`` (series code per row),
``n_groups``, ``n_series``, ``actual``, ``forecast``, ``usable``, ``gsum``, ``stats``,
``units``, ``settings``, and :func:`result_frame` to build the answer.
"""

from __future__ import annotations

from collections.abc import Callable, Mapping
from dataclasses import dataclass, field
from functools import cached_property
from typing import Literal

import numpy as np
import pandas as pd

from accuracy_checks.measures.stats import stats_from_codes
from accuracy_checks.sources import frames as F

__all__ = [
    "CostTable",
    "Interval",
    "MeasureData",
    "MeasureSettings",
    "Units",
    "central_intervals",
    "dense_codes",
    "result_frame",
    "stack_variants",
]

#: scale reason codes of :attr:`MeasureData.scale_reason`
SCALE_OK, SCALE_TOO_FEW_ROWS, SCALE_ZERO = 0, 1, 2


@dataclass(frozen=True)
class Interval:
    """A central prediction interval from two configured quantiles ``lower`` < 0.5 < ``upper``
    with ``lower + upper = 1``; nominal coverage ``upper − lower``, ``α = 1 − nominal``.

    >>> i = Interval(0.1, 0.9)
    >>> i.label, round(i.alpha, 12)
    ('80%', 0.2)
    """

    lower: float
    upper: float

    @property
    def nominal(self) -> float:
        return self.upper - self.lower

    @property
    def alpha(self) -> float:
        return 1.0 - self.nominal

    @property
    def label(self) -> str:
        return f"{100 * self.nominal:.6g}%"


def central_intervals(quantiles: tuple[float, ...] | list[float]) -> tuple[Interval, ...]:
    """The central intervals formed by configured quantile levels, widest first.

    >>> central_intervals([0.05, 0.1, 0.5, 0.9, 0.95])
    (Interval(lower=0.05, upper=0.95), Interval(lower=0.1, upper=0.9))
    >>> central_intervals([0.1, 0.8])
    ()
    """
    levels = sorted(set(quantiles))
    out = [
        Interval(lo, hi)
        for lo in levels
        for hi in levels
        if lo < 0.5 < hi and abs(lo + hi - 1.0) < 1e-9
    ]
    return tuple(sorted(out, key=lambda i: i.lower))


@dataclass(frozen=True)
class CostTable:
    """Unit costs of forecast errors (money per unit): ``(under, over)`` per segment, with a
    default for the segments not listed."""

    currency: str = "money"
    default: tuple[float, float] | None = None
    segments: Mapping[str, tuple[float, float]] = field(default_factory=dict)

    def of(self, segment: str) -> tuple[float, float] | None:
        """``(under, over)`` for ``segment``, or ``None`` when neither it nor a default is set.

        >>> CostTable(default=(2.0, 1.0), segments={"tools": (5.0, 1.0)}).of("plants")
        (2.0, 1.0)
        """
        return self.segments.get(segment, self.default)


@dataclass(frozen=True)
class MeasureSettings:
    """Settings that shape the measures (from the config's ``evaluation`` and ``costs``)."""

    #: seasonal period m (MASE, MSIS, seasonal naive baseline)
    seasonal_period: int = 1
    #: periods of the tracking window
    tracking_window: int = 13
    #: ``scaled`` (z·1.25·√n) or ``constant`` tracking-signal limits
    tracking_limit: Literal["scaled", "constant"] = "scaled"
    #: smoothing constant of Trigg's signal
    trigg_alpha: float = 0.1
    #: configured quantile levels
    quantiles: tuple[float, ...] = ()
    #: a coverage breach must have a binomial p-value below this
    coverage_test_level: float = 0.05
    costs: CostTable | None = None

    @property
    def intervals(self) -> tuple[Interval, ...]:
        return central_intervals(self.quantiles)


@dataclass(frozen=True)
class Units:
    """Series within groups: ``code`` per row (``0 … n − 1``), and per unit its ``group`` and
    ``series``. A series that appears in two groups (two lags) is two units."""

    code: np.ndarray
    group: np.ndarray
    series: np.ndarray

    @property
    def n(self) -> int:
        return int(self.group.size)


def dense_codes(combined: np.ndarray, cells: int) -> tuple[np.ndarray, np.ndarray]:
    """Compress non-negative integer codes below ``cells`` to ``0 … k − 1`` (in code order):
    ``(code per row, original code of each new code)``. A presence mask and a lookup (1 + 4
    bytes a cell, no sort) while ``cells`` stays within 16 a row, else a hash factorisation
    (sorted). Both give the same codes.

    >>> dense_codes(np.array([7, 2, 7, 9]), 10)
    (array([1, 0, 1, 2]), array([2, 7, 9]))
    """
    if cells <= min(max(16 * combined.size, 1 << 20), np.iinfo(np.int32).max):
        mask = np.zeros(cells, dtype=bool)
        mask[combined] = True
        present = np.flatnonzero(mask)
        del mask
        index = np.empty(cells, dtype=np.int32)  # only the present cells are written and read
        index[present] = np.arange(present.size, dtype=np.int32)
        return index[combined].astype(np.int64), present.astype(np.int64, copy=False)
    raw, uniques = pd.factorize(combined, sort=True)
    return raw.astype(np.int64, copy=False), np.asarray(uniques, dtype=np.int64)


def scaled_result(n_groups: int, mean: np.ndarray, n: np.ndarray, used: np.ndarray,
                  too_few: np.ndarray, zero: np.ndarray, **extra: np.ndarray) -> pd.DataFrame:
    """The answer of a measure scaled per series (MASE, MSIS): ``mean`` over the ``used``
    series of each group whose scale is defined; where none is, the reason is ``no_data`` (no
    usable row: ``n`` = 0), else ``too_few_rows`` when at least as many series lacked rows
    (``too_few``) as had a zero scale (``zero``), else ``zero_scale``. Columns ``n_obs`` = ``n``,
    ``n_series_used``, ``n_series_skipped`` = ``too_few`` + ``zero``, then ``extra``."""
    none = used == 0
    return result_frame(
        n_groups, mean,
        [(n == 0, "no_data"), (none & (too_few >= zero), "too_few_rows"),
         (none, "zero_scale")],
        n_obs=n.astype(np.int64), n_series_used=used.astype(np.int64),
        n_series_skipped=(too_few + zero).astype(np.int64),
        **extra,
    )


def result_frame(
    n_groups: int,
    value: np.ndarray,
    rules: list[tuple[np.ndarray, str]],
    **extra: np.ndarray,
) -> pd.DataFrame:
    """A measure's answer: ``value`` (NaN where a rule matched), ``reason`` (the first matching
    rule's reason, else ``None``) and extra columns, one row per group.

    >>> result_frame(2, np.array([1.0, 2.0]), [(np.array([False, True]), "no_data")])
       value   reason
    0    1.0     None
    1    NaN  no_data
    """
    reason = np.full(n_groups, None, dtype=object)
    undefined = np.zeros(n_groups, dtype=bool)
    for mask, label in reversed(rules):
        reason[mask] = label
        undefined |= mask
    index = pd.RangeIndex(n_groups)
    columns: dict[str, object] = {
        "value": np.where(undefined, np.nan, value),
        # dtype=object keeps None as None (pandas 3 would infer ``str`` and turn None into NaN)
        "reason": pd.Series(reason, index=index, dtype=object),
    }
    columns.update(extra)
    return pd.DataFrame(columns, index=index)


def stack_variants(frames: Mapping[str, pd.DataFrame],
                   extra: Mapping[str, Mapping[str, object]] | None = None) -> pd.DataFrame:
    """One frame of several figures per group: ``group`` and ``variant`` columns added, rows
    ordered by variant then group; ``extra[variant]`` adds constant columns (the quantile…).
    """
    parts = []
    for variant, frame in frames.items():
        columns: dict[str, object] = {
            "group": np.arange(len(frame), dtype=np.int64),
            "variant": pd.Series(variant, index=frame.index, dtype=object),
        }
        columns.update({c: frame[c] for c in frame.columns})
        columns.update((extra or {}).get(variant, {}))
        parts.append(pd.DataFrame(columns, index=frame.index))
    if not parts:
        return pd.DataFrame({"group": pd.Series(dtype=np.int64), "variant": pd.Series(dtype=str),
                             "value": pd.Series(dtype=float),
                             "reason": pd.Series(dtype=object)})
    return pd.concat(parts, ignore_index=True)


class MeasureData:
    """The rows of one window under one grouping (see the module doc).

    Parameters
    ----------
    rows : DataFrame
        The window's evaluation rows (``RangeIndex``).
    group : ndarray of int
        Group code of each row, ``0 … len(groups) − 1``.
    groups : DataFrame
        ``lag`` and ``segment`` of each group (``segment`` is ``"*"`` for all series).
    series : ndarray of int
        Series code of each row, ``0 … n_series − 1``.
    n_series : int
        Number of series codes.
    settings : MeasureSettings
    scale, scale_reason : ndarray, optional
        Per series code: the in-sample scale of MASE/MSIS (NaN when undefined) and why
        (``0`` defined, ``1`` too few rows, ``2`` zero scale).
    baseline : callable, optional
        ``baseline("naive" | "seasonal_naive")`` → the baseline forecast of each row.
    """

    def __init__(
        self,
        rows: pd.DataFrame,
        group: np.ndarray,
        groups: pd.DataFrame,
        series: np.ndarray,
        n_series: int,
        settings: MeasureSettings,
        *,
        scale: np.ndarray | None = None,
        scale_reason: np.ndarray | None = None,
        baseline: Callable[[str], np.ndarray] | None = None,
    ) -> None:
        self.rows = rows
        self.group = np.asarray(group, dtype=np.int64)
        self.groups = groups
        self.series = np.asarray(series, dtype=np.int64)
        self.n_series = int(n_series)
        self.settings = settings
        self._scale = scale
        self._scale_reason = scale_reason
        self._baseline = baseline
        self._units: Units | None = None

    @property
    def n_groups(self) -> int:
        return len(self.groups)

    @cached_property
    def actual(self) -> np.ndarray:
        """Actual of each row (float64, NaN where missing)."""
        return self.rows[F.ACTUAL].to_numpy(dtype=np.float64, na_value=np.nan)

    @cached_property
    def forecast(self) -> np.ndarray:
        """Point forecast of each row (float64, NaN where missing)."""
        return self.rows[F.FORECAST].to_numpy(dtype=np.float64, na_value=np.nan)

    @cached_property
    def usable(self) -> np.ndarray:
        """Rows with both an actual and a forecast."""
        return ~(np.isnan(self.actual) | np.isnan(self.forecast))

    @cached_property
    def error(self) -> np.ndarray:
        """``e = actual − forecast`` on usable rows, 0 elsewhere."""
        return np.where(self.usable, self.actual - self.forecast, 0.0)

    def gsum(self, weights: np.ndarray | None = None, mask: np.ndarray | None = None
             ) -> np.ndarray:
        """Per group: the sum of ``weights`` (a count when ``None``) over the rows in ``mask``.

        The rows outside ``mask`` add an exact 0.0 instead of being cut out (no compacted
        copies; a float sum never changes by adding +0.0 in the same row order).
        """
        if mask is not None:
            weights = mask if weights is None else np.where(mask, weights, 0.0)
        out = np.bincount(self.group, weights=weights, minlength=self.n_groups)
        return out.astype(np.float64, copy=False)

    @cached_property
    def stats(self) -> pd.DataFrame:
        """:data:`~accuracy_checks.measures.stats.STAT_COLUMNS` per group (pooled)."""
        return stats_from_codes(self.group, self.n_groups, self.actual, self.forecast)

    def column(self, name: str) -> np.ndarray:
        """A numeric column of the rows as float64 (NaN where missing)."""
        if name not in self.rows.columns:
            raise KeyError(f"the evaluation rows have no column {name!r}")
        return self.rows[name].to_numpy(dtype=np.float64, na_value=np.nan)

    def quantile(self, tau: float) -> np.ndarray:
        """The ``tau`` quantile forecast of each row (non-finite values count as missing)."""
        values = self.column(F.quantile_column(tau))
        return np.where(np.isfinite(values), values, np.nan)

    def units(self, mask: np.ndarray | None = None) -> Units:
        """The (group, series) units of the rows in ``mask`` (default: usable rows); rows
        outside the mask get code ``-1``."""
        if mask is None and self._units is not None:
            return self._units
        keep = self.usable if mask is None else mask
        code = np.full(self.group.shape, -1, dtype=np.int64)
        width = max(self.n_series, 1)
        combined = self.group[keep] * width + self.series[keep]
        dense, original = dense_codes(combined, self.n_groups * width)
        code[keep] = dense
        units = Units(code, original // width, original % width)
        if mask is None:
            self._units = units
        return units

    def unit_sum(self, units: Units, weights: np.ndarray | None = None) -> np.ndarray:
        """Per unit: the sum of ``weights`` (a count when ``None``) over its rows."""
        inside = units.code >= 0
        w = None if weights is None else weights[inside]
        return np.bincount(units.code[inside], weights=w, minlength=units.n).astype(np.float64)

    def per_unit_mean(self, units: Units, value: np.ndarray, defined: np.ndarray
                      ) -> tuple[np.ndarray, np.ndarray]:
        """Per group: the unweighted mean of the defined per-unit values, and how many units
        were defined (the per-series-then-mean aggregation of docs/measures.md)."""
        count = np.bincount(units.group[defined], minlength=self.n_groups).astype(np.float64)
        total = np.bincount(units.group[defined], weights=value[defined],
                            minlength=self.n_groups)
        mean = np.full(self.n_groups, np.nan)
        np.divide(total, count, out=mean, where=count > 0)
        return mean, count

    def series_per_group(self, units: Units) -> np.ndarray:
        """Per group: the number of units (series with rows in the group)."""
        return np.bincount(units.group, minlength=self.n_groups).astype(np.int64)

    @property
    def has_scale(self) -> bool:
        return self._scale is not None

    @property
    def scale(self) -> np.ndarray:
        """Per series code: the in-sample (seasonal) naive scale s of MASE/MSIS."""
        if self._scale is None:
            raise LookupError("no actuals history was given, so there is no MASE scale")
        return self._scale

    @property
    def scale_reason(self) -> np.ndarray:
        """Per series code: 0 scale defined, 1 too few rows (N ≤ m), 2 zero scale."""
        if self._scale_reason is None:
            raise LookupError("no actuals history was given, so there is no MASE scale")
        return self._scale_reason

    def baseline(self, kind: str) -> np.ndarray:
        """The ``naive`` or ``seasonal_naive`` forecast of each row (NaN where unknown)."""
        if self._baseline is None:
            raise LookupError("no actuals history was given, so there is no baseline forecast")
        return self._baseline(kind)

    @cached_property
    def period_codes(self) -> tuple[np.ndarray, int]:
        """``(code per row, number of periods)``: the rows' periods numbered in time order."""
        codes, uniques = pd.factorize(self.rows[F.PERIOD], sort=True)
        return codes.astype(np.int64, copy=False), len(uniques)
