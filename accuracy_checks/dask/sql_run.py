"""Runs whose inputs include tables: local files read in pieces, tables in partitions.

:func:`sql_job` plans a run whose forecast, actuals and history entries are each either local
files or folders of files (pieces, :mod:`.read`) or a table (partitions, :mod:`.sql_parts`),
and builds the shards' dask dataframes from both alike: a partition is read by the same
:func:`~accuracy_checks.dask.read.read_piece` and plan reductions (:mod:`.plan`) as a piece.
The client runs only the pandas engine's pre-reads of a table (the periods holding an actual,
each cycle's first period: ``GROUP BY``/``DISTINCT`` in the database), the column check and
the partitions' ``GROUP BY`` of one date column. It gives ``None`` — the run reads its inputs
on the client (:mod:`.client_read`) — when an input is neither (a query, a view, a URL, a
dataset) or a table's rows have no row ids to order them (:func:`~.sql_parts.order_kind`).
"""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import replace
from pathlib import Path
from typing import Any

import pandas as pd

from accuracy_checks.config import Config, SqlSource
from accuracy_checks.config.places import Url
from accuracy_checks.dask import merge as M
from accuracy_checks.dask import plan as P
from accuracy_checks.dask.read import Piece, PieceReader, local_files, piece_frame, pieces
from accuracy_checks.dask.shards import Plan
from accuracy_checks.dask.sql_parts import SqlPart, dates_refused, order_kind, plan_parts
from accuracy_checks.sources import sql
from accuracy_checks.sources.columns import Column, no_rows
from accuracy_checks.sources.files import columns_of, file_header, sql_key
from accuracy_checks.sources.load import ArchiveReader, Progress
from accuracy_checks.sources.readers import actual_columns, forecast_columns

__all__ = ["sql_job"]

#: rows per shard (as :data:`accuracy_checks.dask.run.SHARD_ROWS`)
SHARD_ROWS = 1_500_000


class _Table:
    """A table input: its source, config key, role and how its rows are numbered."""

    def __init__(self, source: SqlSource, role: str, key: str, order: str) -> None:
        self.source, self.role, self.key, self.order = source, role, key, order


Place = list[Path] | _Table


def _place(place: object, role: str, key: str) -> Place | None:
    files = local_files(place, role, key)
    if files is not None:
        return files
    if isinstance(place, SqlSource):
        order = order_kind(place, role, sql_key(key))
        if order is not None:
            return _Table(place, role, sql_key(key), order)
    return None


def _parts(place: Place, role: str, columns: list[Column], *, start: int,
           column: str | None = None, wanted: Any = None, pairs: Any = None,
           candidates: tuple[str, ...] = ()) -> list[Any]:
    """Pieces of files (row groups without a ``wanted`` date left out), or a table's
    partitions (the pandas engine's filters: ``column IN wanted``, the ``pairs``)."""
    if isinstance(place, list):
        return pieces(place, role, start=start, column=column, wanted=wanted)
    row_filter = (column, tuple(wanted)) if column is not None and wanted is not None else None
    found, total = plan_parts(place.source, columns, role=place.role, key=place.key,
                              ordinal=start, order=place.order, candidates=candidates,
                              row_filter=row_filter, pairs=pairs)
    if not total and role != "history":  # the pandas reader's refusal of a table without rows
        sql.read_sql_columns(place.source, columns, role=place.role, key=place.key,
                             row_filter=row_filter, pairs=pairs)
    return found


def _refuse_dates(client: Any, place: Place, columns: list[Column], parts: list[Any]) -> None:
    """A table's text date columns refused over their distinct values (the rows of its
    filters): the pandas engine's message, from one column of the whole read at a time on a
    worker."""
    if isinstance(place, list) or not parts:
        return
    if dates_refused(place.source, columns, role=place.role, key=place.key,
                     row_filter=parts[0].row_filter, pairs=parts[0].pairs):
        error = client.submit(SqlPart.whole_error, parts[0], columns, pure=False).result()
        if error is not None:
            raise error


def sql_job(config: Config, client: Any, *, forecast_path: Path | Url | None,
            actuals_path: Path | Url | None, progress: Progress,
            archive: ArchiveReader | None, n_workers: int,
            refuse_offsets: Callable[[Any, list[tuple[list[Piece], list[Any]]]], None]
            ) -> M.Job | None:
    """The plan and shards of a run whose inputs are local files and tables (module doc), or
    ``None`` when one input is read on the client. ``refuse_offsets``: the file pieces' check
    of text dates mixing UTC offsets (``dask/run.py``'s)."""
    from accuracy_checks.dask.archived import archived_on_workers
    from accuracy_checks.evaluation.join import cycle_targets
    from accuracy_checks.evaluation.spans import actuals_span
    from accuracy_checks.sources.prereads import actual_periods, cycle_starts
    from accuracy_checks.sources.segments import read_mapping

    f_place = _place(forecast_path or config.forecast.place, "forecast", "forecast.path")
    a_place = _place(actuals_path or config.actuals.place, "actuals", "actuals.path")
    h_places = [_place(p, "history", "history") for p in config.history_paths]
    if f_place is None or a_place is None or any(h is None for h in h_places):
        return None
    h_list = [h for h in h_places if h is not None]
    progress("dask engine: tables read in partitions on the workers")
    keys = list(config.forecast.keys)
    seg_cols = tuple(config.segments.columns)
    fc, ac = config.forecast, config.actuals
    f_cols = forecast_columns(config) + _segment_columns(config, f_place, "forecast")
    a_cols = actual_columns(config)
    dated = (fc.period, fc.issued)

    # the forecast first, as the pandas engine reads it first (its refusals come first)
    f_pieces = _parts(f_place, "forecast", f_cols, start=0, candidates=dated)
    _refuse_dates(client, f_place, f_cols, f_pieces)
    needed = actuals_span(config)
    every_a = _parts(a_place, "actuals", a_cols, start=0, candidates=(ac.period,))
    found = None
    if needed is not None:
        if isinstance(a_place, list):
            found = P.combine_periods(client.gather(client.map(
                P.actual_periods_piece, every_a, config=config, pure=False)))
        else:  # the pandas engine's pre-read, in the database
            found = actual_periods(config, a_place.source)
    cut = needed is not None and found is not None and len(found) > needed
    kept = tuple(pd.Timestamp(p) for p in found[-needed:]) if cut and found is not None \
        and needed is not None else None

    a_pieces = (_parts(a_place, "actuals", a_cols, start=0, column=ac.period, wanted=kept,
                       candidates=(ac.period,)) if kept is not None else every_a)
    _refuse_dates(client, a_place, a_cols, a_pieces)
    # every row of each history place: the cycles' first periods (a table: its pre-read)
    h_cols = forecast_columns(config)
    h_pieces: list[tuple[int, Any]] = []
    table_starts: dict[int, pd.Series | None] = {}
    for i, place in enumerate(h_list):
        if isinstance(place, list):
            h_pieces += [(i, p) for p in pieces(place, "history", start=len(h_pieces))]
            continue
        table_starts[i] = cycle_starts(place.source, config)
        if table_starts[i] is None:  # not dates in the database: from every row, converted
            h_pieces += [(i, p) for p in _parts(place, "history", h_cols, start=len(h_pieces),
                                                candidates=dated)]

    refuse_offsets(client, [
        ([p for p in f_pieces if isinstance(p, Piece)], forecast_columns(config)),
        ([p for p in every_a if isinstance(p, Piece)], a_cols),
        ([p for _, p in h_pieces if isinstance(p, Piece)], h_cols)])
    fsum = P.combine_forecast(client.gather(client.map(P.forecast_summary, f_pieces,
                                                       config=config, pure=False)))
    if fsum.rows == 0 and isinstance(f_place, list):  # files: the readers' refusal
        raise no_rows(f"The forecast {forecast_path or config.forecast.place} "
                      "(config key `forecast.path`)", header=True)
    asums = client.gather(client.map(P.actuals_summary, a_pieces, config=config,
                                     periods=kept, pure=False))
    if not cut and isinstance(a_place, list) and sum(s.rows for s in asums) == 0:
        raise no_rows(f"The actuals {actuals_path or config.actuals.place} "
                      "(config key `actuals.path`)", header=True)
    parts_starts = client.gather(client.map(P.history_starts, [p for _, p in h_pieces],
                                            config=config, pure=False))
    win = P.windows(config, fsum, asums)
    span, issued = win.span, win.issued
    history_starts = tuple(
        P.min_starts([s for (i, _), s in zip(h_pieces, parts_starts, strict=True) if i == place])
        if table_starts.get(place) is None else P.min_starts([table_starts[place]])
        for place in range(len(h_list)))
    plan = Plan(issued=issued, first_period=fsum.first_period,
                issue_counts=fsum.issue_counts, actual_periods=kept, span=span,
                window_start=win.window_start, history_starts=history_starts,
                actuals_place=actuals_path or config.actuals.place,
                mapping=read_mapping(config), cut_actuals=cut)

    history_cycles = {pd.Timestamp(t) for s in history_starts for t in s.index}

    n_rows = fsum.rows + sum(s.rows for s in asums) * 2
    n_shards = max(2 * n_workers, math.ceil(n_rows / SHARD_ROWS))
    forecast = piece_frame(PieceReader(tuple(f_cols), tuple(keys), n_shards, text=seg_cols),
                           f_pieces)
    rename = (tuple(zip(config.actual_keys, keys, strict=True))
              if ac.keys and list(ac.keys) != keys else ())
    actuals = piece_frame(PieceReader(tuple(a_cols), tuple(keys), n_shards, rename=rename),
                          a_pieces)
    # the earlier cycles read: the row groups, or the rows, of the span (and its pairs)
    lags = list(config.evaluation.lags)
    used: list[tuple[int, Any]] = []
    for i, place in enumerate(h_list):
        starts = table_starts.get(i)
        pairs = ((fc.issued, cycle_targets(starts.loc[starts.index < issued], periods=list(span),
                                           lags=lags, frequency=config.frequency))
                 if starts is not None else None)
        known = isinstance(place, list) or starts is not None
        found_parts = _parts(place, "history", h_cols, start=len(used), column=fc.period,
                             wanted=span if known else None, pairs=pairs, candidates=dated)
        _refuse_dates(client, place, h_cols, found_parts)
        used += [(i, p) for p in found_parts]
    history: Any = None
    earlier_starts: list[pd.Series] = []
    if used:
        h_all = h_cols + _segment_columns(config, h_list[0], "history")
        history, earlier_starts = P.history_pieces(client, config, plan, used, h_all, keys,
                                                   n_shards, seg_cols)
    # the archive's snapshots chosen on the client, their rows read on the workers (numbered
    # after every history piece and partition: the pandas engine reads the archive last)
    archived = (archived_on_workers(client, config, archive, issued, history_cycles, span,
                                    base=max(len(h_pieces), len(used)) + 1)
                if archive is not None else None)
    key_cols = tuple(c for c in a_cols if c.kind == "key")
    older = PieceReader(key_cols, rename=rename, text=tuple(keys))
    where = {"forecast": {"path": str(forecast_path or config.forecast.place)},
             "actuals": {"path": str(actuals_path or config.actuals.place)}}
    return M.Job(
        plan=replace(plan, extra={"earlier_starts": P.min_starts(earlier_starts),
                                  "finite_periods": win.finite}),
        n_shards=n_shards, forecast=forecast, actuals=actuals, history=history,
        archived=archived, ordinal_base=max(len(h_pieces), len(used)) + 1,
        info={"forecast_rows": fsum.rows, "older_pieces": every_a if cut else [],
              "older_reader": older, "places": where})


def _segment_columns(config: Config, place: Place, role: str) -> list[Column]:
    """The segment columns an input holds (read as text), as the readers add them."""
    present = (file_header(place[0], role) if isinstance(place, list)
               else columns_of(place.source, role, f"{role}.path"))
    names = {c.name for c in forecast_columns(config)}
    return [Column(s, "text", "segments.columns") for s in config.segments.columns
            if s in present and s not in names]
