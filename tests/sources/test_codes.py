"""Integer row codes (:mod:`accuracy_checks.sources.codes`), checked against pandas' own
``duplicated`` and ``drop_duplicates`` on random frames, categorical or not, with missing
values and code spaces large enough to need compressing."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from accuracy_checks.sources.codes import (
    combine_codes,
    combined_codes,
    duplicated_rows,
    n_distinct,
)


def random_frame(seed: int, n: int = 400, categorical: bool = True) -> pd.DataFrame:
    rng = np.random.default_rng(seed)
    frame = pd.DataFrame({
        "a": rng.choice(["x", "y", "z", None], n),
        "b": rng.integers(0, 5, n).astype(str),
        "c": rng.integers(0, 3, n),
    })
    return frame.astype({"a": "category", "b": "category"}) if categorical else frame


@pytest.mark.parametrize("categorical", [True, False])
@pytest.mark.parametrize("keep", ["first", "last", False])
def test_duplicated_rows_is_pandas_duplicated(categorical: bool, keep: str | bool) -> None:
    frame = random_frame(1, categorical=categorical)
    want = frame.duplicated(["a", "b", "c"], keep=keep).to_numpy()  # type: ignore[arg-type]
    np.testing.assert_array_equal(duplicated_rows(frame, ["a", "b", "c"], keep), want)


def test_equal_codes_are_equal_rows_and_missing_values_are_equal() -> None:
    frame = random_frame(2)
    codes = combined_codes(frame, ["a", "b"])
    assert pd.Series(codes).nunique() == len(frame[["a", "b"]].drop_duplicates())
    n_rows = len(frame)
    assert (combine_codes([frame["a"].array, frame["b"].array], n_rows) == codes).all()


def test_n_distinct_counts_series_of_the_rows_in_the_mask() -> None:
    frame = random_frame(3)
    mask = (frame["c"] == 1).to_numpy()
    assert n_distinct(frame, ["a", "b"]) == len(frame[["a", "b"]].drop_duplicates())
    assert n_distinct(frame, ["a", "b"], mask) == len(
        frame.loc[mask, ["a", "b"]].drop_duplicates())
    assert n_distinct(frame, ["a"], np.zeros(len(frame), dtype=bool)) == 0
    assert n_distinct(frame.iloc[:0], ["a"]) == 0


def test_a_large_code_space_is_compressed_not_overflowed() -> None:
    # 8 columns of about 300 distinct values each: 300**8 ≈ 2**66 combinations, beyond int64
    rng = np.random.default_rng(4)
    frame = pd.DataFrame({f"k{i}": rng.integers(0, 1 << 20, 300) for i in range(8)})
    frame = pd.concat([frame, frame.iloc[:50]], ignore_index=True)
    columns = list(frame.columns)
    np.testing.assert_array_equal(duplicated_rows(frame, columns),
                                  frame.duplicated(columns, keep=False).to_numpy())
