"""Accuracy of many segments, fanned out: per-partition statistics, merged, then judged.

For large segment sets the accuracy measures need not run in one process. The evaluation
window's rows are split into partitions that each hold whole segments
(:func:`segment_partitions`); each partition reduces its rows to the mergeable sufficient
statistics of :mod:`accuracy_checks.measures.stats` per (lag, segment) (:func:`partition_stats`,
the Prefect task :data:`segment_stats`, which Prefect's Dask task runner runs on its
workers); :func:`merge_partition_stats` merges them (``merge_stats``) and adds all series
together, segment ``"*"`` (``total_stats``: the parallel-variance merge); :func:`judge_stats`
computes every reported measure that has a ``from_stats`` formula (the core measures: ``me``,
``bias_pct``, ``mae``, ``mape``, ``wape``, ``rmse``, ``sde``) through the one registry and
judges it with the config's thresholds, with the single-process rules (``no_data`` when no
row has both values, ``too_few_rows`` below ``evaluation.min_obs``, an undefined value gets
``evaluation.undefined_status`` under a threshold).

The figures equal the single-process ``run_checks`` ones: a segment's sums run over the same
rows in the same order (bit for bit), and segment ``"*"`` merges them to rounding (~1e-12
relative). ``n_series`` of ``"*"`` is the sum over segments (a series belongs to one
segment). Measures computed per series or over time (MASE, tracking signal, intervals …)
need their rows together and stay in the single-process gate.
"""

from __future__ import annotations

import itertools
from collections.abc import Sequence
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd
from prefect import task
from prefect.cache_policies import NO_CACHE

from accuracy_checks.checks.accuracy import NOT_DETAILS as _NOT_DETAILS
from accuracy_checks.checks.judge import Figure, Thresholds, judge_figure, span_words
from accuracy_checks.config import Config
from accuracy_checks.measures.registry import get_measure
from accuracy_checks.measures.selection import measure_settings, measures_to_report
from accuracy_checks.measures.stats import error_stats, merge_stats, overflowed, total_stats
from accuracy_checks.results import ALL_SERIES, CheckResult, Reason, json_value
from accuracy_checks.sources import frames as F

__all__ = [
    "EvaluationRows",
    "evaluation_rows",
    "judge_stats",
    "merge_partition_stats",
    "partition_stats",
    "segment_partitions",
    "segment_stats",
    "stats_measures",
]

_BY = [F.LAG, F.SEGMENT]


@dataclass(frozen=True)
class EvaluationRows:
    """The evaluation window's rows (key columns, ``lag``, ``segment``, ``actual``,
    ``forecast``) and the window in words."""

    frame: pd.DataFrame
    keys: list[str]
    window: str


def evaluation_rows(config: Config, *, forecast_path: Path | None = None,
                    actuals_path: Path | None = None) -> EvaluationRows:
    """Read the inputs as the gate does and return the rows the accuracy checks measure
    (earlier forecasts of the configured lags joined with actuals, in the window). Raises
    ``UsageError`` on an unusable config or input; writes nothing."""
    from accuracy_checks.engine import archived_cycles
    from accuracy_checks.evaluation.join import IN_WINDOW, evaluation_frame
    from accuracy_checks.sources.load import load_inputs

    keys = list(config.forecast.keys)
    inputs = load_inputs(config, forecast_path=forecast_path, actuals_path=actuals_path,
                         archive=archived_cycles(config))
    ev = evaluation_frame(inputs.earlier, inputs.actuals, keys=keys, frequency=config.frequency,
                          lags=list(config.evaluation.lags), window=config.evaluation.window)
    frame = ev.frame
    if IN_WINDOW in frame.columns:
        frame = frame.loc[frame[IN_WINDOW].to_numpy(dtype=bool)]
    frame = frame.loc[:, [*keys, F.LAG, F.SEGMENT, F.ACTUAL, F.FORECAST]].reset_index(drop=True)
    return EvaluationRows(frame, keys, span_words(ev.window))


def segment_partitions(frame: pd.DataFrame, n_parts: int) -> list[pd.DataFrame]:
    """Split ``frame`` into at most ``n_parts`` partitions, each holding whole segments
    (segments dealt round-robin in sorted order); rows keep their order within a partition.

    >>> f = pd.DataFrame({"segment": ["b", "a", "c", "a"], "x": [1, 2, 3, 4]})
    >>> [p["x"].tolist() for p in segment_partitions(f, 2)]
    [[2, 3, 4], [1]]
    """
    if n_parts < 1:
        raise ValueError(f"n_parts must be ≥ 1, got {n_parts}")
    codes, _ = pd.factorize(frame[F.SEGMENT], sort=True)
    part = np.where(codes >= 0, codes % n_parts, 0)
    order = np.argsort(part, kind="stable")
    bounds = np.searchsorted(part[order], np.arange(n_parts + 1))
    return [frame.iloc[order[a:b]] for a, b in itertools.pairwise(bounds) if b > a]


def partition_stats(part: pd.DataFrame, keys: Sequence[str]) -> pd.DataFrame:
    """:func:`~accuracy_checks.measures.stats.error_stats` of one partition per (lag,
    segment), plus ``n_series``: the series with both an actual and a forecast in the group.
    """
    stats = error_stats(part, _BY)
    y = part[F.ACTUAL].to_numpy(dtype=np.float64, na_value=np.nan)
    f = part[F.FORECAST].to_numpy(dtype=np.float64, na_value=np.nan)
    usable = part.loc[~(np.isnan(y) | np.isnan(f)), [*_BY, *keys]].drop_duplicates()
    counts = usable.groupby(_BY, observed=True, sort=True).size().rename("n_series")
    stats = stats.merge(counts.reset_index(), on=_BY, how="left")
    return stats.assign(n_series=stats["n_series"].fillna(0).astype(np.int64))


#: :func:`partition_stats` as a Prefect task (no caching: its input is a frame).
segment_stats = task(name="segment-stats", cache_policy=NO_CACHE,
                     persist_result=False)(partition_stats)


def merge_partition_stats(parts: Sequence[pd.DataFrame]) -> pd.DataFrame:
    """Merge partitions' statistics per (lag, segment) and add segment ``"*"`` per lag."""
    parts = [p for p in parts if len(p)]
    if not parts:
        return pd.DataFrame(columns=[*_BY, "n_series"])
    plain = [p.assign(**{F.SEGMENT: p[F.SEGMENT].astype(str)}) for p in parts]
    merged = merge_stats([p.drop(columns="n_series") for p in plain], _BY)
    series = (pd.concat([p[[*_BY, "n_series"]] for p in plain], ignore_index=True)
              .groupby(_BY, sort=True)["n_series"].sum().reset_index())
    merged = merged.merge(series, on=_BY, how="left")
    if set(merged[F.SEGMENT]) == {ALL_SERIES}:
        return merged
    star = total_stats(merged, [F.LAG])
    star_series = merged.groupby(F.LAG, sort=True)["n_series"].sum().reset_index()
    star = star.merge(star_series, on=F.LAG, how="left").assign(**{F.SEGMENT: ALL_SERIES})
    return pd.concat([merged, star.loc[:, merged.columns]], ignore_index=True)


def stats_measures(config: Config) -> list[str]:
    """The measures a run of ``config`` reports that have a ``from_stats`` formula."""
    return [m for m in measures_to_report(config) if get_measure(m).from_stats is not None]


def judge_stats(stats: pd.DataFrame, config: Config, *, window: str = "the window"
                ) -> list[CheckResult]:
    """Accuracy results (check ``accuracy``) of every :func:`stats_measures` measure for each
    row of merged statistics, judged and worded by the single-process gate's own
    :func:`~accuracy_checks.checks.judge.judge_figure`. ``window`` is the window in words
    (:attr:`EvaluationRows.window`)."""
    book = Thresholds(config)
    settings = measure_settings(config)
    min_obs = config.evaluation.min_obs
    lags = stats[F.LAG].to_numpy()
    segments = stats[F.SEGMENT].astype(str).to_numpy(dtype=object)
    n_obs = stats["n"].to_numpy()
    n_series = stats["n_series"].to_numpy()
    dropped = stats["n_dropped"].to_numpy()
    negative = stats["n_negative_y"].to_numpy()
    overflow = overflowed(stats)  # sums beyond the float64 range: judged beyond any level
    out: list[CheckResult] = []
    for measure_id in stats_measures(config):
        measure = get_measure(measure_id)
        assert measure.from_stats is not None
        frame = measure.from_stats(stats)
        values = frame["value"].to_numpy(dtype=np.float64)
        reasons = frame["reason"].to_numpy(dtype=object) if "reason" in frame.columns \
            else np.full(len(frame), None, dtype=object)
        extras = {c: frame[c].to_numpy() for c in frame.columns if c not in _NOT_DETAILS}
        for i in range(len(stats)):
            value = float(values[i]) if np.isfinite(values[i]) else None
            reason = reasons[i] if isinstance(reasons[i], str) else None
            if reason is None and int(n_obs[i]) > 0 and (overflow[i] or np.isinf(values[i])):
                value, reason = None, Reason.OVERFLOW
            details: dict[str, Any] = {"window": window, "n_dropped": int(dropped[i]),
                                       "n_negative_actuals": int(negative[i])}
            details.update({c: json_value(column[i]) for c, column in extras.items()})
            figure = Figure(int(lags[i]), str(segments[i]), value, reason, int(n_obs[i]),
                            int(n_series[i]), measure.unit or None, details=details)
            out.append(judge_figure(measure, figure, book, min_obs=min_obs, span=window,
                                    settings=settings))
    return out
