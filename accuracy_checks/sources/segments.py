"""Segments: the mapping table, segment labels, and the ``segment`` column of every frame.

A series' segment is its segment columns' values joined by ``/`` (``tools/outdoor``), taken
from the frame itself or looked up in the mapping table (:func:`read_mapping`); without
segment columns every row is in ``*`` (all series). Actuals whose segment is unknown are in
``unassigned``. Frames that are joined share categories first (:func:`unify_categories`), so
lookups and joins run on integer codes.
"""

from __future__ import annotations

from collections.abc import Callable, Sequence

import numpy as np
import pandas as pd

from accuracy_checks.config import Config, Place
from accuracy_checks.errors import InputError
from accuracy_checks.results import ALL_SERIES
from accuracy_checks.sources import frames as F
from accuracy_checks.sources.codes import combined_codes_and_space
from accuracy_checks.sources.columns import SHOWN, Column
from accuracy_checks.sources.files import columns_of, read_columns

__all__ = ["assign_segments", "attach_segments", "read_mapping", "segment_labels",
           "segments_of_series", "unify_categories"]


def mapping_columns(config: Config, present: Sequence[str], label: str
                    ) -> tuple[list[str], list[str], list[Column]]:
    """The key columns a mapping shares with the forecast, its segment columns, and both as
    columns to read; refuses a mapping that shares no key column (``label`` names it)."""
    keys = [k for k in config.forecast.keys if k in present]
    if not keys:
        raise InputError(
            f"The {label} shares no key column with the forecast (keys "
            f"{config.forecast.keys}); its columns are {', '.join(map(str, present))}."
        )
    seg = [s for s in config.segments.columns if s in present]
    cols = [Column(k, "key", "forecast.keys") for k in keys]
    cols += [Column(s, "text", "segments.columns") for s in seg]
    return keys, seg, cols


def read_mapping(config: Config) -> pd.DataFrame | None:
    """The segment mapping table (key columns it shares with the forecast + segment columns),
    read from its file or its table (``segments.mapping: {sql: …}``), ``None`` when none is
    configured. Refuses a series mapped to two segments."""
    path = config.segments.mapping_place
    if path is None:
        return None
    present = columns_of(path, "mapping", "segments.mapping")
    keys, seg, cols = mapping_columns(
        config, present, f"mapping {path} (config key `segments.mapping`)")
    table = read_columns(path, cols, role="mapping", key="segments.mapping").drop_duplicates()
    if seg:
        refuse_two_segments(table, keys, seg, path)
    return table


def refuse_two_segments(table: pd.DataFrame, keys: list[str], seg: list[str],
                         path: Place) -> None:
    """Raise when the mapping puts a series in more than one segment, naming the first."""
    twice = table.duplicated(keys, keep=False).to_numpy()
    if not twice.any():
        return
    rows = table.loc[twice].sort_values(keys).head(2 * SHOWN)
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


def segment_labels(columns: Sequence[pd.Series]) -> pd.Categorical:
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
    space = int(np.prod(np.array([len(n) for n in names_list], dtype=object)))
    if space <= max(len(combo) // 8, 1 << 16):
        # few combinations: number the present ones in sorted order by marking, no hashing
        present = np.zeros(space, dtype=bool)
        present[combo] = True
        uniques = np.flatnonzero(present)
        dense = np.cumsum(present) - 1
        ids = dense[combo]
    else:
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
        _refuse_twins(cats, parts, columns)
    return pd.Categorical.from_codes(ids.astype(np.int32), categories=cats)


def _refuse_twins(cats: pd.Index, parts: list[np.ndarray], columns: Sequence[pd.Series]) -> None:
    """Raise for the first label that two distinct combinations of values share."""
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


def assign_segments(frame: pd.DataFrame, config: Config, mapping: pd.DataFrame | None,
                    *, role: str) -> pd.DataFrame:
    """Add the ``segment`` column: segment columns joined by "/" (from the frame or mapping).

    Key columns of ``frame`` and ``mapping`` must share categories (:func:`unify_categories`).
    """
    seg_cols = list(config.segments.columns)
    if not seg_cols:
        return frame.assign(**{F.SEGMENT: _constant(ALL_SERIES, len(frame), frame.index)})
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
    seg = segment_labels([frame[s] for s in seg_cols])
    return frame.drop(columns=[s for s in seg_cols if s in frame.columns]).assign(
        **{F.SEGMENT: pd.Series(seg, index=frame.index)}
    )


def _constant(value: str, n: int, index: pd.Index) -> pd.Series:
    """``value`` on every row, as a one-category categorical."""
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
    if all(_shared_categories(frame[k], mapping[k]) for k in keys):
        rows = _rows_by_codes(frame, mapping, keys)
        return {c: pd.Series(_taken(mapping[c], rows), index=frame.index) for c in columns}
    joined = frame[keys].merge(mapping[keys + columns], on=keys, how="left", validate="m:1")
    return {c: pd.Series(joined[c].to_numpy(), index=frame.index) for c in columns}


def _shared_categories(a: pd.Series, b: pd.Series) -> bool:
    """Whether both columns are categoricals with the same categories (codes compare)."""
    return (isinstance(a.dtype, pd.CategoricalDtype) and isinstance(b.dtype, pd.CategoricalDtype)
            and a.cat.categories.equals(b.cat.categories))


def _rows_by_codes(frame: pd.DataFrame, table: pd.DataFrame, keys: list[str]) -> np.ndarray:
    """The row of ``table`` holding each row's keys (−1: none), on the keys' integer codes.

    The keys of ``table`` must be unique (the mapping's are; a repeated one would be refused
    by a join as well) and share categories with ``frame``'s. A missing key matches a missing
    key, as in a join. The combined codes index a dense array when their space is small,
    else a sorted search."""
    n, m = len(frame), len(table)
    if m == 0:
        return np.full(n, -1, dtype=np.int64)
    sizes = [len(frame[k].cat.categories) + 1 for k in keys]  # code −1 (missing) → 0
    space = int(np.prod(np.array(sizes, dtype=object)))
    if space >= 1 << 62:  # too many combinations for one int64: number them jointly
        both = pd.concat([frame[keys], table[keys]], ignore_index=True)
        codes = combined_codes_and_space(both, keys)[0]
        wanted, have = codes[:n], codes[n:]
    else:
        wanted, have = _key_codes(frame, keys, sizes), _key_codes(table, keys, sizes)
    if space <= max(n + m, 1 << 22) and m < 1 << 31:  # a dense table of ≤ 4 bytes a row
        row_of = np.full(space, -1, dtype=np.int32)
        row_of[have] = np.arange(m, dtype=np.int32)
        return row_of[wanted].astype(np.int64)
    order = np.argsort(have, kind="stable")
    sorted_have = have[order]
    pos = np.minimum(np.searchsorted(sorted_have, wanted), m - 1)
    return np.where(sorted_have[pos] == wanted, order[pos], -1)


def _key_codes(frame: pd.DataFrame, keys: list[str], sizes: list[int]) -> np.ndarray:
    """One int64 per row from the keys' category codes (+1, so missing is 0), mixed radix
    ``sizes`` (their product below 2**62), computed in place."""
    out = np.zeros(len(frame), dtype=np.int64)
    for k, size in zip(keys, sizes, strict=True):
        out *= size
        out += frame[k].cat.codes.to_numpy()
        out += 1
    return out


def _taken(column: pd.Series, rows: np.ndarray) -> pd.Categorical:
    """``column``'s value at each of ``rows`` (missing where −1), as a categorical whose
    categories are the values taken, sorted (what a join's values cast to a category give)."""
    col = column if isinstance(column.dtype, pd.CategoricalDtype) else column.astype("category")
    cats = col.cat.categories
    codes = col.cat.codes.to_numpy().astype(np.int64)
    taken = np.where(rows >= 0, codes[np.maximum(rows, 0)], -1)
    used = np.bincount(taken[taken >= 0], minlength=len(cats)) > 0
    kept = cats[used]
    order = None if kept.is_monotonic_increasing else kept.argsort()
    new_code = np.full(len(cats) + 1, -1, dtype=np.int64)  # last slot: −1 stays −1
    if order is None:
        new_code[np.flatnonzero(used)] = np.arange(int(used.sum()))
    else:
        new_code[np.flatnonzero(used)[order]] = np.arange(int(used.sum()))
        kept = kept[order]
    return pd.Categorical.from_codes(new_code[taken].astype(np.int32), categories=kept)


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
        return actuals.assign(**{F.SEGMENT: _constant(ALL_SERIES, len(actuals), actuals.index)})
    if mapping is not None and all(s in mapping.columns for s in seg_cols):
        return assign_segments(actuals, config, mapping, role="actuals")
    keys = list(config.forecast.keys)
    table = known()
    seg = _lookup(actuals, table, keys, [F.SEGMENT])[F.SEGMENT]
    seg = seg.astype("category")
    if F.UNASSIGNED not in seg.cat.categories:
        seg = seg.cat.add_categories([F.UNASSIGNED])
    return actuals.assign(**{F.SEGMENT: seg.fillna(F.UNASSIGNED)})
