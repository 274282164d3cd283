"""The dask engine's part of a run: read in pieces, plan, shard, check, merge, finish.

:func:`evaluate_on_dask` replaces ``load_inputs`` + ``evaluate`` of the pandas engine
(:mod:`accuracy_checks.engine`); drift, waivers and the store record stay the engine's. The
steps:

1. **pieces** of every input file, local or of a dataset (a Hive-partitioned folder, object
   storage: :mod:`.places`, :mod:`.stores`, :mod:`.read`); with tables among the inputs, the
   tables in partitions and the files in pieces (:mod:`.sql_run`); an input the workers cannot
   read (a query, a ``memory://`` or ``https://`` URL, a frame given in memory) makes the run
   read its inputs with the pandas readers on the client, then shard them the same way
   (:mod:`.client_read`);
2. **plan** (:mod:`.plan`): small reductions of every piece on the workers → the run's issue
   date, the periods read, the windows, each cycle's first period; the mapping is read on the
   client, the archived cycles' snapshots are chosen there and read in pieces on the workers
   (:mod:`.archived`);
3. **shards**: every input as a dask dataframe with ``__shard`` (a hash of the series keys),
   shuffled into the same number of partitions by it, so partition *i* of each input holds
   the same whole series;
4. **partials** on the workers, one task per shard (:func:`shard_task`): the output, actuals
   and coverage checks (:mod:`.rows`, :mod:`.coverage`), the accuracy stage
   (:mod:`.accuracy`), the segment names, and the snapshot's part (:mod:`.snapshot`);
5. **merge** as a tree reduction, **finish** on the client: the pandas engine's results.

A refused run gets the pandas engine's refusal (:mod:`.first_error`).
"""

from __future__ import annotations

import math
import time
from collections.abc import Sequence
from dataclasses import replace
from pathlib import Path
from typing import Any

import pandas as pd

from accuracy_checks.config import Config
from accuracy_checks.config.places import Url
from accuracy_checks.dask import merge as M
from accuracy_checks.dask import plan as P
from accuracy_checks.dask.merge import DaskRun
from accuracy_checks.dask.places import (
    Explain,
    Source,
    date_filters,
    no_rows,
    source_of,
    source_pieces,
)
from accuracy_checks.dask.read import Piece, PieceReader, piece_frame
from accuracy_checks.dask.shards import Plan
from accuracy_checks.dask.stores import DatasetRead
from accuracy_checks.errors import ConfigError, InputError, UsageError
from accuracy_checks.sources.columns import Column
from accuracy_checks.sources.load import ArchiveReader, Progress, quiet
from accuracy_checks.sources.memory import GivenFrames
from accuracy_checks.sources.readers import actual_columns, forecast_columns, issued_since

__all__ = ["DaskRun", "evaluate_on_dask", "refuse_plugins"]

#: rows per shard the engine aims at (a shard's frames and its partial fit a worker easily)
SHARD_ROWS = 1_500_000


def refuse_plugins() -> None:
    """Exit 2 when check plugins are installed: they take whole frames (docs/engines.md)."""
    from accuracy_checks.checks.plugins import load_check_plugins

    plugins, _ = load_check_plugins()
    if plugins:
        names = ", ".join(sorted(p.name for p in plugins))
        raise ConfigError(
            f"Check plugins are installed ({names}); they take the whole input frames, which "
            "the dask engine never gathers in one process. Run with `engine: pandas` (or "
            "`--engine pandas`), or uninstall the plugins' packages for this run."
        )


#: each input's source: the forecast, the actuals, the history places
Places = tuple[Source, Source, list[Source]]


def _places(config: Config, forecast_path: Path | Url | None,
            actuals_path: Path | Url | None) -> Places | None:
    """How every input is read (:func:`~accuracy_checks.dask.places.source_of`: local files or
    a dataset, in pieces on the workers), or ``None`` when one is read on the client."""
    f = source_of(forecast_path or config.forecast.place, "forecast", "forecast.path")
    a = source_of(actuals_path or config.actuals.place, "actuals", "actuals.path")
    h = [source_of(p, "history", "history") for p in config.history_paths]
    if f is None or a is None or any(x is None for x in h):
        return None
    return f, a, [x for x in h if x is not None]


def evaluate_on_dask(config: Config, client: Any, *, forecast_path: Path | Url | None = None,
                     actuals_path: Path | Url | None = None, progress: Progress = quiet,
                     archive: ArchiveReader | None = None, frames: GivenFrames | None = None,
                     snapshot: bool = False) -> DaskRun:
    """Every check result of ``config`` computed on ``client``'s cluster (module doc)."""
    refuse_plugins()
    t0 = time.perf_counter()
    n_workers = max(len(client.scheduler_info().get("workers", {})), 1)
    places = None if frames is not None else _places(config, forecast_path, actuals_path)
    job = None
    if places is None and frames is None:  # tables among the inputs: read in partitions
        from accuracy_checks.dask.sql_run import sql_job

        job = sql_job(config, client, forecast_path=forecast_path, actuals_path=actuals_path,
                      progress=progress, archive=archive, n_workers=n_workers,
                      refuse_offsets=_refuse_mixed_offsets)
    if job is None and places is None:
        from accuracy_checks.dask.client_read import from_client

        progress("dask engine: inputs read on the client (a table, a query, a memory:// or "
                 "https:// URL, or frames), then sharded")
        job = from_client(config, client, forecast_path=forecast_path,
                          actuals_path=actuals_path, progress=progress, archive=archive,
                          frames=frames, n_workers=n_workers)
    if job is not None:
        progress(f"dask engine: plan and shards ready in {time.perf_counter() - t0:.1f} s "
                 f"({job.n_shards} shards on {n_workers} workers)")
        return M.run_shards(config, client, job, progress=progress, snapshot=snapshot)
    assert places is not None
    try:
        job = _from_pieces(config, client, places, forecast_path=forecast_path,
                           actuals_path=actuals_path,
                           progress=progress, archive=archive, n_workers=n_workers)
        progress(f"dask engine: plan and shards ready in {time.perf_counter() - t0:.1f} s "
                 f"({job.n_shards} shards on {n_workers} workers)")
        return M.run_shards(config, client, job, progress=progress, snapshot=snapshot)
    except InputError as exc:
        # several broken inputs, or shards failing at once: the pandas engine's refusal
        from accuracy_checks.dask.first_error import pandas_order_error

        try:
            columns = forecast_columns(config) + _segment_columns(config, places[0])
        except UsageError as header:
            raise header from exc
        first = pandas_order_error(config, client, places[0], columns, exc)
        if first is exc:
            raise
        raise first from exc


def _from_pieces(config: Config, client: Any, places: Places, *,
                 forecast_path: Path | Url | None, actuals_path: Path | Url | None,
                 progress: Progress, archive: ArchiveReader | None, n_workers: int) -> M.Job:
    """Plan and shards of inputs read in pieces on the workers (local files and datasets:
    a dataset's pieces are the files the pandas engine's filters keep, those filters pushed
    into each piece's read)."""
    from accuracy_checks.dask.archived import archived_on_workers
    from accuracy_checks.evaluation.spans import actuals_span
    from accuracy_checks.sources.segments import read_mapping

    progress("dask engine: inputs read in pieces on the workers")
    keys = list(config.forecast.keys)
    f_src, a_src, h_srcs = places
    explain = _explainer(client)
    a_cols = actual_columns(config)
    needed = actuals_span(config)
    every_a = source_pieces(a_src, a_cols, explain=explain)
    # the pre-read of the periods holding an actual (as sources/prereads.py), on the workers
    found = P.combine_periods(client.gather(client.map(
        P.actual_periods_piece, every_a, config=config, pure=False))) \
        if needed is not None else None
    cut = needed is not None and found is not None and len(found) > needed
    kept = tuple(pd.Timestamp(p) for p in found[-needed:]) if cut and found is not None \
        and needed is not None else None

    # a dataset's columns as its reader checks them (a local file's: when read)
    f_cols = forecast_columns(config) + (_segment_columns(config, f_src)
                                         if f_src.is_dataset else [])
    f_pieces = source_pieces(f_src, f_cols, explain=explain)
    # the actuals read: only the row groups (the files) that may hold a kept period
    period = config.actuals.period
    a_pieces = source_pieces(a_src, a_cols, column=period, wanted=kept,
                             filters=date_filters(a_cols, periods=(period, kept)),
                             explain=explain) if kept is not None else every_a
    # the local history files' every row: the cycles' first periods (a dataset's: below)
    h_pieces: list[tuple[int, Piece]] = []
    for i, src in enumerate(h_srcs):
        if not src.is_dataset:
            h_pieces += [(i, p) for p in source_pieces(src, [], start=len(h_pieces))]

    _refuse_mixed_offsets(client, [(f_pieces, forecast_columns(config)),
                                   (every_a, a_cols),
                                   ([p for _, p in h_pieces], forecast_columns(config))])
    if f_src.is_dataset and not f_pieces:
        raise no_rows(f_src)
    fsum = P.combine_forecast(client.gather(client.map(P.forecast_summary, f_pieces,
                                                       config=config, pure=False)))
    if fsum.rows == 0:  # the readers' refusal
        raise no_rows(f_src)
    asums = client.gather(client.map(P.actuals_summary, a_pieces, config=config,
                                     periods=kept, pure=False))
    if sum(s.rows for s in asums) == 0:
        raise no_rows(a_src)
    win = P.windows(config, fsum, asums)
    span, issued = win.span, win.issued
    h_pieces += _dataset_history(config, h_srcs, span, start=len(h_pieces), explain=explain)
    _refuse_mixed_offsets(client, [([p for i, p in h_pieces if h_srcs[i].is_dataset],
                                    _history_dates(config))])
    since = issued_since(config, list(span))
    starts_parts = client.gather(client.map(
        P.history_starts, [p for _, p in h_pieces],
        [since if h_srcs[i].is_dataset else None for i, _ in h_pieces],
        config=config, pure=False))
    history_starts = tuple(P.min_starts([s for (i, _), s in zip(h_pieces, starts_parts,
                                                                 strict=True) if i == place])
                           for place in range(len(h_srcs)))
    plan = Plan(issued=issued, first_period=fsum.first_period,
                issue_counts=fsum.issue_counts, actual_periods=kept, span=span,
                window_start=win.window_start, history_starts=history_starts,
                actuals_place=actuals_path or config.actuals.place,
                mapping=read_mapping(config), cut_actuals=cut)


    n_rows = fsum.rows + sum(s.rows for s in asums) * 2
    n_shards = max(2 * n_workers, math.ceil(n_rows / SHARD_ROWS))
    seg_cols = tuple(config.segments.columns)
    if not f_src.is_dataset:
        f_cols = forecast_columns(config) + _segment_columns(config, f_src)
    forecast = piece_frame(PieceReader(tuple(f_cols), tuple(keys), n_shards, text=seg_cols),
                           f_pieces)
    rename = (tuple(zip(config.actual_keys, keys, strict=True))
              if config.actuals.keys and list(config.actuals.keys) != keys else ())
    actuals = piece_frame(PieceReader(tuple(a_cols), tuple(keys), n_shards,
                                      rename=rename), a_pieces)
    # the earlier cycles read: only the row groups (the files, the rows of a dataset) that
    # may hold a period of the span
    h_cols = (forecast_columns(config) + _segment_columns(config, h_srcs[0])) \
        if h_srcs and h_srcs[0].is_dataset else []
    used: list[tuple[int, Piece]] = []
    for i, src in enumerate(h_srcs):
        filters, pairs = _history_filters(config, src, span, history_starts[i], issued)
        used += [(i, p) for p in source_pieces(
            src, h_cols, start=len(used), column=config.forecast.period, wanted=span,
            filters=filters, pairs=pairs, allow_empty=True, explain=explain)]
    history: Any = None
    earlier_starts: list[pd.Series] = []
    if used:
        if not h_cols:  # (local files: the first file's header, as before)
            h_cols = forecast_columns(config) + _segment_columns(config, h_srcs[0])
        history, earlier_starts = P.history_pieces(client, config, plan, used, h_cols, keys,
                                                   n_shards, seg_cols)
    history_cycles = {pd.Timestamp(t) for s in history_starts for t in s.index}
    # the archive's snapshots chosen on the client, their rows read on the workers (numbered
    # after every history piece: the pandas engine reads the archive last)
    base = max(len(h_pieces), len(used))
    archived = (archived_on_workers(client, config, archive, issued, history_cycles, span,
                                    base=base) if archive is not None else None)
    key_cols = tuple(c for c in a_cols if c.kind == "key")
    older = PieceReader(key_cols, rename=rename, text=tuple(keys))
    return M.Job(
        plan=replace(plan, extra={"earlier_starts": P.min_starts(earlier_starts),
                                  "finite_periods": win.finite}),
        n_shards=n_shards, forecast=forecast, actuals=actuals, history=history,
        archived=archived, ordinal_base=base,
        info={"forecast_rows": fsum.rows, "older_pieces": every_a if cut else [],
              "older_reader": older, "places": {
            "forecast": {"path": str(forecast_path or config.forecast.place)},
            "actuals": {"path": str(actuals_path or config.actuals.place)}}})


def _explainer(client: Any) -> Explain:
    """The pandas engine's refusal of a dataset read, asked of a worker (it reads the dataset
    one column at a time: :func:`~accuracy_checks.dask.stores.dataset_error`)."""
    from accuracy_checks.dask.stores import dataset_error

    def explain(read: DatasetRead, columns: Sequence[Column]) -> InputError | None:
        found: InputError | None = client.submit(dataset_error, read, list(columns),
                                                 pure=False).result()
        return found

    return explain


def _dataset_history(config: Config, h_srcs: list[Source], span: tuple[pd.Timestamp, ...], *,
                     start: int, explain: Explain) -> list[tuple[int, Piece]]:
    """The pieces of the history datasets the pandas engine's pre-read of the cycles reads:
    the cycles issued since :func:`~accuracy_checks.sources.readers.issued_since` (older
    partitions never opened)."""
    fc = config.forecast
    dates = _history_dates(config)
    since = issued_since(config, list(span))
    filters = date_filters(dates, since=(fc.issued, since) if since is not None else None)
    out: list[tuple[int, Piece]] = []
    for i, src in enumerate(h_srcs):
        if src.is_dataset:
            out += [(i, p) for p in source_pieces(src, dates, start=start + len(out),
                                                  filters=filters, allow_empty=True,
                                                  explain=explain)]
    return out


def _history_dates(config: Config) -> list[Column]:
    """The issue date and period columns, in the order the pandas engine's pre-read of a
    history dataset's cycles converts them."""
    fc = config.forecast
    dates = [c for c in forecast_columns(config) if c.name in (fc.issued, fc.period)]
    return sorted(dates, key=lambda c: c.name != fc.issued)


def _history_filters(config: Config, src: Source, span: tuple[pd.Timestamp, ...],
                     starts: pd.Series, issued: pd.Timestamp) -> tuple[Any, Any]:
    """The pandas engine's filters of a history dataset's read (none for local files): the
    span's periods, the cycles issued since :func:`~accuracy_checks.sources.readers.
    issued_since`, and the (issue date, period) pairs of the cycles it knows."""
    from accuracy_checks.evaluation.join import cycle_targets
    from accuracy_checks.sources.dataset_filters import PairFilter

    if not src.is_dataset:
        return (), None
    fc = config.forecast
    periods = list(span)
    since = issued_since(config, periods)
    cols = forecast_columns(config)
    filters = date_filters(cols, periods=(fc.period, periods),
                           since=(fc.issued, since) if since is not None else None)
    known = starts.loc[starts.index < issued] if not pd.isna(issued) else starts.iloc[:0]
    pairs = cycle_targets(known, periods=periods, lags=list(config.evaluation.lags),
                          frequency=config.frequency)
    return filters, PairFilter(fc.issued, fc.period, pairs, fc.date_formats.get(fc.issued),
                               fc.date_formats.get(fc.period))


def _refuse_mixed_offsets(client: Any, inputs: list[tuple[list[Piece], list[Any]]]) -> None:
    """The pandas engine's refusal of a Parquet file (a dataset) whose text dates mix UTC
    offsets across its pieces (each piece alone may carry one): the offsets of each piece's
    text date columns (:func:`~accuracy_checks.dask.read.date_forms`, on the workers, only for
    files or datasets of several pieces with a text date column), then, for the first that
    mixes them, the whole file's (dataset's) conversion on a worker, which raises the
    converters' message."""
    from accuracy_checks.dask.read import date_forms, whole_file_error

    for found, columns in inputs:
        dated = [c for c in columns if c.kind == "date"]
        by_file: dict[Any, list[Piece]] = {}
        for piece in found:
            if piece.row_groups is not None or piece.store is not None:
                by_file.setdefault(_unit(piece), []).append(piece)
        wanted, here = [], []
        for parts in by_file.values():
            if len(parts) > 1 and _text_dates(parts[0], dated):
                wanted += parts
            elif len(parts) > 1 and parts[0].store is not None:
                here += parts  # only partition dates: their forms from the listed values
        if not wanted and not here:
            continue
        forms = client.gather(client.map(date_forms, wanted, columns=dated, pure=False))
        forms += [date_forms(p, dated) for p in here]
        wanted += here
        seen: dict[tuple[Any, str], set[str]] = {}
        for piece, per_column in zip(wanted, forms, strict=True):
            for name, got in per_column.items():
                seen.setdefault((_unit(piece), name), set()).update(got)
        for (unit, _), got in seen.items():
            if len(got) > 1:
                first = next(p for p in wanted if _unit(p) == unit)
                error = client.submit(whole_file_error, first, list(columns),
                                      pure=False).result()
                if error is not None:
                    raise error


def _unit(piece: Piece) -> Any:
    """What the pandas engine converts as one: a local file, or a whole dataset."""
    return piece.file if piece.store is None else (piece.store.shown, piece.role)


def _text_dates(piece: Piece, dated: list[Any]) -> bool:
    """Whether a date column of ``piece``'s file (a dataset's files, partitions aside) may be
    stored as text."""
    import pyarrow as pa
    import pyarrow.parquet as pq

    from accuracy_checks.dask.read import text_date_columns

    if piece.store is not None:
        return bool(text_date_columns(piece, dated))
    schema = pq.read_schema(piece.path)
    return any(c.name in schema.names and (pa.types.is_string(schema.field(c.name).type)
                                           or pa.types.is_large_string(
                                               schema.field(c.name).type)) for c in dated)


def _segment_columns(config: Config, source: Source) -> list[Any]:
    """The segment columns an input holds (read as text), as the readers add them."""
    from accuracy_checks.sources.columns import Column

    present = source.header()
    names = {c.name for c in forecast_columns(config)}
    return [Column(s, "text", "segments.columns") for s in config.segments.columns
            if s in present and s not in names]
