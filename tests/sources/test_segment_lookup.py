"""The segment lookup on integer key codes (:mod:`accuracy_checks.sources.segments`) gives
exactly what a join of the key values gives: the same labels, the same categories in the same
order, ``unassigned`` where a series is unmapped; for a small and a large code space."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from accuracy_checks.sources.segments import (
    assign_segments,
    attach_segments,
    segment_labels,
    unify_categories,
)
from tests.support.sources import config


def _frames(n_stores: int, n_products: int, rows: int, seed: int
            ) -> tuple[pd.DataFrame, pd.DataFrame]:
    rng = np.random.default_rng(seed)
    store = rng.integers(0, n_stores, rows)
    product = rng.integers(0, n_products, rows)
    frame = pd.DataFrame({"store": [f"S{s}" for s in store],
                          "product": [f"P{p}" for p in product]})
    series = frame.drop_duplicates().reset_index(drop=True)
    mapped = series.loc[rng.random(len(series)) < 0.8]  # a fifth of the series unmapped
    mapping = mapped.assign(category=[f"c{v}" for v in rng.integers(0, 7, len(mapped))])
    mapping = mapping.sample(frac=1.0, random_state=seed).reset_index(drop=True)
    return frame, mapping


def _as_categories(frame: pd.DataFrame) -> pd.DataFrame:
    return frame.astype("category")


@pytest.mark.parametrize(("n_stores", "n_products"), [(5, 40), (3000, 3000)])
def test_codes_lookup_equals_the_join(tmp_path: Path, n_stores: int, n_products: int) -> None:
    cfg = config(tmp_path)
    frame, mapping = _frames(n_stores, n_products, 2000, seed=n_stores)
    joined = assign_segments(frame, cfg, mapping, role="forecast")  # plain text: a join
    f, m = unify_categories([_as_categories(frame), _as_categories(mapping)],
                            ["store", "product", "category"])
    coded = assign_segments(f, cfg, m, role="forecast")
    assert coded["segment"].tolist() == joined["segment"].tolist()
    assert list(coded["segment"].cat.categories) == list(joined["segment"].cat.categories)
    assert "unassigned" in coded["segment"].tolist()


def test_actuals_lookup_on_codes_equals_the_join(tmp_path: Path) -> None:
    cfg = config(tmp_path, mapping=None)
    frame, mapping = _frames(20, 50, 500, seed=3)
    known = mapping.rename(columns={"category": "segment"})
    joined = attach_segments(frame, cfg, None, lambda: known)
    f, k = unify_categories([_as_categories(frame), _as_categories(known)],
                            ["store", "product", "segment"])
    unused = k["segment"].cat.add_categories(["never-used"])  # a category no row takes
    coded = attach_segments(f, cfg, None, lambda: k.assign(segment=unused))
    assert coded["segment"].tolist() == joined["segment"].tolist()
    assert list(coded["segment"].cat.categories) == list(joined["segment"].cat.categories)


def test_segment_labels_count_or_hash_the_combinations_alike() -> None:
    rng = np.random.default_rng(7)
    n = 3000
    family = pd.Series([f"f{v:03d}" for v in rng.integers(0, 300, n)], dtype="category")
    kind = pd.Series([None if v == 0 else f"k{v:03d}" for v in rng.integers(0, 300, n)],
                     dtype="category")
    few = segment_labels([family, kind])  # 301 × 301 combinations ≫ rows: hashed
    repeated = [pd.concat([c] * 250, ignore_index=True) for c in (family, kind)]
    many = segment_labels(repeated)  # rows ≫ combinations: counted
    assert list(many.categories) == list(few.categories)
    assert many[:n].tolist() == few.tolist()
    assert "unassigned" in " ".join(few.categories)
