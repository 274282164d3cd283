"""Which refusal a run of broken inputs gets: the pandas engine's, whatever broke first here.

The pandas engine reads its inputs one after another — the segment mapping, then the forecast
(every column of every file, in file order), then the actuals, then the earlier cycles — and
stops at the first input it cannot use. The dask engine reads them in another order (the plan's
pre-reads of dates first, the other columns in the shards, many pieces at once), so when
several inputs are broken the first refusal it meets may be another one, and when two shards
fail, which one is met first is a race. :func:`pandas_order_error` settles it: when the run is
refused, the inputs the pandas engine reads before the actuals are checked in its order (the
mapping on the client, each forecast file on a worker, one column at a time:
:func:`~accuracy_checks.dask.read.whole_file_error`; then a forecast without a data row),
and the first refusal found wins; when
they are usable, the refusal met stands (the actuals' and earlier cycles' refusals are met in
the pandas engine's order: the actuals' pre-reads run before the earlier cycles' reads).
This runs only on a refused run.
"""

from __future__ import annotations

from collections.abc import Sequence
from typing import Any

from accuracy_checks.config import Config
from accuracy_checks.dask.places import Source, no_rows
from accuracy_checks.dask.read import Piece, pieces, whole_file_error
from accuracy_checks.dask.stores import DatasetRead, dataset_error
from accuracy_checks.errors import InputError
from accuracy_checks.sources.columns import Column
from accuracy_checks.sources.files import check_header, read_csv_columns

__all__ = ["pandas_order_error"]


def file_error(piece: Piece, columns: Sequence[Column]) -> tuple[InputError | None, bool]:
    """The pandas engine's refusal of ``piece``'s whole file (its header, then its columns
    converted in order), or ``None``; and whether the file holds a data row (on a worker)."""
    try:
        check_header(piece.path, columns, piece.role)
    except InputError as exc:
        return exc, True
    error = whole_file_error(piece, columns)
    if error is not None:
        return error, True
    if piece.row_groups is not None:
        import pyarrow.parquet as pq

        return None, bool(pq.ParquetFile(piece.path).metadata.num_rows)
    return None, len(read_csv_columns(piece.path, list(columns[:1]), piece.role)) > 0


def pandas_order_error(config: Config, client: Any, forecast: Source,
                       columns: Sequence[Column], met: InputError) -> InputError:
    """The refusal the pandas engine gives the run: the mapping's or the forecast's, when
    they are refused, else ``met`` (the refusal this engine met first). ``columns``: the
    forecast's columns as the readers convert them (configured columns, then the segment
    columns the files hold)."""
    from accuracy_checks.sources.segments import read_mapping

    try:
        read_mapping(config)
    except InputError as exc:
        return exc
    if forecast.files is None:  # a dataset: its reader's refusal, one column at a time
        read = DatasetRead(forecast.place, forecast.role, forecast.key)
        found = client.submit(dataset_error, read, list(columns), pure=False).result()
        return found if found is not None else met
    try:
        firsts = [next(iter(pieces([f], "forecast")), None) for f in forecast.files]
    except InputError as exc:  # a file that cannot be opened
        return exc
    checked = client.gather(client.map(file_error, [p for p in firsts if p is not None],
                                       columns=list(columns), pure=False))
    first = next((e for e, _ in checked if e is not None), None)
    if first is not None:
        return first
    if not any(rows for _, rows in checked):  # the readers' refusal of an empty forecast
        return no_rows(forecast)
    return met
