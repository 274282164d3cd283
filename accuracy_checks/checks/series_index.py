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
    "first_rows",
    "identify_series",
    "judged",
    "skipped",
]

#: (segment name, series mask; ``None`` for ``"*"``), as :meth:`SeriesIndex.segments_to_report`
Segments = list[tuple[str, np.ndarray | None]]


@dataclass(frozen=True)
class SeriesIndex:
    """Series of forecast ∪ actuals: one dense id per row of each frame."""

    n: int
    f_ids: np.ndarray
    a_ids: np.ndarray
    in_forecast: np.ndarray
    in_actuals: np.ndarray
    #: segment code of each series, into ``segment_names``
    segment: np.ndarray
    segment_names: list[str]

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

    def examples(self, frame: pd.DataFrame, row_ids: np.ndarray, wanted: np.ndarray,
                 keys: list[str]) -> list[dict[str, Any]]:
        """Key values of the series ``wanted`` (one dict each, read from their first row of
        ``frame``, whose series ids are ``row_ids``), with their segment."""
        examples = row_examples(frame, first_rows(row_ids, wanted), keys)
        names = np.asarray(self.segment_names, dtype=object)[self.segment[wanted]]
        for example, seg in zip(examples, names, strict=True):
            example[SEGMENT] = str(seg)
        return examples


def identify_series(forecast: pd.DataFrame, actuals: pd.DataFrame,
                    keys: list[str]) -> SeriesIndex:
    """One dense series id per row of ``forecast`` and ``actuals`` (their ``keys`` jointly)."""
    n_f, n_a = len(forecast), len(actuals)
    arrays = [pd.concat([forecast[k], actuals[k]], ignore_index=True).array for k in keys]
    ids, uniques = pd.factorize(combine_codes(arrays, n_f + n_a))
    n = len(uniques)
    f_ids, a_ids = ids[:n_f], ids[n_f:]
    f_seg, f_names = _segment_codes(forecast)
    a_seg, a_names = _segment_codes(actuals)
    names = list(dict.fromkeys([*f_names, *a_names]))
    position = {name: i for i, name in enumerate(names)}
    segment = np.zeros(n, dtype=np.int64)
    segment[a_ids] = np.array([position[x] for x in a_names], dtype=np.int64)[a_seg]
    # the forecast's segment wins
    segment[f_ids] = np.array([position[x] for x in f_names], dtype=np.int64)[f_seg]
    return SeriesIndex(
        n=n,
        f_ids=f_ids,
        a_ids=a_ids,
        in_forecast=np.bincount(f_ids, minlength=n) > 0,
        in_actuals=np.bincount(a_ids, minlength=n) > 0,
        segment=segment,
        segment_names=names,
    )


def _segment_codes(frame: pd.DataFrame) -> tuple[np.ndarray, list[str]]:
    """Segment code per row and the segment names (missing → ``"unassigned"``)."""
    if SEGMENT not in frame.columns:
        return np.zeros(len(frame), dtype=np.int64), [ALL_SERIES]
    codes, uniques = pd.factorize(frame[SEGMENT].array)  # missing → -1
    names = [str(u) for u in uniques]
    if (codes < 0).any():
        codes = np.where(codes < 0, len(names), codes)
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

    @property
    def n(self) -> int:
        return int(self.relevant.sum())

    @property
    def n_bad(self) -> int:
        return int(self.offending.sum())

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
