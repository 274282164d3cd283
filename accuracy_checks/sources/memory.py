"""Frames in memory as inputs: pandas DataFrames or pyarrow Tables → the canonical frames.

``run_checks(config, forecast=…, actuals=…, history=…, mapping=…)`` hands the frames it is
given here (:class:`GivenFrames`); a frame given replaces the config's place for that input
(``history=`` replaces every ``history`` entry). A frame has the configured column names (as a
file would) and is read by the rules of files, through the same converters
(:func:`accuracy_checks.sources.columns.convert`): keys as text (integers as their decimal
text, whole floats as integers, other types refused), one date format per column, numbers.
A bad frame raises the :class:`~accuracy_checks.errors.InputError` a bad file gets, naming the
frame (``the forecast frame (argument `forecast`)``), the column, the config key and the
first offending rows, numbered by position from 0 (``frame.iloc[N]``; the index is ignored).

Reading only what is used holds as for Parquet files: an earlier-cycles frame keeps the rows of
a configured lag inside the evaluation span (their date columns are converted whole, to find
each cycle's first period; the other columns on the kept rows only), and the actuals keep the
recent periods the checks use (with the series the older rows know). Rows left out are not
validated, as rows a Parquet read filters out are not; an error found in a kept row names its
position in the whole frame.

**Fingerprints.** Each frame is recorded in the run's ``info`` without a path:
``{"frame": "pandas.DataFrame" | "pyarrow.Table", "rows", "columns", "sha256"}``, where
``sha256`` is the SHA-256 of the names of the columns read and of pandas' 64-bit hash of every
row of those columns (:func:`pandas.util.hash_pandas_object`, index excluded; a pyarrow Table
is hashed after its conversion to pandas). Equal content gives the same fingerprint in any
process; any change of a value, of the row order or of a column's type changes it (but for a
64-bit collision). It costs one vectorised pass over the columns read.
"""

from __future__ import annotations

import hashlib
from collections.abc import Callable, Sequence
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd

from accuracy_checks.config import Config
from accuracy_checks.errors import InputError
from accuracy_checks.sources import frames as F
from accuracy_checks.sources.columns import Column, convert, no_rows, refuse_missing, to_key
from accuracy_checks.sources.readers import (
    actual_columns,
    forecast_columns,
    refuse_repeated_actuals,
)
from accuracy_checks.sources.segments import mapping_columns, refuse_two_segments

__all__ = ["Given", "GivenFrames", "actuals_from_frame", "forecast_from_frame", "frame_info",
           "history_from_frame", "mapping_from_frame"]

#: stands for the file in a converter's message, then replaced by the frame's label
_MARK = "\x00frame\x00"
#: the kinds of frame taken
_KINDS = "a pandas DataFrame or a pyarrow Table"


@dataclass(frozen=True)
class GivenFrames:
    """The frames given to one run (``None``: read that input from the config's place)."""

    forecast: Any = None
    actuals: Any = None
    #: earlier cycles: one frame or a list of frames (replaces the config's ``history``)
    history: Any = None
    mapping: Any = None

    def __post_init__(self) -> None:
        for name in ("forecast", "actuals", "mapping"):
            value = getattr(self, name)
            if value is not None:
                object.__setattr__(self, name, Given(name, value))
        if self.history is not None:
            parts = (list(self.history) if isinstance(self.history, list | tuple)
                     else [self.history])
            names = (["history"] if not isinstance(self.history, list | tuple)
                     else [f"history[{i}]" for i in range(len(parts))])
            object.__setattr__(self, "history",
                               [Given(n, p, role="history") for n, p in zip(names, parts,
                                                                           strict=True)])

    @property
    def any(self) -> bool:
        """Whether any frame was given."""
        return any(v is not None for v in (self.forecast, self.actuals, self.history,
                                           self.mapping))


class Given:
    """One frame given as an input: its raw pandas frame (a pyarrow Table converted once,
    the index dropped), the argument that named it, and its label in messages."""

    def __init__(self, argument: str, value: object, *, role: str | None = None) -> None:
        self.argument = argument
        self.role = role or argument
        self.kind = _kind(value, argument)
        self.label = f"{self.role} frame (argument `{argument}`)"
        self._value = value
        self._frame: pd.DataFrame | None = None

    @property
    def frame(self) -> pd.DataFrame:
        """The frame as pandas, rows by position (converted on first use)."""
        if self._frame is None:
            value = self._value
            frame = value if isinstance(value, pd.DataFrame) else value.to_pandas()  # type: ignore[attr-defined]
            self._frame = frame.reset_index(drop=True)
            self._value = None  # keep one copy
        return self._frame

    def header(self, columns: Sequence[Column]) -> None:
        """Refuse a frame lacking one of ``columns`` or naming one of them twice."""
        present = [str(c) for c in self.frame.columns]
        refuse_missing(columns, present, self.label,
                       "A frame has the configured column names: rename the column, or fix "
                       "the name in the config.")
        twice = self.frame.columns.duplicated(keep=False)
        repeated = {c for c, dup in zip(present, twice, strict=True) if dup}
        named = [c for c in columns if c.name in repeated]
        if named:
            c = named[0]
            raise InputError(
                f"The {self.label} has {present.count(c.name)} columns named {c.name!r} "
                f"(config key `{c.key}`); which one holds the data cannot be told. Rename or "
                "drop the extra column(s)."
            )

    def convert(self, columns: Sequence[Column], rows: np.ndarray | None = None
                ) -> pd.DataFrame:
        """``columns`` converted to their kinds (of the ``rows`` mask only, when given),
        renamed to their canonical names. An error in a kept row names its position in the
        whole frame."""
        raw = self.frame if rows is None else self.frame.loc[rows]
        try:
            out = _converted(raw, columns, self.role)
        except InputError as exc:
            if rows is not None:
                _converted(self.frame, columns, self.role, self.label)  # names the right rows
            raise InputError(_relabel(str(exc), self.role, self.label)) from None
        if rows is not None:
            out = out.reset_index(drop=True)
        return out.rename(columns={c.name: c.canonical for c in columns if c.canonical})

    def refuse_empty(self, frame: pd.DataFrame) -> None:
        if len(frame) == 0:
            raise no_rows(f"The {self.label}")

    def info(self, columns: Sequence[str]) -> dict[str, object]:
        """The frame's entry in a run's ``info`` (module docstring: fingerprints)."""
        return frame_info(self.frame, list(dict.fromkeys(columns)), self.kind)


def _kind(value: object, argument: str) -> str:
    """``pandas.DataFrame`` or ``pyarrow.Table``; anything else is refused."""
    if isinstance(value, pd.DataFrame):
        return "pandas.DataFrame"
    module = type(value).__module__
    if module.startswith("pyarrow") and type(value).__name__ in ("Table", "RecordBatch"):
        return f"pyarrow.{type(value).__name__}"
    raise InputError(
        f"The argument `{argument}` is a {type(value).__module__}.{type(value).__name__}; "
        f"give {_KINDS} with the configured column names (or leave it out to read the "
        "config's place)."
    )


def _converted(raw: pd.DataFrame, columns: Sequence[Column], role: str,
               label: str | None = None) -> pd.DataFrame:
    out: dict[str, pd.Series] = {}
    try:
        for c in columns:
            if c.name not in out:
                out[c.name] = convert(raw[c.name], Path(_MARK), c, role, 0)
    except InputError as exc:
        if label is None:
            raise
        raise InputError(_relabel(str(exc), role, label)) from None
    return pd.DataFrame(out)


def _relabel(message: str, role: str, label: str) -> str:
    """A converter's message about "the <role> file <mark>" as one about the frame."""
    return message.replace(f"{role} file {Path(_MARK)}", label).replace(str(Path(_MARK)),
                                                                        label)


def frame_info(frame: pd.DataFrame, columns: list[str], kind: str) -> dict[str, object]:
    """``{"frame", "rows", "columns", "sha256"}`` of a frame's ``columns`` (module
    docstring)."""
    h = hashlib.sha256("\x1f".join(columns).encode())
    if len(frame):
        rows = pd.util.hash_pandas_object(frame[columns], index=False)
        h.update(np.ascontiguousarray(rows.to_numpy(dtype=np.uint64)).tobytes())
    return {"frame": kind, "rows": len(frame), "columns": columns, "sha256": h.hexdigest()}


# ------------------------------------------------------------------------- the inputs


def forecast_from_frame(config: Config, given: Given, *, segment_columns: Sequence[str] = ()
                        ) -> pd.DataFrame:
    """The current forecast from a frame: :func:`~.readers.read_forecast`'s columns and
    checks (segment columns present in the frame are read too)."""
    cols = _with_segments(forecast_columns(config), given, segment_columns)
    given.header(cols)
    frame = given.convert(cols)
    given.refuse_empty(frame)
    return frame


def history_from_frame(config: Config, given: Given, *, issued: pd.Timestamp,
                       span: list[pd.Timestamp], segment_columns: Sequence[str],
                       prune: Callable[[pd.DataFrame, pd.Series], pd.DataFrame]
                       ) -> tuple[pd.DataFrame, set[pd.Timestamp]]:
    """The rows of an earlier-cycles frame the evaluation can use (cycles issued before the
    run's, target in ``span``, then ``prune``d to the configured lags with each cycle's
    first period) and the issue dates of every cycle it holds."""
    cols = _with_segments(forecast_columns(config), given, segment_columns)
    given.header(cols)
    dated = [c for c in cols if c.kind == "date"]
    dates = given.convert(dated)
    starts = dates.groupby(F.ISSUED, sort=False)[F.PERIOD].min()
    cycles = {pd.Timestamp(t) for t in starts.index}
    keep = (dates[F.PERIOD].isin(span) & (dates[F.ISSUED] < issued)).to_numpy()
    part = given.convert(cols, keep)
    return prune(part, starts), cycles


def actuals_from_frame(config: Config, given: Given, *, needed: int | None
                       ) -> tuple[pd.DataFrame, pd.DataFrame | None]:
    """The actuals from a frame, keys named as the forecast's: only the ``needed`` most
    recent periods that hold an actual (with the series the older rows know) when there are
    more, else every row and ``None``. Refuses a series with two actuals in one period."""
    cols = actual_columns(config)
    given.header(cols)
    rows: np.ndarray | None = None
    older: pd.DataFrame | None = None
    if needed is not None:
        dated = given.convert([c for c in cols if c.kind != "key"])
        periods = np.sort(dated.loc[dated[F.ACTUAL].notna(), F.PERIOD].unique())
        if len(periods) > needed:
            rows = dated[F.PERIOD].isin(periods[-needed:]).to_numpy()
            older = _series_of(config, given)
    frame = given.convert(cols, rows)
    if rows is None:
        given.refuse_empty(frame)
    ac = config.actuals
    if ac.keys and list(ac.keys) != list(config.forecast.keys):
        frame = frame.rename(columns=dict(zip(ac.keys, config.forecast.keys, strict=False)))
    refuse_repeated_actuals(frame, list(config.forecast.keys), Path(f"frame (argument "
                                                                    f"`{given.argument}`)"))
    return frame, older


def _series_of(config: Config, given: Given) -> pd.DataFrame:
    """The distinct series of every row of an actuals frame, keys named as the forecast's
    (converted once per distinct series; an error names the rows of the whole frame)."""
    src = list(config.actual_keys)
    distinct = given.frame[src].drop_duplicates()
    key = "actuals.keys" if config.actuals.keys else "forecast.keys"
    out = {}
    for name, target in zip(src, config.forecast.keys, strict=False):
        try:
            out[target] = to_key(distinct[name], Path(_MARK), Column(name, "key", key),
                                 "actuals", 0)
        except InputError as exc:
            given.convert([Column(name, "key", key)])  # raises, naming the whole frame's rows
            raise InputError(_relabel(str(exc), "actuals", given.label)) from None
    return pd.DataFrame(out).reset_index(drop=True).drop_duplicates()


def mapping_from_frame(config: Config, given: Given) -> pd.DataFrame:
    """The segment mapping from a frame: the key columns it shares with the forecast and the
    segment columns it holds (:func:`~.segments.read_mapping`'s rules)."""
    present = [str(c) for c in given.frame.columns]
    keys, seg, cols = mapping_columns(config, present, given.label)
    given.header(cols)
    table = given.convert(cols).drop_duplicates()
    given.refuse_empty(table)
    if seg:
        refuse_two_segments(table, keys, seg, Path(f"frame (argument `{given.argument}`)"))
    return table


def _with_segments(cols: list[Column], given: Given,
                   segment_columns: Sequence[str]) -> list[Column]:
    """``cols`` and the segment columns the frame holds (as text)."""
    names = {c.name for c in cols}
    present = {str(c) for c in given.frame.columns}
    return cols + [Column(s, "text", "segments.columns") for s in segment_columns
                   if s in present and s not in names]
