"""The evaluation rows grouped for the measures: one preparation shared by every measure.

The accuracy check (:mod:`accuracy_checks.checks.accuracy`) measures each (lag, segment) and
each lag over all series (segment ``"*"``, unless the only segment is ``"*"``). An
:class:`EvaluationGroups` factorises the lags and segments once into dense integer group
codes, gives each row a series code (the actuals index's when known, so per-series scales and
baselines line up), and builds, on first use, the :class:`~accuracy_checks.measures.data.
MeasureData` of each (window, grouping), MASE's per-series scales (from the actuals before
the earliest evaluated cycle's issue date, docs/measures.md §9) and the naive and seasonal
naive forecasts of each row. All vectorised; no loop over rows or series.
"""

from __future__ import annotations

from functools import partial

import numpy as np
import pandas as pd

from accuracy_checks.evaluation.baselines import (
    ActualsIndex,
    known_through,
    naive_forecast,
    seasonal_naive_forecast,
)
from accuracy_checks.evaluation.join import IN_TRACKING, IN_WINDOW, SERIES
from accuracy_checks.measures.data import (
    SCALE_OK,
    SCALE_TOO_FEW_ROWS,
    SCALE_ZERO,
    MeasureData,
    MeasureSettings,
    dense_codes,
)
from accuracy_checks.results import ALL_SERIES
from accuracy_checks.sources import frames as F

__all__ = ["EvaluationGroups"]


class EvaluationGroups:
    """The shared preparation of one evaluation frame for every measure: group codes per
    (lag, segment) and per lag (segment ``"*"``), series codes, the two windows' rows, MASE's
    scales and the naive baselines, each computed once and handed to the measures as
    :class:`~accuracy_checks.measures.data.MeasureData`."""

    def __init__(self, frame: pd.DataFrame, keys: list[str], settings: MeasureSettings,
                 history: ActualsIndex | None, frequency: str | None) -> None:
        frame = frame.reset_index(drop=True)
        lag_codes, lag_values = pd.factorize(frame[F.LAG], sort=True)
        seg_codes, seg_values = pd.factorize(frame[F.SEGMENT], sort=True)
        keep = (lag_codes >= 0) & (seg_codes >= 0)
        if not keep.all():  # rows with a missing lag or segment belong to no group
            frame = frame.loc[keep].reset_index(drop=True)
            lag_codes, seg_codes = lag_codes[keep], seg_codes[keep]
        self.frame = frame
        self.keys = keys
        self.settings = settings
        self.history = history
        self.frequency = frequency
        n_seg = max(len(seg_values), 1)
        fine = lag_codes.astype(np.int64) * n_seg + seg_codes
        fine_codes, fine_values = dense_codes(fine, max(len(lag_values), 1) * n_seg)
        lag_list = np.asarray(lag_values).astype(np.int64)
        seg_list = np.asarray([str(s) for s in seg_values], dtype=object)
        self._codes: dict[str, np.ndarray] = {"segment": fine_codes}
        self._groups: dict[str, pd.DataFrame] = {
            "segment": pd.DataFrame({F.LAG: lag_list[fine_values // n_seg],
                                     F.SEGMENT: seg_list[fine_values % n_seg]}),
        }
        self.segment_names = sorted({str(s) for s in seg_list}, key=str)
        self.groupings = ["segment"]
        if set(self.segment_names) != {ALL_SERIES}:
            self._codes["all"] = lag_codes.astype(np.int64)
            self._groups["all"] = pd.DataFrame({
                F.LAG: lag_list, F.SEGMENT: np.full(len(lag_list), ALL_SERIES, dtype=object)})
            self.groupings.append("all")
        self.series, self.n_series, self._n_known = self._series_codes()
        self._masks = {
            "evaluation": self._flag(IN_WINDOW),
            "tracking": self._flag(IN_TRACKING) if IN_TRACKING in frame.columns
            else self._flag(IN_WINDOW),
        }
        self._data: dict[tuple[str, str], MeasureData] = {}
        self._rows: dict[str, pd.DataFrame] = {}
        self._baselines: dict[tuple[str, str], np.ndarray] = {}
        self._scale: tuple[np.ndarray, np.ndarray] | None = None
        self._facts: dict[int, tuple[np.ndarray, ...]] = {}

    def _flag(self, column: str) -> np.ndarray:
        if column not in self.frame.columns:
            return np.ones(len(self.frame), dtype=bool)
        return self.frame[column].to_numpy(dtype=bool)

    def _series_codes(self) -> tuple[np.ndarray, int, int]:
        """Series code per row: the actuals index's code when known, else a code after them
        (from the key columns), so every series has one."""
        frame = self.frame
        if SERIES in frame.columns and self.history is not None:
            codes = frame[SERIES].to_numpy(dtype=np.int64, copy=True)
            known = self.history.n_series
        else:
            codes = np.full(len(frame), -1, dtype=np.int64)
            known = 0
        unknown = codes < 0
        if unknown.any():
            rest = frame.loc[unknown, self.keys]
            local, _ = pd.factorize(
                pd.MultiIndex.from_frame(rest.astype(object)) if len(self.keys) > 1
                else rest[self.keys[0]]
            )
            codes[unknown] = known + local
            return codes, known + int(local.max(initial=-1)) + 1, known
        return codes, known, known

    def facts(self, data: MeasureData) -> tuple[np.ndarray, ...]:
        """Per group of ``data``: usable rows, dropped rows, negative actuals, series, lag and
        segment (computed once per window and grouping)."""
        key = id(data)
        if key not in self._facts:
            stats = data.stats
            self._facts[key] = (
                stats["n"].to_numpy(), stats["n_dropped"].to_numpy(),
                stats["n_negative_y"].to_numpy(), data.series_per_group(data.units()),
                data.groups[F.LAG].to_numpy(),
                data.groups[F.SEGMENT].astype(str).to_numpy(dtype=object),
            )
        return self._facts[key]

    def groups_of(self, grouping: str) -> pd.DataFrame:
        return self._groups[grouping]

    def rows(self, window: str) -> pd.DataFrame:
        if window not in self._rows:
            mask = self._masks[window]
            self._rows[window] = (self.frame if mask.all()
                                  else self.frame.loc[mask].reset_index(drop=True))
        return self._rows[window]

    def data(self, window: str, grouping: str) -> MeasureData:
        key = (window, grouping)
        if key not in self._data:
            mask = self._masks[window]
            every = mask.all()
            scale, reason = self._scales() if self._scale_ready() else (None, None)
            self._data[key] = MeasureData(
                self.rows(window),
                self._codes[grouping] if every else self._codes[grouping][mask],
                self._groups[grouping],
                self.series if every else self.series[mask],
                self.n_series,
                self.settings,
                scale=scale,
                scale_reason=reason,
                baseline=partial(self._baseline, window) if self._history_ready() else None,
            )
        return self._data[key]

    def _history_ready(self) -> bool:
        return (self.history is not None and self.frequency is not None
                and F.ISSUED in self.frame.columns and F.PERIOD in self.frame.columns)

    def _scale_ready(self) -> bool:
        return self._history_ready()

    def _scales(self) -> tuple[np.ndarray, np.ndarray]:
        """Per series code: MASE's scale from the actuals before the issue date of the
        earliest cycle evaluated, and the reason code (one vectorised pass)."""
        if self._scale is None:
            assert self.history is not None and self.frequency is not None
            rows = self.rows("evaluation")
            y = rows[F.ACTUAL].to_numpy(dtype=np.float64, na_value=np.nan)
            f = rows[F.FORECAST].to_numpy(dtype=np.float64, na_value=np.nan)
            used = rows.loc[~(np.isnan(y) | np.isnan(f)), F.ISSUED]
            scale = np.full(self.n_series, np.nan)
            reason = np.full(self.n_series, SCALE_TOO_FEW_ROWS, dtype=np.int8)
            if len(used):
                earliest = pd.Series([used.min()])
                before = int(known_through(earliest, self.frequency)[0]) + 1
                known, pairs = self.history.scales(self.settings.seasonal_period, before)
                scale[: known.size] = known
                reason[: known.size] = np.where(
                    pairs == 0, SCALE_TOO_FEW_ROWS, np.where(known > 0, SCALE_OK, SCALE_ZERO))
            self._scale = (scale, reason)
        return self._scale

    def _baseline(self, window: str, kind: str) -> np.ndarray:
        """The ``naive`` or ``seasonal_naive`` forecast of each row of ``window``."""
        key = (window, kind)
        if key not in self._baselines:
            assert self.history is not None and self.frequency is not None
            rows = self.rows(window)
            mask = self._masks[window]
            series = self.series if mask.all() else self.series[mask]
            series = np.where(series < self._n_known, series, -1)
            known = known_through(rows[F.ISSUED], self.frequency)
            if kind == "naive":
                values = naive_forecast(self.history, series, known)
            elif kind == "seasonal_naive":
                target = self.history.positions(rows[F.PERIOD])
                values = seasonal_naive_forecast(self.history, series, target, known,
                                                 self.settings.seasonal_period)
            else:
                raise ValueError(f"unknown baseline {kind!r}; use 'naive' or 'seasonal_naive'")
            self._baselines[key] = values
        return self._baselines[key]
