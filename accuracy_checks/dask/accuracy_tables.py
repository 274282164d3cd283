"""The plan and the partial of the dask accuracy stage, and how partials merge.

A partial holds small frames keyed by group (:data:`GROUP_KEYS`): sufficient statistics
(merged by the parallel-variance rule of :func:`~accuracy_checks.measures.stats.merge_stats`),
additive sums (:func:`merge_sums`), per-series rows of per-series reductions (concatenated:
a series lives in one shard) and the top-k offender candidates of each group and ordering
(:func:`merge_candidates`: the top k of a union is the top k of the parts' top k, with the
pandas engine's total order ``(−score, series code)``; across shards the series code is ranked
again from the key labels: :func:`label_order`).
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from accuracy_checks.evaluation.baselines import ActualsIndex
from accuracy_checks.measures.data import (
    SCALE_OK,
    SCALE_TOO_FEW_ROWS,
    SCALE_ZERO,
    MeasureData,
    MeasureSettings,
)
from accuracy_checks.measures.registry import get_measure

__all__ = ["GROUP_KEYS", "LABELS_SORTED", "ORDERINGS", "AccuracyPartial", "AccuracyPlan",
           "label_order", "merge_candidates", "merge_sums", "series_scales", "top_candidates"]

#: what identifies a group across shards: the window measured, the grouping (``segment``:
#: per (lag, segment); ``all``: per lag, segment ``"*"``), the lag, the segment's rank (its
#: category code; ``-1`` for ``"*"``) and its label
GROUP_KEYS = ["window", "grouping", "lag", "seg_rank", "segment"]

#: the candidates' ``attrs`` flag: their shard's key categories were in sorted order, so the
#: key labels' text order is the series order (:func:`merge_candidates`)
LABELS_SORTED = "labels_sorted"

#: the offender orderings a group may need once merged: by absolute error (``abs``), by the
#: bias when the group's net error is positive (``pos``), negative (``neg``) or zero
#: (``zero``); the score of each as :func:`~accuracy_checks.checks.offenders.worst_offenders`
#: computes it (NaN ranks first)
ORDERINGS = ("abs", "pos", "neg", "zero")


@dataclass(frozen=True)
class AccuracyPlan:
    """The global facts of a run's accuracy stage (small, picklable)."""

    keys: list[str]
    frequency: str
    lags: list[int]
    min_obs: int
    offenders: int
    measures: list[str]
    settings: MeasureSettings
    #: the evaluation window's periods, the tracking window's (empty without a tracking
    #: measure) and every period either covers (time order)
    window: list[pd.Timestamp]
    tracking: list[pd.Timestamp]
    periods: list[pd.Timestamp]
    #: each earlier cycle's first period over all series, by issue date
    cycle_starts: dict[pd.Timestamp, pd.Timestamp]
    #: the issue dates that can be the earliest cycle evaluated (MASE's cut), when MASE is
    #: reported
    scale_issues: list[pd.Timestamp] = field(default_factory=list)

    @property
    def windows(self) -> list[str]:
        """The windows measured: ``evaluation``, and ``tracking`` when a measure uses it."""
        wanted = {get_measure(m).window for m in self.measures}
        return ["evaluation", *(["tracking"] if "tracking" in wanted else [])]


@dataclass
class AccuracyPartial:
    """One or several shards' mergeable reductions (small, picklable).

    ``n_rows``: evaluation-frame rows (both windows); ``segments``: segment label → rank;
    ``cycles``: (issue date, attempt, source) of the window rows with an actual; ``stats``:
    :data:`~accuracy_checks.measures.stats.STAT_COLUMNS` per group; ``sums``: additive
    per-group figures (``n_series``: series with usable rows …); ``candidates``: the top-k
    offender candidates of each group and ordering; ``tables``: the families' reductions by
    name (additive sums keyed by the columns in ``attrs["keys"]``, or per-series rows to
    concatenate when ``attrs["keys"]`` is empty).
    """

    n_rows: int = 0
    segments: dict[str, int] = field(default_factory=dict)
    cycles: set[tuple[pd.Timestamp, int | None, str]] = field(default_factory=set)
    stats: pd.DataFrame | None = None
    sums: pd.DataFrame | None = None
    candidates: pd.DataFrame | None = None
    tables: dict[str, pd.DataFrame] = field(default_factory=dict)
    #: the smallest MASE cut of the shards (``None``: no usable evaluation row)
    cut: int | None = None


def merge_sums(parts: Sequence[pd.DataFrame], keys: Sequence[str] = tuple(GROUP_KEYS)
               ) -> pd.DataFrame:
    """Additive figures of the same keys summed over the parts (every other column a sum);
    ``keys`` empty: the parts' rows concatenated (per-series rows, one shard each)."""
    kept = [p for p in parts if len(p)] or list(parts[:1])
    stacked = pd.concat(kept, ignore_index=True) if len(kept) > 1 else kept[0]
    if not keys or len(kept) == 1:
        return stacked
    out = stacked.groupby(list(keys), sort=False, dropna=False).sum().reset_index()
    out.attrs = dict(kept[0].attrs)
    return out


def scores(sum_e: np.ndarray, sum_abs: np.ndarray, ordering: str) -> np.ndarray:
    """The offender score of each series under ``ordering``, as ``worst_offenders`` ranks:
    ``Σ|e|``, or ``Σe · sign(group's Σe)``; NaN (an undefined product) ranks first."""
    with np.errstate(invalid="ignore"):
        if ordering == "abs":
            score = sum_abs
        else:
            direction = {"pos": 1.0, "neg": -1.0, "zero": 0.0}[ordering]
            score = sum_e * direction
    return np.nan_to_num(score, nan=np.inf)


def top_candidates(frame: pd.DataFrame, limit: int) -> pd.DataFrame:
    """The first ``limit`` rows of each (group, ordering) by ``(−score, comb)``."""
    if limit <= 0 or len(frame) == 0:
        out = frame.iloc[:0]
    else:
        keys = [*GROUP_KEYS, "ordering"]
        group = frame.groupby(keys, sort=False, dropna=False).ngroup().to_numpy()
        order = np.lexsort((frame["comb"].to_numpy(), -frame["score"].to_numpy(), group))
        ranked = frame.iloc[order]
        rank = ranked.groupby(keys, sort=False, dropna=False).cumcount().to_numpy()
        out = ranked.loc[rank < limit].reset_index(drop=True)
    out.attrs = {"limit": limit}
    return out


def label_order(frame: pd.DataFrame) -> np.ndarray:
    """The rank of each candidate's series in the pandas engine's series order: its key labels
    (the ``label:<key>`` columns) compared key by key as text, which is the order of the run's
    key category codes (the loader gives every key column one sorted set of categories).

    A shard's ``comb`` (its own category codes in mixed radix) follows the same order within
    the shard, but shards number their categories apart, so candidates of several shards are
    ranked again from their labels before their ties are broken."""
    columns = [c for c in frame.columns if c.startswith("label:")]
    if not columns:
        return frame["comb"].to_numpy()
    codes = [pd.factorize(frame[c].astype(object).to_numpy(), sort=True)[0] for c in columns]
    order = np.lexsort(codes[::-1])
    rank = np.empty(len(frame), dtype=np.int64)
    rank[order] = np.arange(len(frame), dtype=np.int64)
    return rank


def merge_candidates(parts: Sequence[pd.DataFrame], limit: int) -> pd.DataFrame:
    """The top ``limit`` candidates of each (group, ordering) over the parts: ties broken by
    :func:`label_order` when every part's key categories were sorted (as the loader gives
    them; the shards then number them apart), else by ``comb`` (parts that share one set of
    categories, in any order)."""
    kept = [p for p in parts if len(p)] or list(parts[:1])
    if not kept:
        return pd.DataFrame()
    by_labels = all(p.attrs.get(LABELS_SORTED, False) for p in kept)
    if len(kept) == 1:
        out = top_candidates(kept[0], limit)
    else:
        stacked = pd.concat(kept, ignore_index=True)
        out = top_candidates(stacked.assign(comb=label_order(stacked)) if by_labels
                             else stacked, limit)
    out.attrs[LABELS_SORTED] = by_labels
    return out


def empty_data(groups: pd.DataFrame, settings: MeasureSettings) -> MeasureData:
    """A :class:`MeasureData` of ``groups`` without rows: what the judging code reads about
    groups (labels, settings) when the figures come from merged reductions."""
    rows = pd.DataFrame({"actual": pd.Series(dtype=np.float64),
                         "forecast": pd.Series(dtype=np.float64)})
    empty = np.zeros(0, dtype=np.int64)
    return MeasureData(rows, empty, groups.reset_index(drop=True), empty, 0, settings)


def series_scales(history: ActualsIndex | None, n_series: int, settings: MeasureSettings,
            before: int) -> tuple[np.ndarray, np.ndarray]:
    """Per series code: MASE's scale at the cut ``before`` and its reason code (as
    ``EvaluationGroups._scales`` sets them)."""
    scale = np.full(n_series, np.nan)
    reason = np.full(n_series, SCALE_TOO_FEW_ROWS, dtype=np.int8)
    if history is not None:
        known, pairs = history.scales(settings.seasonal_period, before)
        scale[: known.size] = known
        reason[: known.size] = np.where(
            pairs == 0, SCALE_TOO_FEW_ROWS, np.where(known > 0, SCALE_OK, SCALE_ZERO))
    return scale, reason
