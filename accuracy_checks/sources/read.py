"""Read the configured files into the canonical frames of :mod:`accuracy_checks.sources.frames`.

CSV and Parquet, a file or a folder of files. Every problem a user can fix (missing file,
empty file, missing column, text in a number column, unparseable dates, a mapping that puts a
series in two segments) raises :class:`~accuracy_checks.errors.InputError` naming the file,
the column and, where it helps, the first offending rows.

Reading rules
-------------
**Identifiers are text.** Key columns (``forecast.keys``, ``actuals.keys``, the mapping's key
columns) and segment columns are read as the text written, stripped of surrounding blanks:
``007`` and ``7`` are two series, ``TRUE`` or ``NA`` is a name like any other, and only an
empty cell is missing. A Parquet key or segment column may also hold integers, matched by one
rule: an integer is written as its plain decimal text (``7`` → ``"7"``), so a Parquet integer
7 matches the CSV text ``7`` but not ``007``. A Parquet float column is accepted only when
every value is a whole number of at most 2**53 (then written as that integer: ``7.0`` →
``"7"``); true/false, date, time, decimal and binary columns are refused (exit 2): write such
identifiers as text.

**Reserved segment names.** ``*`` names the results over all series and ``unassigned`` the
actuals whose segment is unknown; a segment column holding either is refused.

**One date column, one format.** A date column written as text is parsed with exactly one
format: ISO 8601 (``YYYY-MM-DD``, optionally with a time and a UTC offset) unless the config
gives the column's format (``forecast.date_formats`` / ``actuals.date_formats``, a strftime
pattern such as ``%d/%m/%Y``; history files use the forecast's). A value that does not parse
with it is refused, naming the first lines: a guessed format per value would put some dates
on the wrong day. A column carries one UTC offset or none; the offset is dropped keeping the
wall-clock date (mixed offsets are refused). Parquet timestamp and date columns are taken as
they are. Dates must lie between 1677-09-22 and 2262-04-11, the calendar the tool computes on.

**Headers.** A column the tool reads that is named twice in a header is refused (a reader
would silently use one of them).

Speed: key, segment and date columns are parsed per distinct value (factorized first, or read
dictionary-encoded), never per row in Python.
"""

from __future__ import annotations

import lzma
import re
import warnings
import zipfile
import zlib
from collections import Counter
from collections.abc import Callable, Sequence
from dataclasses import dataclass
from pathlib import Path

import numpy as np
import pandas as pd
from pandas.errors import OutOfBoundsDatetime

from accuracy_checks.config import Config
from accuracy_checks.errors import InputError
from accuracy_checks.sources import frames as F
from accuracy_checks.sources.codes import combined_codes_and_space, duplicated_codes

_PARQUET = {".parquet", ".pq"}
_CSV = {".csv", ".txt", ".tsv"}
_SHOW = 5  # offending values shown in a message
#: segment names the tool gives a meaning of its own (all series; actuals of unknown segment)
F_ALL = "*"
RESERVED_SEGMENTS = (F_ALL, F.UNASSIGNED)
#: cells read as missing in number and date columns (pandas' defaults); key and segment
#: columns are text as written, only an empty cell is missing there
_NA_TEXT = ["", "#N/A", "#N/A N/A", "#NA", "-1.#IND", "-1.#QNAN", "-NaN", "-nan", "1.#IND",
            "1.#QNAN", "<NA>", "N/A", "NA", "NULL", "NaN", "None", "n/a", "nan", "null"]
#: the calendar the tool computes on (nanosecond timestamps)
_FIRST_DAY, _LAST_DAY = pd.Timestamp("1677-09-22"), pd.Timestamp("2262-04-11")
_ISO = "YYYY-MM-DD (ISO 8601)"
#: what reading a damaged or mis-encoded file raises (truncated .gz: EOFError)
_READ_ERRORS = (OSError, ValueError, UnicodeDecodeError, EOFError, zlib.error,
                zipfile.BadZipFile, lzma.LZMAError, pd.errors.ParserError)


@dataclass(frozen=True)
class Column:
    """One configured column: its name in the file, its role and the config key that names it."""

    name: str
    kind: str  # "key" | "date" | "number" | "text"
    key: str  # config key path, for messages
    canonical: str | None = None  # rename to this
    fmt: str | None = None  # dates: the strftime format (None: ISO 8601)


def list_files(path: Path, role: str, key: str) -> list[Path]:
    """The data files at ``path`` (the file itself, or the CSV/Parquet files in a folder)."""
    if path.is_dir():
        files = sorted(p for p in path.iterdir() if p.suffix.lower() in _PARQUET | _CSV
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


def read_columns(path: Path, columns: Sequence[Column], *, role: str, key: str,
                 allow_empty: bool = False,
                 row_filter: tuple[str, Sequence[pd.Timestamp]] | None = None) -> pd.DataFrame:
    """Read ``columns`` from a file or folder and convert them to their kinds.

    ``row_filter`` = (date column, dates): Parquet files whose column is a timestamp keep only
    the rows on those dates, filtered while reading; other files are read whole.
    """
    parts = [_read_file(f, columns, role=role, row_filter=row_filter)
             for f in list_files(path, role, key)]
    frame = parts[0] if len(parts) == 1 else pd.concat(parts, ignore_index=True)
    if len(frame) == 0 and not allow_empty:
        raise InputError(
            f"The {role} {path} (config key `{key}`) has a header but no rows; "
            f"a {role} with no data cannot be checked."
        )
    return frame.rename(columns={c.name: c.canonical for c in columns if c.canonical})


def _read_file(file: Path, columns: Sequence[Column], *, role: str,
               row_filter: tuple[str, Sequence[pd.Timestamp]] | None = None) -> pd.DataFrame:
    wanted = list(dict.fromkeys(c.name for c in columns))
    is_parquet = file.suffix.lower() in _PARQUET
    present = _header(file, role)
    missing = [c for c in columns if c.name not in present]
    if missing:
        c = missing[0]
        raise InputError(
            f"The {role} file {file} has no column {c.name!r} (config key `{c.key}`). "
            f"Its columns are: {', '.join(map(str, present)) or '(none)'}. "
            "Fix the column name in the config or in the file."
        )
    counts = Counter(present)
    twice = [c for c in columns if counts[c.name] > 1]
    if twice:
        c = twice[0]
        raise InputError(
            f"The {role} file {file} has {counts[c.name]} columns named {c.name!r} (config key "
            f"`{c.key}`); which one holds the data cannot be told. Rename or "
            "drop the extra column(s)."
        )
    try:
        if is_parquet:
            frame = _read_parquet(file, wanted, [c.name for c in columns if c.kind != "number"],
                                  row_filter)
        else:
            frame = _read_csv_columns(file, columns, role)
    except _READ_ERRORS as exc:
        raise InputError(f"The {role} file {file} cannot be read: {exc}") from None
    first_line = 1 if is_parquet else 2  # CSV: line 1 is the header
    out = {}
    for c in columns:
        if c.name in out:
            continue
        s = frame[c.name]
        if c.kind == "key":
            out[c.name] = _to_key(s, file, c, role, first_line)
        elif c.kind == "date":
            out[c.name] = _to_date(s, file, c, role, first_line)
        elif c.kind == "number":
            out[c.name] = _to_number(s, file, c, role, first_line)
        else:
            out[c.name] = _to_key(s, file, c, role, first_line, allow_missing=True,
                                  reserved=RESERVED_SEGMENTS)
    return pd.DataFrame(out)


def _header(file: Path, role: str) -> list[str]:
    """The column names of a file as written, repeats included (a CSV reader renames a
    repeated name to ``name.1``; reading the header line as data keeps it)."""
    is_parquet = file.suffix.lower() in _PARQUET
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
    except _READ_ERRORS as exc:
        kind = "Parquet" if is_parquet else "CSV"
        raise InputError(f"The {role} file {file} cannot be read as {kind}: {exc}") from None
    if len(first) == 0:
        return []
    return [str(v) for v in first.iloc[0].tolist()]


def _read_csv_columns(file: Path, columns: Sequence[Column], role: str) -> pd.DataFrame:
    """The configured columns of a CSV file: keys and segments as text (only an empty cell is
    missing), dates as text, numbers as numbers (pandas' missing-value words). A row with more
    fields than the header is refused (trailing empty fields on every line are allowed)."""
    dtype: dict[str, str] = {}
    na: dict[str, list[str]] = {}
    for c in columns:
        if c.kind in ("key", "text"):
            # plain text, never inferred numbers; factorized in _to_key (faster than reading
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
        lines = ", ".join(str(i + 2) for i in np.flatnonzero(filled)[:_SHOW])
        raise InputError(
            f"The {role} file {file} has more fields on its lines than its header has "
            f"columns ({n_header}), with values in the extra fields (lines {lines}). A comma "
            "inside a value that is not quoted (a decimal comma, a thousands separator) "
            "shifts the row: quote such values or use a dot as decimal mark."
        )


def _read_parquet(file: Path, wanted: list[str], dictionary: list[str],
                  row_filter: tuple[str, Sequence[pd.Timestamp]] | None = None) -> pd.DataFrame:
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
        dates = pa.array([pd.Timestamp(d).to_datetime64() for d in row_filter[1]]).cast(kind)
        expression = pc.field(row_filter[0]).isin(dates)
    table = pq.read_table(file, columns=wanted, read_dictionary=strings, filters=expression)
    return table.to_pandas()


def cycle_starts(path: Path, config: Config, *, role: str = "history",
                 key: str = "history") -> pd.Series | None:
    """The first period of every cycle in a Parquet file or folder, read from its two date
    columns only (``None`` when a file is CSV or its dates are not timestamps)."""
    import pyarrow.parquet as pq

    issued, period = config.forecast.issued, config.forecast.period
    parts = []
    for f in list_files(path, role, key):
        if f.suffix.lower() not in _PARQUET:
            return None
        try:
            schema = pq.read_schema(f)
            if not all(_is_timestamp(schema, n) for n in (issued, period)):
                return None
            table = pq.read_table(f, columns=[issued, period])
        except (OSError, ValueError):
            return None  # the full read reports the problem with its proper message
        parts.append(table.group_by(issued).aggregate([(period, "min")]).to_pandas())
    if not parts:
        return None
    starts = pd.concat(parts, ignore_index=True)
    starts = starts.rename(columns={issued: F.ISSUED, f"{period}_min": F.PERIOD})
    out = starts.groupby(F.ISSUED)[F.PERIOD].min()
    try:
        out.index = pd.DatetimeIndex(out.index).tz_localize(None).as_unit("ns")
        return out.astype("datetime64[ns]") if len(out) else out
    except (OutOfBoundsDatetime, OverflowError):
        return None  # dates beyond the calendar: the full read names them


def _is_timestamp(schema: object, name: str) -> bool:
    """Whether a Parquet schema has exactly one column ``name`` and it is a timestamp."""
    import pyarrow as pa

    index = schema.get_all_field_indices(name)  # type: ignore[attr-defined]
    return len(index) == 1 and pa.types.is_timestamp(
        schema.field(index[0]).type)  # type: ignore[attr-defined]


def _read_csv(file: Path, **kwargs: object) -> pd.DataFrame:
    sep = "\t" if file.suffix.lower() == ".tsv" else ","
    return pd.read_csv(file, sep=sep, **kwargs)  # type: ignore[call-overload,no-any-return]


def _count(n: int, one: str, many: str) -> str:
    """``1 value that is`` / ``3 values that are``."""
    return f"{n:,} {one if n == 1 else many}"


def _plain(value: object) -> str:
    """A cell as a message shows it: text quoted, numbers and dates plain, missing as
    ``(empty)`` (never a library's repr such as ``np.int64(7)`` or ``nan``)."""
    if isinstance(value, np.generic):
        value = value.item()
    if value is None or value is pd.NaT or value is pd.NA or (
            isinstance(value, float) and np.isnan(value)):
        return "(empty)"
    if isinstance(value, str):
        return repr(value)
    if isinstance(value, pd.Timestamp):
        return value.isoformat()
    return str(value)


def _rows(mask: np.ndarray, values: pd.Series, first_line: int) -> str:
    idx = np.flatnonzero(mask)[:_SHOW]
    label = "line" if first_line == 2 else "row"
    shown = ", ".join(f"{label} {i + first_line}: {_plain(values.iloc[i])}" for i in idx)
    more = f" and {int(mask.sum()) - len(idx)} more" if mask.sum() > len(idx) else ""
    return shown + more


def _key_text(uniques: pd.Index, codes: np.ndarray, s: pd.Series, file: Path, c: Column,
              role: str, first_line: int) -> pd.Index:
    """The distinct values of a key or segment column as text, by the module's rule (text as
    written; integers as plain decimal text; whole floats as integers; nothing else)."""
    what = ("key column" if c.kind == "key" else "segment column")

    def refuse(bad_uniques: np.ndarray, kind: str, fix: str) -> InputError:
        bad = (codes >= 0) & bad_uniques[np.maximum(codes, 0)]
        return InputError(
            f"The {role} file {file}, {what} {c.name!r} (config key `{c.key}`), holds {kind} "
            f"({_rows(bad, s, first_line)}). Series keys and segments are identifiers, read "
            f"as text: {fix}"
        )

    if isinstance(uniques.dtype, pd.StringDtype):
        return uniques  # text already (CSV, Parquet strings): nothing to check
    values = uniques.to_numpy()
    kind = uniques.dtype.kind
    if kind == "b" or (kind == "O" and pd.api.types.infer_dtype(values) == "boolean"):
        raise refuse(np.ones(len(uniques), dtype=bool), "true/false values",
                     "write the column as text.")
    if kind in "iu":
        return uniques.astype(str)
    if kind == "f":
        fraction = (np.mod(values, 1) != 0) | ~np.isfinite(values) | (np.abs(values) > 2**53)
        if fraction.any():
            raise refuse(fraction, "numbers that are not whole",
                         "a number column can be a key only when every value is a whole "
                         "number (then read as that integer); write the column as text.")
        return pd.Index(values.astype(np.int64)).astype(str)
    if kind == "O":
        inferred = pd.api.types.infer_dtype(values, skipna=True)
        if inferred not in ("string", "empty", "integer", "mixed-integer"):
            raise refuse(np.ones(len(uniques), dtype=bool), f"{inferred} values",
                         "write the column as text.")
    elif kind in "mM":
        raise refuse(np.ones(len(uniques), dtype=bool), "dates", "write the column as text.")
    return uniques.astype(str)


def _to_key(s: pd.Series, file: Path, c: Column, role: str, first_line: int, *,
            allow_missing: bool = False, reserved: Sequence[str] = ()) -> pd.Series:
    """Keys and labels as a categorical of stripped strings (each distinct value cleaned
    once); ``reserved`` labels are refused."""
    if isinstance(s.dtype, pd.CategoricalDtype):
        codes = s.cat.codes.to_numpy()
        uniques = pd.Index(s.cat.categories)
    else:
        codes, uniques = pd.factorize(s, use_na_sentinel=True)
        uniques = pd.Index(uniques)
    labels = _key_text(uniques, codes, s, file, c, role, first_line).str.strip()
    if labels.has_duplicates or not labels.is_unique:
        remap, labels = pd.factorize(labels)
        codes = np.where(codes >= 0, remap[np.maximum(codes, 0)], -1)
    empty = labels == ""
    if empty.any():  # a blank label is a missing one
        codes = np.where((codes >= 0) & empty[np.maximum(codes, 0)], -1, codes)
    bad = codes < 0
    if bad.any() and not allow_missing:
        raise InputError(
            f"The {role} file {file}, key column {c.name!r} (config key `{c.key}`), is empty in "
            f"{int(bad.sum())} rows ({_rows(bad, s, first_line)}). Every row needs its series keys."
        )
    taken = labels.isin(list(reserved))
    if taken.any():
        hit = (codes >= 0) & taken[np.maximum(codes, 0)]
        names = " and ".join(repr(v) for v in labels[taken])
        raise InputError(
            f"The {role} file {file}, segment column {c.name!r} (config key `{c.key}`), holds "
            f"the reserved segment name {names} ({_rows(hit, s, first_line)}): '*' names the "
            "results over all series and 'unassigned' the actuals whose segment is unknown, "
            "so a segment of that name would be mixed up with them. Rename that segment."
        )
    cat = pd.Categorical.from_codes(codes.astype(np.int32), categories=pd.Index(labels, dtype=str))
    return pd.Series(cat, index=s.index, name=s.name)


def _to_number(s: pd.Series, file: Path, c: Column, role: str, first_line: int) -> pd.Series:
    if pd.api.types.is_bool_dtype(s):
        raise InputError(
            f"The {role} file {file}, column {c.name!r} (config key `{c.key}`), holds true/false "
            "values where numbers are expected."
        )
    if pd.api.types.is_numeric_dtype(s):
        return s.astype("float64")
    text = s.astype("string").str.strip()
    num = pd.to_numeric(text, errors="coerce")
    bad = (num.isna() & text.notna() & (text != "")).to_numpy()
    if bad.any():
        raise InputError(
            f"The {role} file {file}, column {c.name!r} (config key `{c.key}`), holds "
            f"{_count(int(bad.sum()), 'value that is', 'values that are')} not a number "
            f"({_rows(bad, s, first_line)}). "
            "Write plain numbers (a dot as decimal mark), or leave the cell empty for a "
            "missing value."
        )
    return num.astype("float64")


def _to_date(s: pd.Series, file: Path, c: Column, role: str, first_line: int) -> pd.Series:
    """A date column as naive datetime64[ns]: text parsed with the column's one format (each
    distinct value once), timestamps taken as they are, offsets dropped (wall-clock kept)."""
    if pd.api.types.is_datetime64_any_dtype(s):
        out = s
        if isinstance(out.dtype, pd.DatetimeTZDtype):
            out = out.dt.tz_localize(None)  # keep the wall-clock date the producer wrote
    else:
        # parse each distinct value once: millions of rows share a few hundred dates
        if isinstance(s.dtype, pd.CategoricalDtype):
            codes, uniques = s.cat.codes.to_numpy(), pd.Index(s.cat.categories)
        else:
            codes, uniques = pd.factorize(s, use_na_sentinel=True)
            uniques = pd.Index(uniques)
        parsed, blank = _parse_dates(uniques, file, c, role)
        failed = np.asarray(parsed.isna()) & ~blank
        bad = (codes >= 0) & failed[np.maximum(codes, 0)]
        if bad.any():
            raise InputError(_date_format_message(bad, s, uniques[failed], file, c, role,
                                                  first_line))
        codes = np.where((codes >= 0) & blank[np.maximum(codes, 0)], -1, codes)
        out = pd.Series(parsed.take(codes, allow_fill=True), index=s.index)
    missing = out.isna().to_numpy()
    if missing.any():
        raise InputError(
            f"The {role} file {file}, date column {c.name!r} (config key `{c.key}`), is empty in "
            f"{int(missing.sum())} rows ({_rows(missing, s, first_line)}). Every row needs a date."
        )
    outside = ((out < _FIRST_DAY) | (out >= _LAST_DAY + pd.Timedelta(days=1))).to_numpy()
    if outside.any():
        raise InputError(
            f"The {role} file {file}, date column {c.name!r} (config key `{c.key}`), has "
            f"{_count(int(outside.sum()), 'date', 'dates')} outside the calendar the tool "
            f"computes on, {_FIRST_DAY:%Y-%m-%d} to {_LAST_DAY:%Y-%m-%d} "
            f"({_rows(outside, s, first_line)}). Fix those dates."
        )
    return out.astype("datetime64[ns]")


_OFFSET = r"\d{2}:\d{2}(?::\d{2}(?:\.\d+)?)?\s*(?:Z|[+-]\d{2}(?::?\d{2})?)$"


def _parse_dates(uniques: pd.Index, file: Path, c: Column, role: str
                 ) -> tuple[pd.DatetimeIndex, np.ndarray]:
    """The distinct values of a date column parsed with its one format (NaT where a value
    does not parse), and which values are blank. Raises on mixed UTC offsets."""
    if pd.api.types.infer_dtype(uniques, skipna=True) in ("date", "datetime", "datetime64"):
        # Parquet date columns (and timestamps stored as objects): dates already
        return pd.DatetimeIndex(pd.to_datetime(uniques)), np.zeros(len(uniques), dtype=bool)
    text = pd.Series(uniques.astype(str), dtype="string").str.strip()
    blank = (text == "").to_numpy()
    try:
        parsed = pd.to_datetime(text.where(~blank), errors="coerce",
                                format=c.fmt or "ISO8601")
    except (ValueError, OverflowError) as exc:
        if not re.search(r"time ?zone|offset|utc", str(exc), re.IGNORECASE):
            raise InputError(
                f"The {role} file {file}, date column {c.name!r} (config key `{c.key}`), "
                f"cannot be read with the format {c.fmt or _ISO}: {exc}. Fix "
                f"`{c.key.split('.')[0]}.date_formats` for {c.name!r}."
            ) from None
        has_offset = text.str.contains(_OFFSET, regex=True).to_numpy()
        if has_offset[~blank].all():
            what = "mixes time zones (different UTC offsets)"
        else:
            what = "mixes dates with and without time-zone offsets"
        raise InputError(
            f"The {role} file {file}, date column {c.name!r} (config key `{c.key}`), {what}. "
            "Write all dates of a column in one form, e.g. YYYY-MM-DD without offsets, or all "
            "with the same UTC offset."
        ) from exc
    if isinstance(parsed.dtype, pd.DatetimeTZDtype):
        parsed = parsed.dt.tz_localize(None)  # keep the wall-clock date the producer wrote
    return pd.DatetimeIndex(parsed), blank


#: formats tried on values that are not ISO 8601, only to suggest one in the message
_COMMON_FORMATS = ("%d/%m/%Y", "%m/%d/%Y", "%d.%m.%Y", "%d-%m-%Y", "%Y/%m/%d", "%d/%m/%y",
                   "%m/%d/%y", "%Y%m%d")


def _date_format_message(bad: np.ndarray, s: pd.Series, failed: pd.Index, file: Path,
                         c: Column, role: str, first_line: int) -> str:
    section = c.key.split(".")[0]
    fmt = f"{c.fmt!r}" if c.fmt else _ISO
    head = (
        f"The {role} file {file}, column {c.name!r} (config key `{c.key}`), has "
        f"{_count(int(bad.sum()), 'value that is', 'values that are')} not a date in the "
        f"column's format {fmt} ({_rows(bad, s, first_line)}). A date column is read with "
        "one format, never guessed per value (a guess puts some dates on the wrong day): "
    )
    if c.fmt:
        return head + (f"write every date of the column as {c.fmt!r}, or fix "
                       f"`{section}.date_formats` for {c.name!r}.")
    sample = pd.Series(failed[:50].astype(str), dtype="string").str.strip()
    fits = [f for f in _COMMON_FORMATS
            if pd.to_datetime(sample, errors="coerce", format=f).notna().all()]
    example = fits[0] if fits else "%d/%m/%Y"
    return head + (
        "write every date as YYYY-MM-DD, or, if the whole column is written in another "
        f"format, give it in the config: `{section}.date_formats: {{{c.name}: \"{example}\"}}`"
        + (f" (these values read as {' or '.join(repr(f) for f in fits[:2])})." if fits else ".")
    )


# ------------------------------------------------------------------ configured sources


def forecast_columns(config: Config) -> list[Column]:
    fc = config.forecast
    cols = [Column(k, "key", "forecast.keys") for k in fc.keys]
    cols += [
        Column(fc.period, "date", "forecast.period", F.PERIOD, fc.date_formats.get(fc.period)),
        Column(fc.issued, "date", "forecast.issued", F.ISSUED, fc.date_formats.get(fc.issued)),
        Column(fc.value, "number", "forecast.value", F.FORECAST),
    ]
    cols += [
        Column(name, "number", f"forecast.quantiles.{tau:g}", F.quantile_column(tau))
        for tau, name in fc.quantiles.items()
    ]
    return cols


def read_forecast(config: Config, path: Path | None = None, *, role: str = "forecast",
                  key: str = "forecast.path", segment_columns: Sequence[str] = (),
                  allow_empty: bool = False,
                  periods: Sequence[pd.Timestamp] | None = None) -> pd.DataFrame:
    """The forecast (or an earlier-cycles file with the same columns), canonical names."""
    path = path or config.forecast.path
    cols = forecast_columns(config)
    names = {c.name for c in cols}
    present = _columns_of(path, role, key)
    cols += [Column(s, "text", "segments.columns") for s in segment_columns
             if s in present and s not in names]
    row_filter = (config.forecast.period, periods) if periods is not None else None
    return read_columns(path, cols, role=role, key=key, allow_empty=allow_empty,
                        row_filter=row_filter)


def actual_periods(config: Config, path: Path | None = None) -> pd.DatetimeIndex | None:
    """The sorted distinct periods that hold at least one actual, read from the period and
    value columns of Parquet files only (``None`` when a file is CSV or its period column is
    not a timestamp: such inputs are read whole)."""
    import pyarrow.compute as pc
    import pyarrow.parquet as pq

    ac = config.actuals
    found = []
    for f in list_files(path or ac.path, "actuals", "actuals.path"):
        if f.suffix.lower() not in _PARQUET:
            return None
        try:
            schema = pq.read_schema(f)
            if (not _is_timestamp(schema, ac.period)
                    or len(schema.get_all_field_indices(ac.value)) != 1):
                return None
            table = pq.read_table(f, columns=[ac.period, ac.value])
        except (OSError, ValueError):
            return None  # the full read reports the problem with its proper message
        present = pc.filter(table[ac.period], pc.is_valid(table[ac.value]))
        found.append(pc.unique(present).to_pandas())
    periods = pd.DatetimeIndex(pd.concat(found, ignore_index=True).unique()).sort_values()
    periods = periods.tz_localize(None) if periods.tz is not None else periods
    try:
        return periods.as_unit("ns")
    except (OutOfBoundsDatetime, OverflowError):
        return None  # dates beyond the calendar: the full read names them


def actual_series(config: Config, path: Path | None = None) -> pd.DataFrame:
    """The distinct series (key columns) over every row of Parquet actuals, grouped in Arrow:
    the series the actuals know, without loading their rows."""
    import pyarrow.parquet as pq

    ac = config.actuals
    src = list(config.actual_keys)
    parts = []
    for f in list_files(path or ac.path, "actuals", "actuals.path"):
        table = pq.read_table(f, columns=src)
        parts.append(table.group_by(src).aggregate([]).to_pandas())
    table = pd.concat(parts, ignore_index=True)
    table = table.rename(columns=dict(zip(src, config.forecast.keys, strict=False)))
    column = Column("", "key", "actuals.keys")
    out = {k: _to_key(table[k], Path(str(path or ac.path)), column, "actuals", 1,
                      allow_missing=True) for k in config.forecast.keys}
    return pd.DataFrame(out).drop_duplicates()


def read_actuals(config: Config, path: Path | None = None,
                 periods: Sequence[pd.Timestamp] | None = None) -> pd.DataFrame:
    """The actuals (all rows, or with ``periods`` only those periods: filtered while reading
    Parquet, after reading CSV)."""
    ac = config.actuals
    path = path or ac.path
    cols = [Column(k, "key", "actuals.keys" if ac.keys else "forecast.keys")
            for k in config.actual_keys]
    cols += [
        Column(ac.period, "date", "actuals.period", F.PERIOD, ac.date_formats.get(ac.period)),
        Column(ac.value, "number", "actuals.value", F.ACTUAL),
    ]
    frame = read_columns(path, cols, role="actuals", key="actuals.path",
                         row_filter=(ac.period, periods) if periods is not None else None)
    if periods is not None:
        kept = frame[F.PERIOD].isin(periods).to_numpy()
        if not kept.all():
            frame = frame.loc[kept].reset_index(drop=True)
    if ac.keys and list(ac.keys) != list(config.forecast.keys):
        frame = frame.rename(columns=dict(zip(ac.keys, config.forecast.keys, strict=False)))
    keys = list(config.forecast.keys)
    dup = duplicated_rows(frame, [*keys, F.PERIOD])
    if dup.any():
        sample = frame.loc[dup, [*keys, F.PERIOD]].head(_SHOW)
        shown = "; ".join(
            ", ".join(f"{k}={v}" for k, v in row.items() if k != F.PERIOD)
            + f", {row[F.PERIOD]:%Y-%m-%d}"
            for row in sample.to_dict("records")
        )
        raise InputError(
            f"The actuals {path} hold {int(dup.sum())} rows that repeat a series and period "
            f"(e.g. {shown}). Each series needs one actual per period: aggregate them first."
        )
    return frame


def duplicated_rows(frame: pd.DataFrame, columns: Sequence[str], keep: str | bool = False
                    ) -> np.ndarray:
    """``DataFrame.duplicated`` on integer row codes (fast on categorical keys)."""
    if len(frame) == 0:
        return np.zeros(0, dtype=bool)
    *first, last = list(columns)
    codes, space = combined_codes_and_space(frame, first)
    if space > 8 * len(frame):  # sparse key combinations: number the series densely first
        codes, uniques = pd.factorize(codes)
        space = max(len(uniques), 1)
    tail, size = combined_codes_and_space(frame, [last])
    return duplicated_codes(codes.astype(np.int64) * size + tail, space * size, keep)


def read_mapping(config: Config) -> pd.DataFrame | None:
    """The segment mapping table (key columns it shares with the forecast + segment columns)."""
    path = config.segments.mapping
    if path is None:
        return None
    present = _columns_of(path, "mapping", "segments.mapping")
    keys = [k for k in config.forecast.keys if k in present]
    if not keys:
        raise InputError(
            f"The mapping {path} (config key `segments.mapping`) shares no key column with the "
            f"forecast (keys {config.forecast.keys}); its columns are {', '.join(present)}."
        )
    seg = [s for s in config.segments.columns if s in present]
    cols = [Column(k, "key", "forecast.keys") for k in keys]
    cols += [Column(s, "text", "segments.columns") for s in seg]
    table = read_columns(path, cols, role="mapping", key="segments.mapping").drop_duplicates()
    if seg:
        twice = table.duplicated(keys, keep=False).to_numpy()
        if twice.any():
            rows = table.loc[twice].sort_values(keys).head(2 * _SHOW)
            first = rows.iloc[0]
            series = ", ".join(f"{k}={first[k]}" for k in keys)
            segs = rows.loc[(rows[keys] == first[keys]).all(axis=1), seg]
            both = " and ".join(
                "/".join("(empty)" if pd.isna(v) else str(v) for v in r)
                for r in segs.to_numpy(dtype=object).tolist())
            n = table.loc[twice, keys].drop_duplicates().shape[0]
            raise InputError(
                f"The mapping {path} puts {n} series in more than one segment (e.g. {series} "
                f"is in {both}). Each series must map to exactly one segment."
            )
    return table


def _columns_of(path: Path, role: str, key: str) -> list[str]:
    """The column names of the first file at ``path``, as written."""
    return _header(list_files(path, role, key)[0], role)


def unify_categories(frames: Sequence[pd.DataFrame], columns: Sequence[str]
                     ) -> list[pd.DataFrame]:
    """Give each categorical key column the same (sorted) categories in every frame, so joins
    and group-bys across frames work on integer codes."""
    out = list(frames)
    for col in columns:
        having = [i for i, f in enumerate(out)
                  if col in f.columns and isinstance(f[col].dtype, pd.CategoricalDtype)]
        if not having:
            continue
        union = out[having[0]][col].cat.categories
        for i in having[1:]:
            union = union.union(out[i][col].cat.categories)
        union = union.sort_values()
        for i in having:
            if not out[i][col].cat.categories.equals(union):
                out[i] = out[i].assign(**{col: out[i][col].cat.set_categories(union)})
    return out


def _labels(columns: Sequence[pd.Series]) -> pd.Categorical:
    """One categorical label per row: the columns' values joined by "/" (missing → unassigned);
    built on the distinct combinations only."""
    codes_list = []
    names_list = []
    for col in columns:
        cat = col.astype("category") if not isinstance(col.dtype, pd.CategoricalDtype) else col
        codes_list.append(cat.cat.codes.to_numpy().astype(np.int64))
        names_list.append(np.append(cat.cat.categories.astype(str).to_numpy(), F.UNASSIGNED))
    combo = np.zeros(len(columns[0]), dtype=np.int64)
    for codes, names in zip(codes_list, names_list, strict=True):
        combo = combo * len(names) + np.where(codes < 0, len(names) - 1, codes)
    ids, uniques = pd.factorize(combo, sort=True)
    parts = []
    rest = np.asarray(uniques)
    for names in reversed(names_list):
        parts.append(names[rest % len(names)])
        rest = rest // len(names)
    labels = parts[-1].astype(object)
    for part in reversed(parts[:-1]):
        labels = labels + "/" + part.astype(object)
    cats = pd.Index(labels.astype(str))
    if cats.has_duplicates:  # distinct combinations that print alike ("a/b" + "c" vs "a" + "b/c")
        label = cats[cats.duplicated()][0]
        twins = [
            " + ".join(repr(str(p[i])) for p in reversed(parts))
            for i in np.flatnonzero(cats == label)[:2]
        ]
        raise InputError(
            f"Segment columns {', '.join(repr(str(c.name)) for c in columns)} (config key "
            f"`segments.columns`) give two different segments the same name {label!r} "
            f"({' and '.join(twins)}), because their values are joined with '/'. Remove the "
            "'/' from the segment values so that each segment keeps a name of its own."
        )
    return pd.Categorical.from_codes(ids.astype(np.int32), categories=cats)


def assign_segments(frame: pd.DataFrame, config: Config, mapping: pd.DataFrame | None,
                    *, role: str) -> pd.DataFrame:
    """Add the ``segment`` column: segment columns joined by "/" (from the frame or mapping).

    Key columns of ``frame`` and ``mapping`` must share categories (:func:`unify_categories`).
    """
    seg_cols = list(config.segments.columns)
    if not seg_cols:
        return frame.assign(**{F.SEGMENT: _constant(F_ALL, len(frame), frame.index)})
    from_map = [s for s in seg_cols if s not in frame.columns]
    if from_map:
        if mapping is None or any(s not in mapping.columns for s in from_map):
            absent = [s for s in from_map if mapping is None or s not in mapping.columns]
            where = "the mapping table" if mapping is not None else "a mapping (none configured)"
            raise InputError(
                f"Segment column {absent[0]!r} (config key `segments.columns`) is in neither the "
                f"{role} file nor {where}. Add it to one of them, or fix the name."
            )
        keys = [k for k in mapping.columns if k in config.forecast.keys]
        looked_up = _lookup(frame, mapping, keys, from_map)
        frame = frame.assign(**looked_up)
    seg = _labels([frame[s] for s in seg_cols])
    return frame.drop(columns=[s for s in seg_cols if s in frame.columns]).assign(
        **{F.SEGMENT: pd.Series(seg, index=frame.index)}
    )



def _constant(value: str, n: int, index: pd.Index) -> pd.Series:
    cat = pd.Categorical.from_codes(np.zeros(n, dtype=np.int8), categories=[value])
    return pd.Series(cat, index=index)


def _lookup(frame: pd.DataFrame, mapping: pd.DataFrame, keys: list[str],
            columns: list[str]) -> dict[str, pd.Series]:
    """``mapping``'s ``columns`` for each row of ``frame`` (missing where unmapped)."""
    if (len(keys) == 1 and isinstance(frame[keys[0]].dtype, pd.CategoricalDtype)
            and isinstance(mapping[keys[0]].dtype, pd.CategoricalDtype)
            and frame[keys[0]].cat.categories.equals(mapping[keys[0]].cat.categories)):
        # one key column with shared categories: a lookup by code, no hash join
        k = keys[0]
        row_of_code = np.full(len(frame[k].cat.categories) + 1, -1, dtype=np.int64)
        row_of_code[mapping[k].cat.codes.to_numpy()] = np.arange(len(mapping))
        rows = row_of_code[frame[k].cat.codes.to_numpy()]  # code -1 hits the last slot: -1
        out = {}
        for c in columns:
            col = mapping[c].astype("category") if not isinstance(
                mapping[c].dtype, pd.CategoricalDtype) else mapping[c]
            codes = np.where(rows >= 0, col.cat.codes.to_numpy()[np.maximum(rows, 0)], -1)
            out[c] = pd.Series(pd.Categorical.from_codes(codes, col.cat.categories),
                               index=frame.index)
        return out
    joined = frame[keys].merge(mapping[keys + columns], on=keys, how="left", validate="m:1")
    return {c: pd.Series(joined[c].to_numpy(), index=frame.index) for c in columns}


def segments_of_series(frames: Sequence[pd.DataFrame], keys: list[str]) -> pd.DataFrame:
    """A (keys → segment) table from frames that carry ``segment`` (last one wins)."""
    table = pd.concat([f[[*keys, F.SEGMENT]] for f in frames if len(f)], ignore_index=True)
    return table.drop_duplicates(keys, keep="last")


def attach_segments(actuals: pd.DataFrame, config: Config, mapping: pd.DataFrame | None,
                    known: Callable[[], pd.DataFrame]) -> pd.DataFrame:
    """Segment of each actual's series: from the mapping if it has every segment column, else
    from the forecasts that carry one (``known()``); ``unassigned`` where unknown."""
    seg_cols = list(config.segments.columns)
    if not seg_cols:
        return actuals.assign(**{F.SEGMENT: _constant(F_ALL, len(actuals), actuals.index)})
    if mapping is not None and all(s in mapping.columns for s in seg_cols):
        return assign_segments(actuals, config, mapping, role="actuals")
    keys = list(config.forecast.keys)
    table = known()
    seg = _lookup(actuals, table, keys, [F.SEGMENT])[F.SEGMENT]
    seg = seg.astype("category")
    if F.UNASSIGNED not in seg.cat.categories:
        seg = seg.cat.add_categories([F.UNASSIGNED])
    return actuals.assign(**{F.SEGMENT: seg.fillna(F.UNASSIGNED)})
