"""Integer row codes: one int64 per row such that equal codes ⇔ equal values in the columns.

Categorical columns contribute their codes directly, so on the canonical frames (categorical
keys) this costs a few integer operations per row; duplicate detection and joins build on it.
"""

from __future__ import annotations

from collections.abc import Sequence
from typing import Any

import numpy as np
import pandas as pd

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
    arrays = [frame[c].array if mask is None else frame[c].array[mask] for c in columns]
    return combine_codes(arrays, len(frame) if mask is None else int(np.count_nonzero(mask)))


def combine_codes(arrays: Sequence[Any], n_rows: int) -> np.ndarray:
    """Combine per-column arrays (same length ``n_rows``) into one int64 code per row."""
    comb = np.zeros(n_rows, dtype=np.int64)
    space = 1
    for values in arrays:
        codes, uniques = pd.factorize(values, use_na_sentinel=False)
        size = max(len(uniques), 1)
        if space * size >= _CODE_SPACE_LIMIT:
            comb, seen = pd.factorize(comb)
            comb = comb.astype(np.int64, copy=False)
            space = max(len(seen), 1)
        comb = comb * size + codes
        space *= size
    return comb
