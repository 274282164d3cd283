"""Read the configured files into the canonical frames of :mod:`accuracy_checks.frames`.

CSV and Parquet, a file or a folder of files. Every problem a user can fix (missing file,
empty file, missing column, text in a number column, unparseable dates, a mapping that puts a
series in two segments) raises :class:`~accuracy_checks.errors.InputError` naming the file,
the column and, where it helps, the first offending rows.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass
from pathlib import Path

import numpy as np
import pandas as pd

from accuracy_checks import frames as F
from accuracy_checks.config import Config
from accuracy_checks.errors import InputError

_PARQUET = {".parquet", ".pq"}
_CSV = {".csv", ".txt", ".tsv"}
_SHOW = 5  # offending values shown in a message


@dataclass(frozen=True)
class Column:
    """One configured column: its name in the file, its role and the config key that names it."""

    name: str
    kind: str  # "key" | "date" | "number" | "text"
    key: str  # config key path, for messages
    canonical: str | None = None  # rename to this


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
                 allow_empty: bool = False) -> pd.DataFrame:
    """Read ``columns`` from a file or folder and convert them to their kinds."""
    parts = [_read_file(f, columns, role=role) for f in list_files(path, role, key)]
    frame = parts[0] if len(parts) == 1 else pd.concat(parts, ignore_index=True)
    if len(frame) == 0 and not allow_empty:
        raise InputError(
            f"The {role} {path} (config key `{key}`) has a header but no rows; "
            f"a {role} with no data cannot be checked."
        )
    return frame.rename(columns={c.name: c.canonical for c in columns if c.canonical})


def _read_file(file: Path, columns: Sequence[Column], *, role: str) -> pd.DataFrame:
    wanted = list(dict.fromkeys(c.name for c in columns))
    is_parquet = file.suffix.lower() in _PARQUET
    try:
        if is_parquet:
            import pyarrow.parquet as pq

            present = pq.read_schema(file).names
        else:
            present = list(_read_csv(file, nrows=0).columns)
    except pd.errors.EmptyDataError:
        raise InputError(
            f"The {role} file {file} is empty (not even a header line)."
        ) from None
    except (OSError, ValueError, UnicodeDecodeError) as exc:
        kind = "Parquet" if is_parquet else "CSV"
        raise InputError(f"The {role} file {file} cannot be read as {kind}: {exc}") from None
    missing = [c for c in columns if c.name not in present]
    if missing:
        c = missing[0]
        raise InputError(
            f"The {role} file {file} has no column {c.name!r} (config key `{c.key}`). "
            f"Its columns are: {', '.join(map(str, present)) or '(none)'}. "
            "Fix the column name in the config or in the file."
        )
    try:
        if is_parquet:
            frame = pd.read_parquet(file, columns=wanted)
        else:
            text_cols = {c.name: str for c in columns if c.kind in ("key", "text", "date")}
            frame = _read_csv(file, usecols=wanted, dtype=text_cols)
    except (OSError, ValueError, UnicodeDecodeError, pd.errors.ParserError) as exc:
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
            out[c.name] = s.astype("string")
    return pd.DataFrame(out)


def _read_csv(file: Path, **kwargs: object) -> pd.DataFrame:
    sep = "\t" if file.suffix.lower() == ".tsv" else ","
    return pd.read_csv(file, sep=sep, **kwargs)  # type: ignore[call-overload,no-any-return]


def _rows(mask: np.ndarray, values: pd.Series, first_line: int) -> str:
    idx = np.flatnonzero(mask)[:_SHOW]
    label = "line" if first_line == 2 else "row"
    shown = ", ".join(f"{label} {i + first_line}: {values.iloc[i]!r}" for i in idx)
    more = f" and {int(mask.sum()) - len(idx)} more" if mask.sum() > len(idx) else ""
    return shown + more


def _to_key(s: pd.Series, file: Path, c: Column, role: str, first_line: int) -> pd.Series:
    out = s.astype("string").str.strip()
    bad = out.isna().to_numpy()
    if bad.any():
        raise InputError(
            f"The {role} file {file}, key column {c.name!r} (config key `{c.key}`), is empty in "
            f"{int(bad.sum())} rows ({_rows(bad, s, first_line)}). Every row needs its series keys."
        )
    return out


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
            f"{int(bad.sum())} values that are not numbers ({_rows(bad, s, first_line)}). "
            "Write plain numbers (a dot as decimal mark), or leave the cell empty for a "
            "missing value."
        )
    return num.astype("float64")


def _to_date(s: pd.Series, file: Path, c: Column, role: str, first_line: int) -> pd.Series:
    if pd.api.types.is_datetime64_any_dtype(s):
        out = s
    else:
        # parse each distinct value once: millions of rows share a few hundred dates
        codes, uniques = pd.factorize(s.astype("string"), use_na_sentinel=True)
        parsed = _parse_dates(pd.Series(uniques, dtype="string"), file, c, role)
        out = pd.Series(parsed.take(codes, allow_fill=True), index=s.index)
        bad = (codes >= 0) & out.isna().to_numpy()
        if bad.any():
            raise InputError(
                f"The {role} file {file}, column {c.name!r} (config key `{c.key}`), has "
                f"{int(bad.sum())} values that are not dates ({_rows(bad, s, first_line)}). "
                "Write dates as YYYY-MM-DD (ISO 8601)."
            )
    if isinstance(out.dtype, pd.DatetimeTZDtype):
        out = out.dt.tz_localize(None)  # keep the wall-clock date the producer wrote
    missing = out.isna().to_numpy()
    if missing.any():
        raise InputError(
            f"The {role} file {file}, date column {c.name!r} (config key `{c.key}`), is empty in "
            f"{int(missing.sum())} rows ({_rows(missing, s, first_line)}). Every row needs a date."
        )
    return out.astype("datetime64[ns]")


def _parse_dates(values: pd.Series, file: Path, c: Column, role: str) -> pd.DatetimeIndex:
    try:
        parsed = pd.to_datetime(values, errors="coerce", format="ISO8601")
    except ValueError:
        parsed = None
    if parsed is None or parsed.isna().any():
        try:
            alt = pd.to_datetime(values, errors="coerce", format="mixed")
        except ValueError as exc:
            raise InputError(
                f"The {role} file {file}, date column {c.name!r} (config key `{c.key}`), mixes "
                f"time zones or formats that cannot be read together ({exc}). Write all dates "
                "in one form, YYYY-MM-DD, without time-zone offsets."
            ) from None
        parsed = alt if parsed is None else parsed.fillna(alt)
    if isinstance(parsed.dtype, pd.DatetimeTZDtype):
        parsed = parsed.dt.tz_localize(None)
    if parsed.dtype == object:  # mixed naive/aware values
        raise InputError(
            f"The {role} file {file}, date column {c.name!r} (config key `{c.key}`), mixes "
            "dates with and without time-zone offsets. Write all dates as YYYY-MM-DD."
        )
    return pd.DatetimeIndex(parsed).as_unit("ns")


# ------------------------------------------------------------------ configured sources


def forecast_columns(config: Config) -> list[Column]:
    fc = config.forecast
    cols = [Column(k, "key", "forecast.keys") for k in fc.keys]
    cols += [
        Column(fc.period, "date", "forecast.period", F.PERIOD),
        Column(fc.issued, "date", "forecast.issued", F.ISSUED),
        Column(fc.value, "number", "forecast.value", F.FORECAST),
    ]
    cols += [
        Column(name, "number", f"forecast.quantiles.{tau:g}", F.quantile_column(tau))
        for tau, name in fc.quantiles.items()
    ]
    return cols


def read_forecast(config: Config, path: Path | None = None, *, role: str = "forecast",
                  key: str = "forecast.path", segment_columns: Sequence[str] = (),
                  allow_empty: bool = False) -> pd.DataFrame:
    """The forecast (or an earlier-cycles file with the same columns), canonical names."""
    path = path or config.forecast.path
    cols = forecast_columns(config)
    names = {c.name for c in cols}
    present = _columns_of(path, role, key)
    cols += [Column(s, "text", "segments.columns") for s in segment_columns
             if s in present and s not in names]
    return read_columns(path, cols, role=role, key=key, allow_empty=allow_empty)


def read_actuals(config: Config, path: Path | None = None) -> pd.DataFrame:
    ac = config.actuals
    path = path or ac.path
    cols = [Column(k, "key", "actuals.keys" if ac.keys else "forecast.keys")
            for k in config.actual_keys]
    cols += [
        Column(ac.period, "date", "actuals.period", F.PERIOD),
        Column(ac.value, "number", "actuals.value", F.ACTUAL),
    ]
    frame = read_columns(path, cols, role="actuals", key="actuals.path")
    if ac.keys and list(ac.keys) != list(config.forecast.keys):
        frame = frame.rename(columns=dict(zip(ac.keys, config.forecast.keys, strict=False)))
    keys = list(config.forecast.keys)
    dup = frame.duplicated([*keys, F.PERIOD], keep=False).to_numpy()
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
            segs = rows.loc[(rows[keys] == first[keys]).all(axis=1), seg].astype(str)
            both = " and ".join("/".join(r) for r in segs.to_numpy().tolist())
            n = table.loc[twice, keys].drop_duplicates().shape[0]
            raise InputError(
                f"The mapping {path} puts {n} series in more than one segment (e.g. {series} "
                f"is in {both}). Each series must map to exactly one segment."
            )
    return table


def _columns_of(path: Path, role: str, key: str) -> list[str]:
    files = list_files(path, role, key)
    f = files[0]
    try:
        if f.suffix.lower() in _PARQUET:
            import pyarrow.parquet as pq

            return list(pq.read_schema(f).names)
        return list(_read_csv(f, nrows=0).columns)
    except pd.errors.EmptyDataError:
        raise InputError(f"The {role} file {f} is empty (not even a header line).") from None
    except (OSError, ValueError, UnicodeDecodeError) as exc:
        raise InputError(f"The {role} file {f} cannot be read: {exc}") from None


def assign_segments(frame: pd.DataFrame, config: Config, mapping: pd.DataFrame | None,
                    *, role: str) -> pd.DataFrame:
    """Add the ``segment`` column: segment columns joined by "/" (from the frame or mapping)."""
    seg_cols = list(config.segments.columns)
    if not seg_cols:
        return frame.assign(**{F.SEGMENT: pd.Series("*", index=frame.index, dtype="string")})
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
        frame = frame.merge(mapping[keys + from_map], on=keys, how="left", validate="m:1")
    parts = [frame[s].astype("string").fillna(F.UNASSIGNED) for s in seg_cols]
    seg = parts[0]
    for p in parts[1:]:
        seg = seg + "/" + p
    return frame.drop(columns=[s for s in seg_cols if s in frame.columns]).assign(
        **{F.SEGMENT: seg.astype("string")}
    )


def segments_of_series(frames: Sequence[pd.DataFrame], keys: list[str]) -> pd.DataFrame:
    """A (keys → segment) table from frames that carry ``segment`` (last one wins)."""
    table = pd.concat([f[[*keys, F.SEGMENT]] for f in frames if len(f)], ignore_index=True)
    return table.drop_duplicates(keys, keep="last")


def attach_segments(actuals: pd.DataFrame, config: Config, mapping: pd.DataFrame | None,
                    known: pd.DataFrame) -> pd.DataFrame:
    """Segment of each actual's series: from the mapping if it has every segment column, else
    from the forecasts that carry one; ``unassigned`` where unknown."""
    seg_cols = list(config.segments.columns)
    if not seg_cols:
        return actuals.assign(**{F.SEGMENT: pd.Series("*", index=actuals.index, dtype="string")})
    if mapping is not None and all(s in mapping.columns for s in seg_cols):
        return assign_segments(actuals, config, mapping, role="actuals")
    keys = list(config.forecast.keys)
    out = actuals.merge(known, on=keys, how="left", validate="m:1")
    out[F.SEGMENT] = out[F.SEGMENT].astype("string").fillna(F.UNASSIGNED)
    return out
