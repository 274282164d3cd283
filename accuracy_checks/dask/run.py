"""The dask engine's part of a run: read in pieces, plan, shard, check, merge, finish.

:func:`evaluate_on_dask` replaces ``load_inputs`` + ``evaluate`` of the pandas engine
(:mod:`accuracy_checks.engine`); drift, waivers and the store record stay the engine's. The
steps:

1. **pieces** of every local input file (:mod:`.read`); with tables among the inputs, the
   tables in partitions and the files in pieces (:mod:`.sql_run`); an input that is neither
   (a query, a URL, a Hive-partitioned dataset, a frame given in memory) makes the run read
   its inputs with the pandas readers on the client, then shard them the same way
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
from dataclasses import replace
from pathlib import Path
from typing import Any

import pandas as pd

from accuracy_checks.config import Config
from accuracy_checks.config.places import Url
from accuracy_checks.dask import merge as M
from accuracy_checks.dask import plan as P
from accuracy_checks.dask.merge import DaskRun
from accuracy_checks.dask.read import Piece, PieceReader, local_files, piece_frame, pieces
from accuracy_checks.dask.shards import Plan
from accuracy_checks.errors import ConfigError, InputError, UsageError
from accuracy_checks.sources.columns import no_rows
from accuracy_checks.sources.load import ArchiveReader, Progress, quiet
from accuracy_checks.sources.memory import GivenFrames
from accuracy_checks.sources.readers import actual_columns, forecast_columns

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


def _places(config: Config, forecast_path: Path | Url | None,
            actuals_path: Path | Url | None) -> tuple[list[Path], list[Path],
                                                      list[list[Path]]] | None:
    """The local files of every input, or ``None`` when one is read on the client."""
    f = local_files(forecast_path or config.forecast.place, "forecast", "forecast.path")
    a = local_files(actuals_path or config.actuals.place, "actuals", "actuals.path")
    h = [local_files(p, "history", "history") for p in config.history_paths]
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

        progress("dask engine: inputs read on the client (not local files), then sharded")
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
            columns = forecast_columns(config) + _segment_columns(config, places[0][0],
                                                                  "forecast")
        except UsageError as header:
            raise header from exc
        first = pandas_order_error(config, client, places[0], columns, exc,
                                   forecast=forecast_path)
        if first is exc:
            raise
        raise first from exc


def _from_pieces(config: Config, client: Any, places: tuple[list[Path], list[Path],
                 list[list[Path]]], *, forecast_path: Path | Url | None,
                 actuals_path: Path | Url | None, progress: Progress,
                 archive: ArchiveReader | None, n_workers: int) -> M.Job:
    """Plan and shards of inputs read in pieces on the workers."""
    from accuracy_checks.dask.archived import archived_on_workers
    from accuracy_checks.dask.shards import HistoryPrune
    from accuracy_checks.evaluation.spans import actuals_span, evaluation_span
    from accuracy_checks.sources.segments import read_mapping

    keys = list(config.forecast.keys)
    f_files, a_files, h_places = places
    needed = actuals_span(config)
    every_a = pieces(a_files, "actuals")
    # the pre-read of the periods holding an actual (as sources/prereads.py), on the workers
    found = P.combine_periods(client.gather(client.map(
        P.actual_periods_piece, every_a, config=config, pure=False))) \
        if needed is not None else None
    cut = needed is not None and found is not None and len(found) > needed
    kept = tuple(pd.Timestamp(p) for p in found[-needed:]) if cut and found is not None \
        and needed is not None else None

    f_pieces = pieces(f_files, "forecast")
    # the actuals read: only the row groups that may hold a kept period
    a_pieces = pieces(a_files, "actuals", column=config.actuals.period, wanted=kept) \
        if kept is not None else every_a
    h_pieces: list[tuple[int, Piece]] = []  # every row: the cycles' first periods
    for i, files in enumerate(h_places):
        h_pieces += [(i, p) for p in pieces(files, "history", start=len(h_pieces))]

    _refuse_mixed_offsets(client, [(f_pieces, forecast_columns(config)),
                                   (every_a, actual_columns(config)),
                                   ([p for _, p in h_pieces], forecast_columns(config))])
    fsum = P.combine_forecast(client.gather(client.map(P.forecast_summary, f_pieces,
                                                       config=config, pure=False)))
    if fsum.rows == 0:  # the readers' refusal (sources/files.py)
        raise no_rows(f"The forecast {forecast_path or config.forecast.place} "
                      "(config key `forecast.path`)", header=True)
    asums = client.gather(client.map(P.actuals_summary, a_pieces, config=config,
                                     periods=kept, pure=False))
    if not cut and sum(s.rows for s in asums) == 0:
        raise no_rows(f"The actuals {actuals_path or config.actuals.place} "
                      "(config key `actuals.path`)", header=True)
    starts_parts = client.gather(client.map(P.history_starts, [p for _, p in h_pieces],
                                            config=config, pure=False))
    with_value = pd.unique(pd.concat([pd.Series(s.with_value) for s in asums]).to_numpy()) \
        if asums else []
    finite = pd.unique(pd.concat([pd.Series(s.finite) for s in asums]).to_numpy()) \
        if asums else []
    recent = sorted(with_value)[-config.coverage.active_periods:]
    span_n = evaluation_span(config)
    span = tuple(pd.Timestamp(p) for p in sorted(finite)[-span_n:]) if span_n > 0 else ()
    issued = pd.Timestamp(fsum.issue_counts.index.dropna().max()) \
        if fsum.issue_counts.index.notna().any() else pd.NaT
    history_starts = tuple(P.min_starts([s for (i, _), s in zip(h_pieces, starts_parts,
                                                                 strict=True) if i == place])
                           for place in range(len(h_places)))
    plan = Plan(issued=issued, first_period=fsum.first_period,
                issue_counts=fsum.issue_counts, actual_periods=kept, span=span,
                window_start=recent[0] if recent else None, history_starts=history_starts,
                actuals_place=actuals_path or config.actuals.place,
                mapping=read_mapping(config), cut_actuals=cut)

    history_cycles = {pd.Timestamp(t) for s in history_starts for t in s.index}
    # the archive's snapshots chosen on the client, their rows read on the workers
    archived = (archived_on_workers(client, config, archive, issued, history_cycles, span,
                                    base=len(h_pieces)) if archive is not None else None)

    n_rows = fsum.rows + sum(s.rows for s in asums) * 2
    n_shards = max(2 * n_workers, math.ceil(n_rows / SHARD_ROWS))
    seg_cols = tuple(config.segments.columns)
    f_cols = forecast_columns(config) + _segment_columns(config, f_files[0], "forecast")
    forecast = piece_frame(PieceReader(tuple(f_cols), tuple(keys), n_shards, text=seg_cols),
                           f_pieces)
    rename = (tuple(zip(config.actual_keys, keys, strict=True))
              if config.actuals.keys and list(config.actuals.keys) != keys else ())
    actuals = piece_frame(PieceReader(tuple(actual_columns(config)), tuple(keys), n_shards,
                                      rename=rename), a_pieces)
    # the earlier cycles read: only the row groups that may hold a period of the span
    used: list[tuple[int, Piece]] = []
    for i, files in enumerate(h_places):
        used += [(i, p) for p in pieces(files, "history", start=len(used),
                                        column=config.forecast.period, wanted=span)]
    history = None
    if used:
        h_cols = forecast_columns(config) + _segment_columns(
            config, h_places[0][0], "history")
        history = piece_frame(PieceReader(tuple(h_cols), tuple(keys), n_shards, text=seg_cols,
                                          after=HistoryPrune(config, plan)), used)
    earlier_starts: list[pd.Series] = []
    if used:
        earlier_starts = client.gather(client.map(
            P.pruned_starts, [p for _, p in used], [i for i, _ in used],
            config=config, plan=plan, pure=False))
    key_cols = tuple(c for c in actual_columns(config) if c.kind == "key")
    older = PieceReader(key_cols, rename=rename, text=tuple(keys))
    return M.Job(
        plan=replace(plan, extra={"earlier_starts": P.min_starts(earlier_starts),
                                  "finite_periods": tuple(pd.Timestamp(p)
                                                          for p in sorted(finite))}),
        n_shards=n_shards, forecast=forecast, actuals=actuals, history=history,
        archived=archived, ordinal_base=len(h_pieces),
        info={"forecast_rows": fsum.rows, "older_pieces": every_a if cut else [],
              "older_reader": older, "places": {
            "forecast": {"path": str(forecast_path or config.forecast.place)},
            "actuals": {"path": str(actuals_path or config.actuals.place)}}})


def _refuse_mixed_offsets(client: Any, inputs: list[tuple[list[Piece], list[Any]]]) -> None:
    """The pandas engine's refusal of a Parquet file whose text dates mix UTC offsets across
    its pieces (each piece alone may carry one): the offsets of each piece's text date
    columns (:func:`~accuracy_checks.dask.read.date_forms`, on the workers, only for files of
    several pieces with a text date column), then, for the first file that mixes them, the
    whole file's conversion on a worker, which raises the converters' message."""
    import pyarrow as pa
    import pyarrow.parquet as pq

    from accuracy_checks.dask.read import date_forms, whole_file_error

    for found, columns in inputs:
        dated = [c for c in columns if c.kind == "date"]
        by_file: dict[Path, list[Piece]] = {}
        for piece in found:
            if piece.row_groups is not None:
                by_file.setdefault(piece.file, []).append(piece)
        wanted = []
        for file, parts in by_file.items():
            schema = pq.read_schema(file) if len(parts) > 1 else None
            if schema is not None and any(
                    c.name in schema.names and (pa.types.is_string(schema.field(c.name).type)
                                                or pa.types.is_large_string(
                                                    schema.field(c.name).type))
                    for c in dated):
                wanted += parts
        if not wanted:
            continue
        forms = client.gather(client.map(date_forms, wanted, columns=dated, pure=False))
        seen: dict[tuple[Path, str], set[str]] = {}
        for piece, per_column in zip(wanted, forms, strict=True):
            for name, got in per_column.items():
                seen.setdefault((piece.file, name), set()).update(got)
        for (file, _), got in seen.items():
            if len(got) > 1:
                first = next(p for p in wanted if p.file == file)
                error = client.submit(whole_file_error, first, list(columns),
                                      pure=False).result()
                if error is not None:
                    raise error


def _segment_columns(config: Config, file: Path, role: str) -> list[Any]:
    """The segment columns a file holds (read as text), as the readers add them."""
    from accuracy_checks.sources.columns import Column
    from accuracy_checks.sources.files import file_header

    present = file_header(file, role)
    names = {c.name for c in forecast_columns(config)}
    return [Column(s, "text", "segments.columns") for s in config.segments.columns
            if s in present and s not in names]
