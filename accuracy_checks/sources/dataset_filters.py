"""Filters of a dataset read (:mod:`accuracy_checks.sources.datasets`): which files a run opens
(from their partition values alone) and which rows it reads (a pyarrow expression pushed into
the scan: row groups skipped by their statistics, rows outside never materialised).

:class:`DateFilter`: one date column, a set of dates or a first date. :class:`PairFilter`: the
(issue date, period) pairs the evaluation uses (issue date → periods,
:func:`~accuracy_checks.evaluation.join.cycle_targets`), so the files of other cycles are
never opened and the rows of other periods never read. A missing date always passes, and so
does a partition value that is no date: the full checks name them. The callers cut the rows
again after conversion, so results never depend on the push-down.
"""

from __future__ import annotations

import operator
from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from functools import reduce
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd

from accuracy_checks.errors import InputError
from accuracy_checks.sources.columns import Column, convert

__all__ = ["DateFilter", "PairFilter", "choose", "row_expression"]

#: partition column → its value in each file (text)
Parts = Mapping[str, list[str]]


@dataclass(frozen=True)
class DateFilter:
    """Rows whose date column ``column`` is one of ``dates`` (``dates`` set) or on or after
    ``since`` (``since`` set): pushed into the read (see the module doc)."""

    column: str
    dates: tuple[pd.Timestamp, ...] | None = None
    since: pd.Timestamp | None = None
    fmt: str | None = None

    def keep(self, values: pd.Series) -> np.ndarray:
        """Which converted dates pass (missing dates pass: the full checks name them)."""
        ok = values.isna().to_numpy().copy()
        if self.dates is not None:
            ok |= values.isin(list(self.dates)).to_numpy()
            return ok if self.since is None else ok & (values.isna() | (values >= self.since)
                                                          ).to_numpy()
        if self.since is not None:
            ok |= (values >= self.since).to_numpy()
        return ok


@dataclass(frozen=True)
class PairFilter:
    """Rows whose (``issued``, ``period``) dates are one of ``pairs`` (issue date → periods):
    pushed into the read, a missing date passing (see :func:`_pair_expression`)."""

    issued: str
    period: str
    pairs: Mapping[pd.Timestamp, Sequence[pd.Timestamp]]
    issued_fmt: str | None = None
    period_fmt: str | None = None


def _partition_dates(partitions: Parts, shown: str, name: str, fmt: str | None,
                     role: str) -> tuple[np.ndarray, np.ndarray, pd.Series] | None:
    """``(values, codes, dates)``: the distinct values of partition column ``name``, each
    file's index into them and the values converted to dates; None when a value is no date
    (the full read names it)."""
    values = partitions[name]
    column = Column(name, "date", name, None, fmt)
    uniques, codes = np.unique(np.asarray(values, dtype=object), return_inverse=True)
    try:
        return uniques, codes, convert(pd.Series(uniques), Path(shown), column, role, 1)
    except InputError:
        return None


def choose(files: list[str], partitions: Parts, shown: str,
           filters: Sequence[DateFilter], role: str,
           pairs: PairFilter | None = None) -> list[str]:
    """The files whose partition values pass ``filters`` (filters on data columns pass all)
    and, with ``pairs`` on a partitioned issue date, whose issue date is one of its cycles
    (or missing)."""
    keep = np.ones(len(files), dtype=bool)
    if pairs is not None and pairs.issued in partitions:
        found = _partition_dates(partitions, shown, pairs.issued, pairs.issued_fmt, role)
        if found is not None:
            _, codes, dates = found
            keep &= (dates.isna() | dates.isin(list(pairs.pairs))).to_numpy()[codes]
    for flt in filters:
        if flt.column not in partitions:
            continue
        found = _partition_dates(partitions, shown, flt.column, flt.fmt, role)
        if found is None:
            continue  # a partition value that is no date: read all, the full read names it
        _, codes, dates = found
        keep &= flt.keep(dates)[codes]
    return [f for f, k in zip(files, keep, strict=True) if k]


def _date_terms(partitions: Parts, shown: str, dataset: Any, name: str, fmt: str | None,
                role: str, wanted: Sequence[pd.Timestamp]) -> tuple[Any, Any] | None:
    """``(term, passing)`` for one date column of a pair filter: ``term`` selects rows whose
    date is one of ``wanted``, ``passing`` those whose date is missing (or, in a partition
    value, no date: the full read names it). None when the column's type cannot be filtered
    natively (text dates in a file: the callers cut the rows)."""
    import pyarrow as pa
    import pyarrow.compute as pc

    field = pc.field(name)
    if name in partitions:
        found = _partition_dates(partitions, shown, name, fmt, role)
        if found is None:
            return None
        texts, _, dates = found
        hit = dates.isin(list(wanted)).to_numpy()
        bad = dates.isna().to_numpy()
        return (field.isin(pa.array(texts[hit].tolist(), pa.string())),
                field.isin(pa.array(texts[bad].tolist(), pa.string())) | field.is_null())
    if name not in dataset.schema.names:
        return None
    kind = dataset.schema.field(name).type
    if not (pa.types.is_date(kind) or (pa.types.is_timestamp(kind) and kind.tz is None)):
        return None  # (a zoned timestamp's date is the converters' to tell)
    values = pa.array([pd.Timestamp(d).to_datetime64() for d in wanted]).cast(kind)
    return field.isin(values), field.is_null()


def _pair_expression(partitions: Parts, shown: str, dataset: Any, pairs: PairFilter,
                     role: str) -> Any:
    """The rows of the (issue date, period) ``pairs``, as one filter expression:
    ``OR over cycles c of (issued ∈ c or missing) AND (period ∈ periods(c) or missing)``;
    None when either column cannot be filtered natively."""

    def terms_of(name: str, fmt: str | None, wanted: Sequence[pd.Timestamp]
                 ) -> tuple[Any, Any] | None:
        return _date_terms(partitions, shown, dataset, name, fmt, role, wanted)

    terms = []
    for cycle, periods in pairs.pairs.items():
        issued = terms_of(pairs.issued, pairs.issued_fmt, [cycle])
        period = terms_of(pairs.period, pairs.period_fmt, periods)
        if issued is None or period is None:
            return None
        terms.append((issued[0] | issued[1]) & (period[0] | period[1]))
    if not terms:
        issued = terms_of(pairs.issued, pairs.issued_fmt, [])
        if issued is None:
            return None
        return issued[1]  # no cycle is used: only rows whose issue date is missing
    return reduce(operator.or_, terms)


def row_expression(partitions: Parts, shown: str, dataset: Any,
                   filters: Sequence[DateFilter], pairs: PairFilter | None, role: str) -> Any:
    """The filter expression of a scan of ``dataset`` (None: every row): ``filters`` on its
    date and timestamp data columns (partition columns are cut by :func:`choose`), and the
    ``pairs``."""
    import pyarrow as pa
    import pyarrow.compute as pc

    expression = None
    for flt in filters:
        if flt.column in partitions or flt.column not in dataset.schema.names:
            continue
        kind = dataset.schema.field(flt.column).type
        if not (pa.types.is_timestamp(kind) or pa.types.is_date(kind)):
            continue
        if flt.dates is not None:
            values = pa.array([d.to_datetime64() for d in flt.dates]).cast(kind)
            cond = pc.field(flt.column).isin(values)
        else:
            since = pa.scalar(pd.Timestamp(flt.since).to_datetime64()).cast(kind)
            cond = pc.field(flt.column) >= since
        cond = cond | pc.field(flt.column).is_null()
        expression = cond if expression is None else expression & cond
    cut = _pair_expression(partitions, shown, dataset, pairs, role) if pairs is not None else None
    if cut is not None:
        expression = cut if expression is None else expression & cut
    return expression
