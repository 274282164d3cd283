"""The series of a run, identified once for every coverage check, and the per-segment counts
and results those checks share.

Forecast and actuals key columns are factorised jointly into one dense series id per row
(:func:`identify_series`); each series gets a segment (its forecast's ``segment``; for a
series found only in the actuals, the actuals' ``segment``, ``"unassigned"`` when unknown).
Every count is then a ``np.bincount`` or a mask over those ids; only the ≤ ``max_examples``
example series of a result become Python objects. Used by :mod:`.coverage` and
:mod:`.horizon`.
"""

from __future__ import annotations

from collections.abc import Iterator
from dataclasses import dataclass
from functools import cached_property
from typing import Any

import numpy as np
import pandas as pd

from accuracy_checks.checks.examples import all_of, plural, row_examples, verb
from accuracy_checks.checks.judge import Thresholds
from accuracy_checks.results import ALL_SERIES, CheckResult, Reason, Status
from accuracy_checks.sources.codes import combine_codes
from accuracy_checks.sources.frames import SEGMENT, UNASSIGNED

__all__ = [
    "SegmentPart",
    "SeriesIndex",
    "by_segment",
    "date_codes",
    "first_rows",
    "identify_series",
    "judged",
    "key_codes",
    "skipped",
]

#: (segment name, series mask; ``None`` for ``"*"``), as :meth:`SeriesIndex.segments_to_report`
Segments = list[tuple[str, np.ndarray | None]]


@dataclass(frozen=True)
class SeriesIndex:
    """Series of forecast ∪ actuals: one dense id per row of each frame.

    Series are numbered by first appearance: the forecast's rows first, then the actuals'
    (as ``pd.factorize`` numbers the two frames' keys stacked), so "the first offending
    series" are those the files list first.
    """

    n: int
    f_ids: np.ndarray
    a_ids: np.ndarray
    in_forecast: np.ndarray
    in_actuals: np.ndarray
    #: segment code of each series, into ``segment_names``
    segment: np.ndarray
    segment_names: list[str]
    #: per series: its first row in the forecast (``-1``: none); ``None`` when not known
    f_first: np.ndarray | None = None
    #: per series: its first row in the actuals (``-1``: none); ``None`` when not known
    a_first: np.ndarray | None = None

    def segments_to_report(self, relevant: np.ndarray) -> Segments:
        """``("*", None)`` then (name, series mask) for each segment other than ``"*"`` that
        holds a ``relevant`` series (forecast or active)."""
        out: Segments = [(ALL_SERIES, None)]
        used = np.unique(self.segment[relevant])
        names = sorted(
            (self.segment_names[c], int(c)) for c in used if self.segment_names[c] != ALL_SERIES
        )
        out += [(name, self.segment == code) for name, code in names]
        return out

    def first_rows_in(self, row_ids: np.ndarray, wanted: np.ndarray) -> np.ndarray:
        """:func:`first_rows` of ``wanted`` in the frame whose series ids are ``row_ids``
        (``f_ids`` or ``a_ids``): looked up when the index knows them, else found."""
        known = (self.f_first if row_ids is self.f_ids else
                 self.a_first if row_ids is self.a_ids else None)
        if known is not None:
            return known[wanted]
        return first_rows(row_ids, wanted)

    def examples(self, frame: pd.DataFrame, row_ids: np.ndarray, wanted: np.ndarray,
                 keys: list[str]) -> list[dict[str, Any]]:
        """Key values of the series ``wanted`` (one dict each, read from their first row of
        ``frame``, whose series ids are ``row_ids``), with their segment."""
        examples = row_examples(frame, self.first_rows_in(row_ids, wanted), keys)
        names = np.asarray(self.segment_names, dtype=object)[self.segment[wanted]]
        for example, seg in zip(examples, names, strict=True):
            example[SEGMENT] = str(seg)
        return examples


def identify_series(forecast: pd.DataFrame, actuals: pd.DataFrame,
                    keys: list[str]) -> SeriesIndex:
    """One dense series id per row of ``forecast`` and ``actuals`` (their ``keys`` jointly),
    numbered by first appearance (forecast rows first, then the actuals').

    Categorical keys sharing their categories (the canonical frames) are combined from their
    codes and numbered by counting over the code space (no hashing of the rows); other keys
    are factorised, the two frames stacked.
    """
    n_f, n_a = len(forecast), len(actuals)
    found = _series_by_codes(forecast, actuals, keys)
    if found is not None:
        n, f_ids, a_ids, f_first, a_first = found
    else:
        arrays = [pd.concat([forecast[k], actuals[k]], ignore_index=True).array for k in keys]
        ids, uniques = pd.factorize(combine_codes(arrays, n_f + n_a))
        n = len(uniques)
        f_ids, a_ids = ids[:n_f], ids[n_f:]
        f_first, _ = _appearance(f_ids, n)
        a_first, _ = _appearance(a_ids, n)
    f_seg, f_names = _segment_codes(forecast)
    a_seg, a_names = _segment_codes(actuals)
    names = list(dict.fromkeys([*f_names, *a_names]))
    position = {name: i for i, name in enumerate(names)}
    segment = np.zeros(n, dtype=np.int64)
    # each series takes the segment of its last row: the actuals', then the forecast's wins
    for ids, seg, seg_names in ((a_ids, a_seg, a_names), (f_ids, f_seg, f_names)):
        ends = _run_ends(ids)
        segment[ids[ends]] = np.array([position[x] for x in seg_names],
                                      dtype=np.int64)[seg[ends]]
    return SeriesIndex(
        n=n,
        f_ids=f_ids,
        a_ids=a_ids,
        in_forecast=f_first >= 0,
        in_actuals=a_first >= 0,
        segment=segment,
        segment_names=names,
        f_first=f_first,
        a_first=a_first,
    )


def key_codes(frame: pd.DataFrame, keys: list[str],
              like: pd.DataFrame | None = None) -> tuple[np.ndarray, int] | None:
    """One int64 per row from categorical ``keys``: their codes + 1 (missing is 0) in mixed
    radix, computed in place (one array, no temporaries), and the size of the code space.
    ``None`` unless every key is categorical (with the categories of ``like``'s same column,
    when given) and the space is at most the rows (or 2**20): then a code indexes a table.

    >>> f = pd.DataFrame({"a": pd.Categorical(["x", "y", None]), "b": pd.Categorical(["u"] * 3)})
    >>> codes, space = key_codes(f, ["a", "b"])
    >>> codes.tolist(), space
    ([3, 5, 1], 6)
    """
    space = 1
    for k in keys:
        dtype = frame[k].dtype
        if not isinstance(dtype, pd.CategoricalDtype):
            return None
        if like is not None:
            other = like[k].dtype
            if not (isinstance(other, pd.CategoricalDtype)
                    and other.categories.equals(dtype.categories)):
                return None
        space *= len(dtype.categories) + 1
        if space > max(len(frame) + (0 if like is None else len(like)), 1 << 20):
            return None
    out = np.empty(len(frame), dtype=np.int64)
    for i, k in enumerate(keys):
        codes = frame[k].cat.codes.to_numpy()
        if i == 0:
            out[:] = codes
        else:
            out *= len(frame[k].cat.categories) + 1
            out += codes
        out += 1
    return out, space


def _series_by_codes(forecast: pd.DataFrame, actuals: pd.DataFrame, keys: list[str]
                     ) -> tuple[int, np.ndarray, np.ndarray, np.ndarray, np.ndarray] | None:
    """:func:`identify_series` on categorical keys with the same categories in both frames,
    when their code space is small (:func:`key_codes`): (n, f_ids, a_ids, f_first,
    a_first). ``None`` otherwise."""
    found_f = key_codes(forecast, keys, like=actuals)
    found_a = None if found_f is None else key_codes(actuals, keys, like=forecast)
    if found_f is None or found_a is None:
        return None
    (f_codes, space), (a_codes, _) = found_f, found_a
    first_f, new_f = _appearance(f_codes, space)
    first_a, new_a = _appearance(a_codes, space)
    only_a = a_codes[new_a]
    order = np.concatenate([f_codes[new_f], only_a[first_f[only_a] < 0]])
    label = np.full(space, -1, dtype=np.int64)
    label[order] = np.arange(len(order))
    f_ids = np.take(label, f_codes, out=f_codes)  # in place: the codes are not needed after
    a_ids = np.take(label, a_codes, out=a_codes)
    return len(order), f_ids, a_ids, first_f[order], first_a[order]


def _appearance(codes: np.ndarray, space: int) -> tuple[np.ndarray, np.ndarray]:
    """For codes in ``[0, space)``: the first row of each code (``-1``: absent) and the rows
    where a code appears for the first time, in row order.

    A first appearance starts a run of equal neighbours, so only run starts are looked at
    (one per series when the rows are grouped by series).

    >>> first, new = _appearance(np.array([2, 2, 0, 2, 0, 3]), 5)
    >>> first.tolist(), new.tolist()
    ([2, -1, 0, 5, -1], [0, 2, 5])
    """
    first = np.full(space, -1, dtype=np.int64)
    if len(codes) == 0:
        return first, np.zeros(0, dtype=np.int64)
    starts_mask = np.empty(len(codes), dtype=bool)
    starts_mask[0] = True
    np.not_equal(codes[1:], codes[:-1], out=starts_mask[1:])
    starts = np.flatnonzero(starts_mask)
    at = codes[starts]
    first[:] = len(codes)
    np.minimum.at(first, at, starts)
    new = starts[first[at] == starts]
    first[first == len(codes)] = -1
    return first, new


def _run_ends(ids: np.ndarray) -> np.ndarray:
    """The rows whose next row has another id (and the last row): assigning per row in row
    order leaves each id the value of its last row, and so does assigning at these rows."""
    ends = np.empty(len(ids), dtype=bool)
    if len(ids):
        ends[-1] = True
        np.not_equal(ids[1:], ids[:-1], out=ends[:-1])
    return np.flatnonzero(ends)


def _segment_codes(frame: pd.DataFrame) -> tuple[np.ndarray, list[str]]:
    """Segment code per row and the segment names (missing → ``"unassigned"``)."""
    if SEGMENT not in frame.columns:
        return np.zeros(len(frame), dtype=np.int64), [ALL_SERIES]
    column = frame[SEGMENT]
    if isinstance(column.dtype, pd.CategoricalDtype):  # its codes, no hashing
        codes = column.cat.codes.to_numpy()
        uniques: Any = column.cat.categories
    else:
        codes, uniques = pd.factorize(column.array)  # missing → -1
    names = [str(u) for u in uniques]
    if (codes < 0).any():
        codes = np.where(codes < 0, len(names), codes.astype(np.int64))
        names.append(UNASSIGNED)
    return codes, names


def first_rows(ids: np.ndarray, wanted: np.ndarray) -> np.ndarray:
    """Position of the first row of each series in ``wanted`` (``ids`` = series id per row;
    every wanted series has a row). Vectorised: a gather and a ``minimum.at`` over rows.

    >>> first_rows(np.array([2, 0, 2, 1, 0]), np.array([0, 2]))
    array([1, 0])
    """
    if len(wanted) == 0:
        return np.zeros(0, dtype=np.int64)
    n = max(int(ids.max(initial=-1)), int(wanted.max())) + 1
    selected = np.zeros(n, dtype=bool)
    selected[wanted] = True
    positions = np.flatnonzero(selected[ids])
    first = np.full(n, np.iinfo(np.int64).max, dtype=np.int64)
    np.minimum.at(first, ids[positions], positions)
    return first[wanted]


# --------------------------------------------------------------------------- dates as codes


def date_codes(values: Any, *, sort: bool = True) -> tuple[np.ndarray, pd.DatetimeIndex]:
    """Dense codes of dates: ``uniques[codes[i]] == values[i]``, ``-1`` for a missing date:
    ``pd.factorize(values, sort=sort)``, with a shortcut for a column of one date (the issue
    date of a cycle: two passes, no hashing). ``sort=False`` spares the pass that renumbers
    the rows in date order (``uniques`` then in order of appearance).

    >>> codes, uniques = date_codes(pd.to_datetime(["2026-03-09", None, "2026-03-02"]))
    >>> codes.tolist(), [str(d.date()) for d in uniques]
    ([1, -1, 0], ['2026-03-02', '2026-03-09'])
    """
    arr = np.asarray(values)
    if arr.dtype.kind == "M" and len(arr):
        ticks = arr.view(np.int64)
        low, high = ticks.min(), ticks.max()  # NaT is the lowest int64
        if low == high and not np.isnat(arr[0]):
            return np.zeros(len(arr), dtype=np.int64), pd.DatetimeIndex(arr[:1])
    codes, uniques = pd.factorize(pd.DatetimeIndex(values), sort=sort)
    return codes.astype(np.int64, copy=False), pd.DatetimeIndex(uniques)


# --------------------------------------------------------------------------- per segment


@dataclass(frozen=True)
class SegmentPart:
    """One reported segment of a coverage check: the series that count (``relevant``: forecast
    or active series) and those among them that offend, as masks over the series."""

    segment: str
    #: ``""`` for ``"*"``, else ``" in segment <name>"``: the words a message adds
    where: str
    relevant: np.ndarray
    offending: np.ndarray

    @cached_property
    def n(self) -> int:
        return int(np.count_nonzero(self.relevant))

    @cached_property
    def n_bad(self) -> int:
        return int(np.count_nonzero(self.offending))

    def subject(self, noun: str) -> str:
        """``"3 of 40 forecast series in segment tools"``, or ``"All 40 forecast series"``
        when none offends (``noun`` is plural)."""
        if self.n_bad:
            return f"{self.n_bad:,} of {plural(self.n, noun, noun)}{self.where}"
        return f"{all_of(self.n, noun)}{self.where}"

    def verb(self, one: str, many: str) -> str:
        """The verb form that agrees with :meth:`subject`."""
        return verb(self.n_bad or self.n, one, many)

    def shown(self, max_examples: int) -> np.ndarray:
        """The first ``max_examples`` offending series (ids, in id order)."""
        return np.flatnonzero(self.offending)[:max_examples]


def by_segment(segments: Segments, relevant: np.ndarray,
               offending: np.ndarray) -> Iterator[SegmentPart]:
    """The :class:`SegmentPart` of each reported segment, in the order of ``segments``."""
    for segment, mask in segments:
        yield SegmentPart(
            segment=segment,
            where="" if mask is None else f" in segment {segment}",
            relevant=relevant if mask is None else relevant & mask,
            offending=offending if mask is None else offending & mask,
        )


# --------------------------------------------------------------------------- results


def judged(book: Thresholds, *, check: str, measure: str, segment: str,
           value: float | None, unit: str, **fields: Any) -> CheckResult:
    """A coverage result whose ``value`` is judged against the levels of ``measure``."""
    judgement = book.judge(measure, segment, value)
    return CheckResult(check, judgement.status, segment=segment, measure=measure, value=value,
                       warn=judgement.warn, fail=judgement.fail, unit=unit, **fields)


def skipped(check: str, measure: str, segment: str, unit: str, message: str) -> CheckResult:
    """A coverage result that could not be judged: no series to judge (reason ``no_data``)."""
    return CheckResult(check, Status.SKIPPED, segment=segment, measure=measure, unit=unit,
                       reason=Reason.NO_DATA, message=message)
