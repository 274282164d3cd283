"""Columns and their converters: keys and segments as text, numbers, dates in one format.

A :class:`Column` is one configured column (its name in the file, its kind, the config key that
names it); :func:`convert` turns the raw values a reader of :mod:`accuracy_checks.sources.files`
got into the canonical dtype, or raises :class:`~accuracy_checks.errors.InputError` naming the
file, the column, the config key and the first offending rows (:func:`listed_rows`).

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

Speed: key, segment and date columns are parsed per distinct value (factorized first, or read
dictionary-encoded), never per row in Python.
"""

from __future__ import annotations

import re
from collections.abc import Callable, Sequence
from dataclasses import dataclass
from pathlib import Path

import numpy as np
import pandas as pd

from accuracy_checks.errors import InputError
from accuracy_checks.results import ALL_SERIES
from accuracy_checks.sources import frames as F

__all__ = ["RESERVED_SEGMENTS", "SHOWN", "Column", "convert", "listed_rows", "plain", "to_date",
           "to_key", "to_number"]

SHOWN = 5  # offending values shown in a message
#: segment names the tool gives a meaning of its own (all series; actuals of unknown segment)
RESERVED_SEGMENTS = (ALL_SERIES, F.UNASSIGNED)
#: the calendar the tool computes on (nanosecond timestamps)
_FIRST_DAY, _LAST_DAY = pd.Timestamp("1677-09-22"), pd.Timestamp("2262-04-11")
_ISO = "YYYY-MM-DD (ISO 8601)"


@dataclass(frozen=True)
class Column:
    """One configured column: its name in the file, its role and the config key that names it."""

    name: str
    kind: str  # "key" | "date" | "number" | "text"
    key: str  # config key path, for messages
    canonical: str | None = None  # rename to this
    fmt: str | None = None  # dates: the strftime format (None: ISO 8601)


def first_refusal(columns: Sequence[Column], check: Callable[[Column], object]
                  ) -> InputError | None:
    """The first :class:`InputError` of ``check`` run on each column of ``columns`` in order
    (a column named twice checked once), or ``None``: how a reader's refusal is found again
    one column at a time, so that only one column is in memory at once."""
    done: set[str] = set()
    for c in columns:
        if c.name in done:
            continue
        done.add(c.name)
        try:
            check(c)
        except InputError as exc:
            return exc
    return None


def no_rows(where: str, *, header: bool = False) -> InputError:
    """The refusal of an input without a data row; ``where`` names it as the messages do
    (``The actuals data/actuals.csv (config key `actuals.path`)``)."""
    has = "has a header but no rows" if header else "has no rows"
    return InputError(f"{where} {has}; an input without data cannot be checked.")


def refuse_missing(columns: Sequence[Column], present: Sequence[object], where: str,
                   fix: str) -> None:
    """Refuse an input (``where``: "forecast file x.csv", "mapping table t …") whose columns
    ``present`` lack one of ``columns``: the first missing one, its config key, the columns
    the input has, and ``fix`` (how to mend it)."""
    missing = [c for c in columns if c.name not in present]
    if missing:
        c = missing[0]
        raise InputError(
            f"The {where} has no column {c.name!r} (config key `{c.key}`). "
            f"Its columns are: {', '.join(map(str, present)) or '(none)'}. {fix}"
        )


def convert(s: pd.Series, file: Path, c: Column, role: str, first_line: int) -> pd.Series:
    """The raw values ``s`` of column ``c`` in its canonical dtype: keys and segment labels
    as categoricals of text, dates as naive ``datetime64[ns]``, numbers as ``float64``.
    ``first_line`` numbers the first row in messages (2 for CSV: line 1 is the header)."""
    if c.kind == "key":
        return to_key(s, file, c, role, first_line)
    if c.kind == "date":
        return to_date(s, file, c, role, first_line)
    if c.kind == "number":
        return to_number(s, file, c, role, first_line)
    return to_key(s, file, c, role, first_line, allow_missing=True, reserved=RESERVED_SEGMENTS)


def _count(n: int, one: str, many: str) -> str:
    """``1 value that is`` / ``3 values that are``."""
    return f"{n:,} {one if n == 1 else many}"


def plain(value: object) -> str:
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


def listed_rows(mask: np.ndarray, values: pd.Series, first_line: int) -> str:
    idx = np.flatnonzero(mask)[:SHOWN]
    label = "line" if first_line == 2 else "row"
    shown = ", ".join(f"{label} {i + first_line}: {plain(values.iloc[i])}" for i in idx)
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
            f"({listed_rows(bad, s, first_line)}). Series keys and segments are identifiers, read "
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


def to_key(s: pd.Series, file: Path, c: Column, role: str, first_line: int, *,
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
            f"{int(bad.sum())} rows ({listed_rows(bad, s, first_line)}). "
            "Every row needs its series keys."
        )
    taken = labels.isin(list(reserved))
    if taken.any():
        hit = (codes >= 0) & taken[np.maximum(codes, 0)]
        names = " and ".join(repr(v) for v in labels[taken])
        raise InputError(
            f"The {role} file {file}, segment column {c.name!r} (config key `{c.key}`), holds "
            f"the reserved segment name {names} ({listed_rows(hit, s, first_line)}): '*' names the "
            "results over all series and 'unassigned' the actuals whose segment is unknown, "
            "so a segment of that name would be mixed up with them. Rename that segment."
        )
    cat = pd.Categorical.from_codes(codes.astype(np.int32), categories=pd.Index(labels, dtype=str))
    return pd.Series(cat, index=s.index, name=s.name)


def to_number(s: pd.Series, file: Path, c: Column, role: str, first_line: int) -> pd.Series:
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
            f"({listed_rows(bad, s, first_line)}). "
            "Write plain numbers (a dot as decimal mark), or leave the cell empty for a "
            "missing value."
        )
    return num.astype("float64")


def to_date(s: pd.Series, file: Path, c: Column, role: str, first_line: int) -> pd.Series:
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
            f"{int(missing.sum())} rows ({listed_rows(missing, s, first_line)}). "
            "Every row needs a date."
        )
    outside = ((out < _FIRST_DAY) | (out >= _LAST_DAY + pd.Timedelta(days=1))).to_numpy()
    if outside.any():
        raise InputError(
            f"The {role} file {file}, date column {c.name!r} (config key `{c.key}`), has "
            f"{_count(int(outside.sum()), 'date', 'dates')} outside the calendar the tool "
            f"computes on, {_FIRST_DAY:%Y-%m-%d} to {_LAST_DAY:%Y-%m-%d} "
            f"({listed_rows(outside, s, first_line)}). Fix those dates."
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
        f"column's format {fmt} ({listed_rows(bad, s, first_line)}). A date column is read with "
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
