"""One task per shard, a tree of merges, the finish on the client.

:func:`shard_task` builds a shard's canonical frames (:func:`~accuracy_checks.dask.shards.
shard_inputs`) and reduces them to a :class:`ShardPartial`: the row checks' and coverage
checks' partials, the accuracy stage's partial (:mod:`accuracy_checks.dask.accuracy`), the
segment names seen and the counts the run's info reports; it also writes the shard's part of
the snapshot (:mod:`.snapshot`). :func:`merge_shards` is associative and order-free;
:func:`run_shards` merges the partials as a tree (never more than :data:`FAN_IN` at a time)
and finishes every result on the client.
"""

from __future__ import annotations

import time
from collections.abc import Sequence
from dataclasses import dataclass, field, replace
from typing import Any

import numpy as np
import pandas as pd

from accuracy_checks.config import Config
from accuracy_checks.dask.archived import WorkerArchived
from accuracy_checks.dask.coverage import (
    CoveragePartial,
    coverage_partial,
    finish_coverage,
    merge_coverage,
    resolve_unexpected,
)
from accuracy_checks.dask.read import ORDER, SHARD
from accuracy_checks.dask.rows import (
    RowsPartial,
    actuals_partial,
    finish_actuals,
    finish_output,
    merge_rows,
    output_partial,
)
from accuracy_checks.dask.shards import Plan, merge_repeated, prepared_inputs, shard_inputs
from accuracy_checks.results import CheckResult
from accuracy_checks.sources import frames as F
from accuracy_checks.sources.load import ArchivedCycles, Progress

__all__ = ["FAN_IN", "DaskRun", "Job", "ShardPartial", "merge_shards", "run_shards", "shard_task"]

#: partials merged by one task of the tree reduction
FAN_IN = 8
MAX_EXAMPLES = 10


@dataclass
class Job:
    """Everything the shard tasks need: the plan, the shard count, the inputs as dask
    dataframes (with ``__shard``), the archived cycles (a
    :class:`~accuracy_checks.dask.archived.WorkerArchived`: their pieces, read on the workers;
    else rows read on the client), the run's info."""

    plan: Plan
    n_shards: int
    forecast: Any
    actuals: Any
    history: Any
    archived: ArchivedCycles | None
    ordinal_base: int
    info: dict[str, Any] = field(default_factory=dict)


@dataclass
class DaskRun:
    """What the engine needs from a dask run: the results, the cycle, the inputs' info, the
    staged snapshot (``None``: not staged)."""

    results: list[CheckResult]
    issued: pd.Timestamp
    info: dict[str, object]
    staged: Any = None
    #: the segment names of forecast, actuals and earlier cycles (for ``config.thresholds``)
    segments: set[str] = field(default_factory=set)


@dataclass
class ShardPartial:
    """One or several shards' mergeable reductions."""

    output: RowsPartial
    actuals: RowsPartial
    coverage: CoveragePartial
    accuracy: Any
    segments: set[str] = field(default_factory=set)
    counts: dict[str, int] = field(default_factory=dict)
    #: the accuracy stage's rows when its mergeable form is not available (see ``run_shards``)
    rows: list[tuple[pd.DataFrame, pd.DataFrame]] = field(default_factory=list)
    #: actuals rows repeating a series and period (count, first rows): the run is refused
    repeated: tuple[int, pd.DataFrame] | None = None


def _segment_names(*frames: pd.DataFrame | None) -> set[str]:
    names: set[str] = set()
    for frame in frames:
        if frame is not None and len(frame) and F.SEGMENT in frame.columns:
            names |= {str(s) for s in frame[F.SEGMENT].dropna().unique()}
    return names


def shard_task(config: Config, plan: Plan, forecast: pd.DataFrame, actuals: pd.DataFrame,
               history: pd.DataFrame | None, archived: pd.DataFrame | None, *,
               accuracy_plan: Any, stage: Any, index: int, prepared: bool = False,
               previous: pd.DataFrame | None = None) -> ShardPartial:
    """One shard's partial (module doc). ``prepared``: the frames are canonical already
    (read on the client); else raw pieces' rows. ``previous``: the shard's rows of the
    previous cycle's key columns (its series are counted)."""
    from accuracy_checks.sources.codes import n_distinct

    keys = list(config.forecast.keys)
    if prepared:
        inputs = prepared_inputs(config, plan, forecast, actuals, history, archived)
    else:
        inputs = shard_inputs(config, plan, forecast, actuals, history, archived)
    if inputs.repeated is not None:  # the run is refused: nothing else to check
        return ShardPartial(RowsPartial(), RowsPartial(), CoveragePartial(), None,
                            repeated=inputs.repeated)
    fc = config.forecast
    qcols = [F.quantile_column(t) for t in fc.quantiles]
    allow = fc.allow_negative
    out = output_partial(inputs.forecast, plan, keys=keys, quantile_columns=qcols,
                         quantile_names=list(fc.quantiles.values()),
                         allow_negative=allow if isinstance(allow, bool) else set(allow),
                         max_examples=MAX_EXAMPLES)
    act = actuals_partial(inputs.actuals, keys=keys, max_examples=MAX_EXAMPLES)
    known = [t for t in (inputs.mapping, inputs.older) if t is not None]
    cov = coverage_partial(inputs.forecast, inputs.actuals, plan, keys=keys,
                           frequency=config.frequency, horizon=config.horizon,
                           known_series=known, max_examples=MAX_EXAMPLES,
                           defer_unexpected=plan.cut_actuals and not prepared)
    earlier = inputs.earlier
    counts = {
        "forecast_series": n_distinct(inputs.forecast, keys) if len(inputs.forecast) else 0,
        "earlier": len(earlier),
        "history": int((earlier[F.SOURCE] == "history").sum()) if len(earlier) else 0,
        "actuals": len(inputs.actuals),
    }
    if previous is not None:
        counts["previous_series"] = n_distinct(previous, keys) if len(previous) else 0
    partial = ShardPartial(out, act, cov, None,
                           _segment_names(inputs.forecast, inputs.actuals, earlier), counts)
    e, a = _canonical(earlier), _canonical(inputs.actuals)
    if accuracy_plan is not None:
        from accuracy_checks.dask.accuracy import accuracy_partial

        partial.accuracy = accuracy_partial(accuracy_plan, e, a)
    else:
        partial.rows = [(earlier, inputs.actuals)]
    if stage is not None and len(inputs.forecast):
        stage.write_part(index, _canonical(inputs.forecast))
    return partial


def _canonical(frame: pd.DataFrame) -> pd.DataFrame:
    """``frame`` without the engine's own columns."""
    return frame.drop(columns=[c for c in (ORDER, SHARD) if c in frame.columns])


def merge_shards(parts: Sequence[ShardPartial]) -> ShardPartial:
    """The partial of the union of the parts' shards (associative, order-free)."""
    accuracy = [p.accuracy for p in parts if p.accuracy is not None]
    merged_accuracy = None
    if accuracy:
        from accuracy_checks.dask.accuracy import merge_partials

        merged_accuracy = merge_partials(accuracy)
    counts: dict[str, int] = {}
    for p in parts:
        for name, n in p.counts.items():
            counts[name] = counts.get(name, 0) + n
    return ShardPartial(
        merge_rows([p.output for p in parts], MAX_EXAMPLES),
        merge_rows([p.actuals for p in parts], MAX_EXAMPLES),
        merge_coverage([p.coverage for p in parts], MAX_EXAMPLES),
        merged_accuracy,
        set().union(*(p.segments for p in parts)),
        counts,
        [r for p in parts for r in p.rows],
        merge_repeated([p.repeated for p in parts]))


def _tree(client: Any, futures: list[Any]) -> Any:
    """Merge ``futures`` of partials by a tree of :func:`merge_shards` tasks."""
    while len(futures) > 1:
        futures = [client.submit(merge_shards, futures[i:i + FAN_IN], pure=False)
                   for i in range(0, len(futures), FAN_IN)]
    return futures[0]


def _partitions(frame: Any, n_shards: int) -> list[Any]:
    """The frame shuffled by ``__shard`` into ``n_shards`` partitions, as delayed objects
    (partition *i* of every input holds the same shards)."""
    if frame is None:
        return [None] * n_shards
    shuffled = frame.shuffle(on=SHARD, npartitions=n_shards)
    parts = shuffled.to_delayed()
    assert len(parts) == n_shards
    return list(parts)


def run_shards(config: Config, client: Any, job: Job, *, progress: Progress,
               snapshot: bool) -> Any:
    """Shard tasks → tree merge → the finished results (a
    :class:`~accuracy_checks.dask.run.DaskRun`)."""
    import dask

    from accuracy_checks.checks.judge import Thresholds
    from accuracy_checks.dask.accuracy_stage import accuracy_plan_or_none, finish_accuracy_stage
    from accuracy_checks.dask.snapshot import StagedParts

    t0 = time.perf_counter()
    plan = job.plan
    archived = job.archived or ArchivedCycles()
    prepared = bool(job.info.get("prepared"))
    on_workers = archived if isinstance(archived, WorkerArchived) else None
    if on_workers is not None:  # the archived rows are read on the workers
        arch_frame = on_workers.rows(job.n_shards)
        if on_workers.starts is not None:
            from accuracy_checks.dask.plan import min_starts

            starts = [s for s in (plan.extra.get("earlier_starts"), on_workers.starts)
                      if isinstance(s, pd.Series)]
            plan = replace(plan, extra={**plan.extra, "earlier_starts": min_starts(starts)})
    else:
        arch_frame = (job.info.get("older") if prepared else
                      _archived_frame(config, archived, job.ordinal_base, job.n_shards))
    acc_plan = accuracy_plan_or_none(config, plan, archived)
    if acc_plan is None:
        progress("dask engine: the accuracy stage of this config's measures has no mergeable "
                 "form yet: the shards hand their evaluation rows to the client")
    stage = StagedParts.start(config, plan.issued) if snapshot else None
    plan_f = client.scatter(plan, broadcast=True)
    acc_f = client.scatter(acc_plan, broadcast=True) if acc_plan is not None else None
    f, a, h = (_partitions(x, job.n_shards) for x in (job.forecast, job.actuals, job.history))
    arch = _partitions(arch_frame, job.n_shards)
    prev = _partitions(on_workers.previous_keys(job.n_shards)
                       if on_workers is not None else None, job.n_shards)
    tasks = [dask.delayed(shard_task)(config, plan_f, f[i], a[i], h[i], arch[i],
                                      accuracy_plan=acc_f, stage=stage, index=i,
                                      prepared=prepared, previous=prev[i],
                                      dask_key_name=f"shard-{i}")
             for i in range(job.n_shards)]
    try:
        futures = client.compute(tasks)
        merged: ShardPartial = _tree(client, futures).result()
        if merged.repeated is not None:  # the pandas engine's refusal, for the whole file
            from accuracy_checks.sources.readers import repeated_actuals_error

            count, rows = merged.repeated
            raise repeated_actuals_error(count, rows.drop(columns=[ORDER], errors="ignore"),
                                         plan.actuals_place)  # type: ignore[arg-type]
    except BaseException:
        if stage is not None:
            stage.discard()
        raise
    progress(f"dask engine: {job.n_shards} shards checked and merged in "
             f"{time.perf_counter() - t0:.1f} s")
    book = Thresholds(config)
    fc = config.forecast
    keys = list(fc.keys)
    qcols = [F.quantile_column(t) for t in fc.quantiles]
    results: list[CheckResult] = list(archived.notes)
    results += finish_output(merged.output, plan, keys=keys, quantile_columns=qcols,
                             quantile_names=list(fc.quantiles.values()),
                             max_examples=MAX_EXAMPLES)
    results += finish_actuals(merged.actuals, column=config.actuals.value,
                              max_examples=MAX_EXAMPLES)
    if merged.coverage.unknown:
        found = _older_known(client, job, merged.coverage.unknown, keys)
        resolve_unexpected(merged.coverage, found, keys, MAX_EXAMPLES)
    previous = archived.previous
    n_prev = None
    if on_workers is not None and on_workers.previous_pieces is not None:
        n_prev = merged.counts.get("previous_series", 0)
    elif previous is not None:
        from accuracy_checks.sources.codes import n_distinct

        n_prev = n_distinct(previous, keys) if len(previous) else 0
    results += finish_coverage(
        merged.coverage, plan, frequency=config.frequency, horizon=config.horizon,
        active_periods=config.coverage.active_periods, book=book,
        known_tables=plan.mapping is not None or plan.cut_actuals,
        previous_series=n_prev, previous_label=archived.previous_label,
        max_examples=MAX_EXAMPLES)
    results += finish_accuracy_stage(config, acc_plan, merged, book)
    info = _info(config, job, merged.counts)
    return DaskRun(results, plan.issued, info, stage, segments=merged.segments)


def _archived_frame(config: Config, archived: ArchivedCycles, base: int,
                    n_shards: int) -> Any:
    """The archived cycles' rows (read on the client) as a dask dataframe with ``__order``
    and ``__shard``."""
    import dask.dataframe as dd

    from accuracy_checks.dask.read import shard_of

    frames = [f for f in archived.frames if len(f)]
    if not frames:
        return None
    keys = list(config.forecast.keys)
    parts = []
    for i, frame in enumerate(frames):
        frame = frame.assign(**{k: frame[k].astype(object).astype("str") for k in keys})
        if F.SEGMENT in frame.columns:
            frame[F.SEGMENT] = frame[F.SEGMENT].astype(object)
        frame[ORDER] = (np.int64(base + i) << 40) + np.arange(len(frame), dtype=np.int64)
        frame[SHARD] = shard_of(frame, keys, n_shards)
        parts.append(frame)
    whole = pd.concat(parts, ignore_index=True)
    return dd.from_pandas(whole, npartitions=max(1, min(n_shards, len(whole) // 100_000 + 1)))


def _info(config: Config, job: Job, counts: dict[str, int]) -> dict[str, object]:
    """``Inputs.info`` of the run, from the merged counts."""
    places = job.info.get("places") or {}
    return {
        "forecast": {**places.get("forecast", {"path": str(config.forecast.place)}),
                     "rows": job.info.get("forecast_rows", 0),
                     "series": counts.get("forecast_series", 0)},
        "actuals": {**places.get("actuals", {"path": str(config.actuals.place)}),
                    "rows": counts.get("actuals", 0)},
        "earlier": {"rows": counts.get("earlier", 0),
                    "history_rows": counts.get("history", 0),
                    "archive_rows": counts.get("earlier", 0) - counts.get("history", 0)},
        **{k: v for k, v in places.items() if k not in ("forecast", "actuals")},
    }


def older_known(item: Any, *, reader: Any, wanted: pd.DataFrame) -> set[tuple[str, ...]]:
    """The series of ``wanted`` (key columns) that one actuals piece names (any row)."""
    frame = reader(item)
    keys = list(wanted.columns)
    if not len(frame):
        return set()
    hit = frame[keys].drop_duplicates().merge(wanted, on=keys, how="inner")
    return set(zip(*(hit[k].astype(str).tolist() for k in keys), strict=True))


def _older_known(client: Any, job: Job, unknown: list[Any],
                 keys: list[str]) -> set[tuple[str, ...]]:
    """Which deferred unknown series the actuals' older rows name: a semi-join of the (few)
    unknown series with every actuals piece's key columns, on the workers."""
    pieces = job.info.get("older_pieces") or []
    if not pieces:
        return set()
    wanted = pd.DataFrame([u[0] for u in unknown], columns=keys).drop_duplicates()
    wanted = wanted.astype({k: "str" for k in keys})
    wanted_f = client.scatter(wanted, broadcast=True)
    found = client.gather(client.map(older_known, pieces, reader=job.info["older_reader"],
                                     wanted=wanted_f, pure=False))
    return set().union(*found)
