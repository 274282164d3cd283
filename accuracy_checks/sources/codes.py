"""Integer row codes: one int64 per row such that equal codes ⇔ equal values in the columns.

Categorical columns contribute their codes directly, so on the canonical frames (categorical
keys) this costs a few integer operations per row; duplicate detection (:func:`duplicated_rows`),
series counts (:func:`n_distinct`) and joins build on it. This module is the one place that
turns key columns into codes: checks and measures call it rather than factorizing keys
themselves.
"""

from __future__ import annotations

from collections.abc import Sequence
from typing import Any

import numpy as np
import pandas as pd

__all__ = ["combine_codes", "combined_codes", "combined_codes_and_space", "duplicated_codes",
           "duplicated_rows", "n_distinct"]

_CODE_SPACE_LIMIT = 1 << 62


def combined_codes(
    frame: pd.DataFrame, columns: Sequence[str], mask: np.ndarray | None = None
) -> np.ndarray:
    """One int64 code per row (of ``frame[mask]``): equal codes ⇔ equal values in ``columns``.

    Missing values compare equal to each other. Codes are not dense; compress them with
    ``pd.factorize`` when a dense id is needed.

    >>> f = pd.DataFrame({"a": ["x", "y", "x"], "b": [1, 1, 1]})
    >>> c = combined_codes(f, ["a", "b"])
    >>> bool(c[0] == c[2]), bool(c[0] == c[1])
    (True, False)
    """
    return combined_codes_and_space(frame, columns, mask)[0]


def combined_codes_and_space(frame: pd.DataFrame, columns: Sequence[str],
                             mask: np.ndarray | None = None) -> tuple[np.ndarray, int]:
    """:func:`combined_codes` and the size of the code space (codes lie in ``[0, space)``)."""
    arrays = [frame[c].array if mask is None else frame[c].array[mask] for c in columns]
    return _combine(arrays, len(frame) if mask is None else int(np.count_nonzero(mask)))


def combine_codes(arrays: Sequence[Any], n_rows: int) -> np.ndarray:
    """Combine per-column arrays (same length ``n_rows``) into one int64 code per row."""
    return _combine(arrays, n_rows)[0]


def _column_codes(values: Any) -> tuple[np.ndarray, int]:
    if isinstance(values, pd.Categorical):
        # the categories are the codes already: no hashing (−1, missing, becomes its own code)
        return values.codes.astype(np.int64) + 1, len(values.categories) + 1
    codes, uniques = pd.factorize(values, use_na_sentinel=False)
    return codes, max(len(uniques), 1)


def duplicated_codes(codes: np.ndarray, space: int, keep: str | bool = False) -> np.ndarray:
    """Which codes repeat (``keep`` as in ``pandas.Series.duplicated``); a counting pass when
    the code space is small, a hash pass otherwise."""
    if codes.size and space <= max(8 * codes.size, 1 << 20):
        repeats = np.bincount(codes, minlength=space) > 1
        if keep is False or not repeats.any():
            return repeats[codes]
    return pd.Series(codes).duplicated(keep=keep).to_numpy()  # type: ignore[arg-type]


def duplicated_rows(frame: pd.DataFrame, columns: Sequence[str], keep: str | bool = False
                    ) -> np.ndarray:
    """``DataFrame.duplicated`` on integer row codes (fast on categorical keys).

    >>> f = pd.DataFrame({"k": ["a", "b", "a"], "p": [1, 1, 1]})
    >>> duplicated_rows(f, ["k", "p"]).tolist(), duplicated_rows(f, ["k", "p"], "last").tolist()
    ([True, False, True], [True, False, False])
    """
    if len(frame) == 0:
        return np.zeros(0, dtype=bool)
    *first, last = list(columns)
    codes, space = combined_codes_and_space(frame, first)
    if space > 8 * len(frame):  # sparse key combinations: number the series densely first
        codes, uniques = pd.factorize(codes)
        space = max(len(uniques), 1)
    tail, size = combined_codes_and_space(frame, [last])
    return duplicated_codes(codes.astype(np.int64) * size + tail, space * size, keep)


def n_distinct(frame: pd.DataFrame, columns: Sequence[str],
               mask: np.ndarray | None = None) -> int:
    """How many distinct value combinations of ``columns`` the rows (of ``frame[mask]``) hold:
    the number of series when ``columns`` are the keys.

    >>> f = pd.DataFrame({"k": ["a", "b", "a"], "p": [1, 1, 2]})
    >>> first = (f["p"] == 1).to_numpy()
    >>> n_distinct(f, ["k"]), n_distinct(f, ["k", "p"]), n_distinct(f, ["k"], first)
    (2, 3, 2)
    """
    if len(frame) == 0 or (mask is not None and not np.any(mask)):
        return 0
    codes, space = combined_codes_and_space(frame, columns, mask)
    if space <= max(8 * codes.size, 1 << 20):  # a marking pass (≤ 8 bytes a row), no sort
        seen = np.zeros(space, dtype=bool)
        seen[codes] = True
        return int(np.count_nonzero(seen))
    return int(pd.unique(codes).size)


def _combine(arrays: Sequence[Any], n_rows: int) -> tuple[np.ndarray, int]:
    comb = np.zeros(n_rows, dtype=np.int64)
    space = 1
    for values in arrays:
        codes, size = _column_codes(values)
        if space * size >= _CODE_SPACE_LIMIT:
            comb, seen = pd.factorize(comb)
            comb = comb.astype(np.int64, copy=False)
            space = max(len(seen), 1)
        comb = comb * size + codes
        space *= size
    return comb, space
