"""Finding the data files and reading their raw columns: CSV and Parquet, a file or a folder
(a table or query goes to :mod:`accuracy_checks.sources.sql`, a URL or a folder of Hive
partitions to :mod:`accuracy_checks.sources.datasets`).

:func:`read_columns` reads the configured columns
(:class:`~accuracy_checks.sources.columns.Column`) of every file at a path and converts them
(:func:`accuracy_checks.sources.columns.convert`). Every problem a user can fix (missing file,
empty file, missing column, a damaged file, a row that does not fit the header) raises
:class:`~accuracy_checks.errors.InputError` naming the file, the column and, where it helps,
the first offending lines.

**Headers.** A column the tool reads that is named twice in a header is refused (a reader
would silently use one of them). A CSV row with more fields than the header is refused unless
the extra fields are empty on every line (a separator at the end of each line): an unquoted
decimal comma would otherwise shift or cut the row.

Number and date cells read as missing are pandas' missing-value words; key and segment
columns are text as written, only an empty cell is missing there (the rules of
:mod:`accuracy_checks.sources.columns`).
"""

from __future__ import annotations

import lzma
import operator
import re
import warnings
import zipfile
import zlib
from collections import Counter
from collections.abc import Mapping, Sequence
from functools import reduce
from pathlib import Path

import numpy as np
import pandas as pd

from accuracy_checks.config import Place, SqlSource, Url
from accuracy_checks.errors import InputError
from accuracy_checks.sources import datasets, sql
from accuracy_checks.sources.columns import SHOWN, Column, convert, no_rows, refuse_missing

__all__ = ["PARQUET", "READ_ERRORS", "check_header", "columns_of", "file_header", "is_timestamp",
           "list_files", "read_columns", "sql_key"]

PARQUET = {".parquet", ".pq"}
_CSV = {".csv", ".txt", ".tsv"}
#: cells read as missing in number and date columns (pandas' defaults); key and segment
#: columns are text as written, only an empty cell is missing there
_NA_TEXT = ["", "#N/A", "#N/A N/A", "#NA", "-1.#IND", "-1.#QNAN", "-NaN", "-nan", "1.#IND",
            "1.#QNAN", "<NA>", "N/A", "NA", "NULL", "NaN", "None", "n/a", "nan", "null"]
#: what reading a damaged or mis-encoded file raises (truncated .gz: EOFError)
READ_ERRORS = (OSError, ValueError, UnicodeDecodeError, EOFError, zlib.error,
               zipfile.BadZipFile, lzma.LZMAError, pd.errors.ParserError)


def list_files(path: Path | Url, role: str, key: str) -> list[Path]:
    """The data files at local ``path`` (the file itself, or the CSV/Parquet files in a
    folder). A URL is a dataset (:mod:`accuracy_checks.sources.datasets`), never listed here."""
    if not isinstance(path, Path):
        raise TypeError(f"a URL is read as a dataset, not as local files: {path}")
    if path.is_dir():
        files = sorted(p for p in path.iterdir() if p.suffix.lower() in PARQUET | _CSV
                       or p.name.lower().endswith(".csv.gz"))
        if not files:
            raise InputError(
                f"The {role} folder {path} (config key `{key}`) holds no .csv or .parquet files."
            )
        return files
    if not path.exists():
        raise InputError(
            f"The {role} file {path} (config key `{key}`) does not exist. Check the path; "
            "relative paths are resolved against the config file's folder."
        )
    return [path]


def sql_key(key: str) -> str:
    """The config key of a place read from a database (``forecast.path`` → ``forecast.sql``).

    >>> sql_key("forecast.path"), sql_key("history"), sql_key("segments.mapping")
    ('forecast.sql', 'history.sql', 'segments.mapping.sql')
    """
    return key.removesuffix(".path") + ".sql"


def read_columns(path: Place, columns: Sequence[Column], *, role: str, key: str,
                 allow_empty: bool = False,
                 row_filter: tuple[str, Sequence[pd.Timestamp]] | None = None,
                 since: tuple[str, pd.Timestamp] | None = None,
                 pairs: tuple[str, Mapping[pd.Timestamp, Sequence[pd.Timestamp]]] | None = None
                 ) -> pd.DataFrame:
    """Read ``columns`` from a file or folder, or a table or query (an
    :class:`~accuracy_checks.config.SqlSource`: :mod:`accuracy_checks.sources.sql`), and
    convert them to their kinds.

    ``row_filter`` = (date column, dates): Parquet files whose column is a timestamp keep only
    the rows on those dates, filtered while reading (a table: in its WHERE clause); other
    files are read whole. A dataset (a URL, a folder of Hive partitions) takes both filters
    into the read, ``since`` = (date column, first date) too: files of partitions outside them
    are never opened (:mod:`accuracy_checks.sources.datasets`); callers filter the rows again.
    ``pairs`` = (issue-date column, issue date → dates of ``row_filter``'s column): Parquet
    files whose two columns are naive timestamps keep only those (issue date, date) pairs,
    filtered while reading (row groups outside them skipped by their statistics); a table in
    its WHERE clause; a dataset in its read (files of other cycles never opened); CSV files
    ignore it (callers prune the rows anyway).
    """
    if datasets.is_dataset(path):
        fmts = {c.name: c.fmt for c in columns if c.kind == "date"}
        filters = []
        if row_filter is not None:
            filters.append(datasets.DateFilter(row_filter[0], tuple(row_filter[1]),
                                               fmt=fmts.get(row_filter[0])))
        if since is not None:
            filters.append(datasets.DateFilter(since[0], since=since[1], fmt=fmts.get(since[0])))
        cut = (datasets.PairFilter(pairs[0], row_filter[0], pairs[1], fmts.get(pairs[0]),
                                   fmts.get(row_filter[0]))
               if pairs is not None and row_filter is not None else None)
        return datasets.read_dataset_columns(path, columns, role=role, key=key,
                                             allow_empty=allow_empty, filters=filters,
                                             pairs=cut)
    if isinstance(path, SqlSource):
        return sql.read_sql_columns(path, columns, role=role, key=sql_key(key),
                                    allow_empty=allow_empty, row_filter=row_filter, pairs=pairs)
    parts = [_read_file(f, columns, role=role, row_filter=row_filter, pairs=pairs)
             for f in list_files(path, role, key)]
    frame = parts[0] if len(parts) == 1 else pd.concat(parts, ignore_index=True)
    if len(frame) == 0 and not allow_empty:
        raise no_rows(f"The {role} {path} (config key `{key}`)", header=True)
    return frame.rename(columns={c.name: c.canonical for c in columns if c.canonical})


def _read_file(file: Path, columns: Sequence[Column], *, role: str,
               row_filter: tuple[str, Sequence[pd.Timestamp]] | None = None,
               pairs: tuple[str, Mapping[pd.Timestamp, Sequence[pd.Timestamp]]] | None = None
               ) -> pd.DataFrame:
    """One file's ``columns``, checked against its header, read raw and converted."""
    is_parquet = file.suffix.lower() in PARQUET
    check_header(file, columns, role)
    try:
        if is_parquet:
            wanted = list(dict.fromkeys(c.name for c in columns))
            frame = _read_parquet(file, wanted, [c.name for c in columns if c.kind != "number"],
                                  row_filter, pairs)
        else:
            frame = read_csv_columns(file, columns, role)
    except READ_ERRORS as exc:
        raise InputError(f"The {role} file {file} cannot be read: {why(exc)}") from None
    first_line = 1 if is_parquet else 2  # CSV: line 1 is the header
    out: dict[str, pd.Series] = {}
    for c in columns:
        if c.name not in out:
            out[c.name] = convert(frame[c.name], file, c, role, first_line)
    return pd.DataFrame(out, copy=False)


def check_header(file: Path, columns: Sequence[Column], role: str) -> None:
    """Refuse a file whose header lacks one of ``columns`` or names one of them twice."""
    present = file_header(file, role)
    refuse_missing(columns, present, f"{role} file {file}", _separator_hint(present, file)
                   + "Fix the column name in the config or in the file.")
    counts = Counter(present)
    twice = [c for c in columns if counts[c.name] > 1]
    if twice:
        c = twice[0]
        raise InputError(
            f"The {role} file {file} has {counts[c.name]} columns named {c.name!r} (config key "
            f"`{c.key}`); which one holds the data cannot be told. Rename or "
            "drop the extra column(s)."
        )


def why(exc: BaseException) -> str:
    """The reason a file cannot be read, in the user's terms (an encoding problem says how to
    fix it; other errors keep the reader's own words)."""
    if isinstance(exc, UnicodeDecodeError):
        return (f"it is not UTF-8 text (byte 0x{exc.object[exc.start]:02x} at position "
                f"{exc.start:,} is not valid UTF-8). Save it as UTF-8 (with or without a BOM).")
    return str(exc)


def _separator_hint(present: Sequence[str], file: Path) -> str:
    """A hint when a CSV header read as one column holds another separator."""
    if file.suffix.lower() in PARQUET or len(present) != 1:
        return ""
    for sep, name in ((";", "semicolons"), ("\t", "tabs"), ("|", "vertical bars")):
        if sep in present[0]:
            expected = "tabs (a .tsv file)" if file.suffix.lower() == ".tsv" else "commas"
            return (f"The header reads as one column: the file seems separated by {name}, "
                    f"but this reader expects {expected}. ")
    return ""


def file_header(file: Path, role: str) -> list[str]:
    """The column names of a file as written, repeats included (a CSV reader renames a
    repeated name to ``name.1``; reading the header line as data keeps it)."""
    is_parquet = file.suffix.lower() in PARQUET
    try:
        if is_parquet:
            import pyarrow.parquet as pq

            return list(pq.read_schema(file).names)
        # the header line parsed by the same reader (separator, quoting, BOM, compression)
        # as data, so repeated names stay as written
        first = _read_csv(file, header=None, nrows=1, dtype=str, keep_default_na=False)
    except pd.errors.EmptyDataError:
        raise InputError(
            f"The {role} file {file} is empty (not even a header line)."
        ) from None
    except READ_ERRORS as exc:
        kind = "Parquet" if is_parquet else "CSV"
        raise InputError(f"The {role} file {file} cannot be read as {kind}: {why(exc)}") from None
    if len(first) == 0:
        return []
    return [str(v) for v in first.iloc[0].tolist()]


def read_csv_columns(file: Path, columns: Sequence[Column], role: str) -> pd.DataFrame:
    """The configured columns of a CSV file: keys and segments as text (only an empty cell is
    missing), dates as text, numbers as numbers (pandas' missing-value words). A row with more
    fields than the header is refused (trailing empty fields on every line are allowed)."""
    dtype: dict[str, str] = {}
    na: dict[str, list[str]] = {}
    for c in columns:
        if c.kind in ("key", "text"):
            # plain text, never inferred numbers; factorized in to_key (faster than reading
            # as category when there are many distinct values)
            dtype[c.name], na[c.name] = "str", [""]
        elif c.kind == "date":
            # few distinct dates: read dictionary-encoded so each is parsed once
            dtype[c.name], na[c.name] = "category", _NA_TEXT
        else:
            na[c.name] = _NA_TEXT
    wanted = list(dict.fromkeys(c.name for c in columns))
    # every column is read (not ``usecols``, which hides rows with too many fields: an
    # unquoted decimal comma would silently cut "12,5" to 12); the others as plain text
    names = list(_read_csv(file, nrows=0, index_col=False).columns)
    dtype.update({n: "str" for n in names if n not in wanted})
    with warnings.catch_warnings():
        warnings.simplefilter("error", pd.errors.ParserWarning)
        try:
            frame = _read_csv(file, index_col=False, dtype=dtype, keep_default_na=False,
                              na_values=na)
        except pd.errors.ParserWarning:
            _check_trailing_fields(file, len(names), role)
            warnings.simplefilter("ignore", pd.errors.ParserWarning)
            frame = _read_csv(file, index_col=False, dtype=dtype, keep_default_na=False,
                              na_values=na)
        except pd.errors.ParserError as exc:
            found = re.search(r"Expected (\d+) fields in line (\d+), saw (\d+)", str(exc))
            if found is None:
                raise
            expected, line, saw = found.groups()
            raise InputError(
                f"The {role} file {file} has {saw} fields on line {line} where its header has "
                f"{expected}. A comma inside a value that is not quoted (a decimal comma, a "
                "thousands separator, a comma in a name) shifts the row: quote such values "
                "or use a dot as decimal mark."
            ) from None
    frame = frame[wanted]
    # a category column whose values all look like numbers (or true/false) comes back with
    # converted categories ("07" → 7): read those columns again as text
    converted = [n for n, kind in dtype.items() if kind == "category"
                 and len(frame[n].cat.categories)
                 and pd.api.types.infer_dtype(frame[n].cat.categories) != "string"]
    if converted:
        text = _read_csv(file, usecols=converted, dtype=dict.fromkeys(converted, "str"),
                         keep_default_na=False, na_values={n: na[n] for n in converted})
        for n in converted:
            frame[n] = text[n].to_numpy()
    return frame


def _check_trailing_fields(file: Path, n_header: int, role: str) -> None:
    """Every line has more fields than the header: harmless when the extra fields are empty
    (a separator at the end of each line), refused otherwise."""
    first = _read_csv(file, header=None, skiprows=1, nrows=1, dtype=str, keep_default_na=False)
    extra = list(range(n_header, first.shape[1]))
    if not extra:
        return
    tail = _read_csv(file, header=None, skiprows=1, usecols=extra, dtype=str,
                     keep_default_na=False)
    filled = (tail != "").any(axis=1).to_numpy()
    if filled.any():
        lines = ", ".join(str(i + 2) for i in np.flatnonzero(filled)[:SHOWN])
        raise InputError(
            f"The {role} file {file} has more fields on its lines than its header has "
            f"columns ({n_header}), with values in the extra fields (lines {lines}). A comma "
            "inside a value that is not quoted (a decimal comma, a thousands separator) "
            "shifts the row: quote such values or use a dot as decimal mark."
        )


def _read_parquet(file: Path, wanted: list[str], dictionary: list[str],
                  row_filter: tuple[str, Sequence[pd.Timestamp]] | None = None,
                  pairs: tuple[str, Mapping[pd.Timestamp, Sequence[pd.Timestamp]]] | None = None
                  ) -> pd.DataFrame:
    import pyarrow as pa
    import pyarrow.compute as pc
    import pyarrow.parquet as pq

    schema = pq.read_schema(file)
    strings = [n for n in dictionary
               if pa.types.is_string(schema.field(n).type)
               or pa.types.is_large_string(schema.field(n).type)]
    expression = None
    if row_filter is not None and pa.types.is_timestamp(schema.field(row_filter[0]).type):
        kind = schema.field(row_filter[0]).type

        def dates(values: Sequence[pd.Timestamp], kind: object = kind) -> object:
            return pa.array([pd.Timestamp(d).to_datetime64() for d in values]).cast(kind)

        expression = pc.field(row_filter[0]).isin(dates(row_filter[1]))
        issued = schema.field(pairs[0]).type if pairs is not None else None
        if (pairs is not None and issued is not None and kind.tz is None
                and pa.types.is_timestamp(issued) and issued.tz is None):
            # the (issue date, period) pairs the evaluation uses: row groups of other cycles
            # or periods are skipped by their statistics, the rest filtered natively
            terms = [(pc.field(pairs[0]) == pa.scalar(pd.Timestamp(cycle).to_datetime64())
                      .cast(issued)) & pc.field(row_filter[0]).isin(dates(targets))
                     for cycle, targets in pairs[1].items()]
            expression = reduce(operator.or_, terms) if terms else pc.scalar(False)
    table = pq.read_table(file, columns=wanted, read_dictionary=strings, filters=expression)
    return table.to_pandas(split_blocks=True, self_destruct=True)


def columns_of(path: Place, role: str, key: str) -> list[str]:
    """The column names of the first file at ``path`` as written (a table's or query's)."""
    if isinstance(path, SqlSource):
        return sql.sql_columns(path, role, sql_key(key))
    if datasets.is_dataset(path):
        data = datasets.open_dataset(path, role, key)
        return datasets.dataset_columns(data, role, key)
    return file_header(list_files(path, role, key)[0], role)


def is_timestamp(schema: object, name: str) -> bool:
    """Whether a Parquet schema has exactly one column ``name`` and it is a timestamp."""
    import pyarrow as pa

    index = schema.get_all_field_indices(name)  # type: ignore[attr-defined]
    return len(index) == 1 and pa.types.is_timestamp(
        schema.field(index[0]).type)  # type: ignore[attr-defined]


def _read_csv(file: Path, **kwargs: object) -> pd.DataFrame:
    sep = "\t" if file.suffix.lower() == ".tsv" else ","
    return pd.read_csv(file, sep=sep, **kwargs)  # type: ignore[call-overload,no-any-return]
