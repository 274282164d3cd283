"""EvaluationGroups: the evaluation rows grouped once for every measure."""

from __future__ import annotations

import numpy as np
import pandas as pd

from accuracy_checks.checks.accuracy_groups import EvaluationGroups
from accuracy_checks.evaluation.join import IN_TRACKING, IN_WINDOW
from accuracy_checks.measures.data import MeasureSettings


def frame() -> pd.DataFrame:
    return pd.DataFrame({
        "store": ["a", "a", "b", "b", "c", "c"],
        "lag": [1, 2, 1, 2, 1, 1],
        "segment": ["x", "x", "x", "x", "y", "y"],
        "actual": [10.0, 12.0, 8.0, np.nan, 5.0, 6.0],
        "forecast": [9.0, 12.0, 9.0, 7.0, 5.0, 4.0],
        IN_WINDOW: [True, True, True, True, False, True],
        IN_TRACKING: [True, True, True, True, True, True],
    })


def test_groups_per_lag_and_segment_and_for_all_series() -> None:
    groups = EvaluationGroups(frame(), ["store"], MeasureSettings(), None, None)
    assert groups.groupings == ["segment", "all"]
    assert groups.segment_names == ["x", "y"]
    by_segment = groups.groups_of("segment")
    assert list(zip(by_segment["lag"], by_segment["segment"], strict=True)) == [
        (1, "x"), (1, "y"), (2, "x")]
    assert list(groups.groups_of("all")["segment"]) == ["*", "*"]
    # a series code per row, from the key columns when there is no actuals index
    assert groups.n_series == 3 and list(groups.series) == [0, 0, 1, 1, 2, 2]


def test_windows_keep_their_rows_and_data_is_built_once() -> None:
    groups = EvaluationGroups(frame(), ["store"], MeasureSettings(), None, None)
    assert len(groups.rows("evaluation")) == 5 and len(groups.rows("tracking")) == 6
    data = groups.data("evaluation", "segment")
    assert data is groups.data("evaluation", "segment")
    assert data.n_groups == 3
    n, dropped = groups.facts(data)[:2]
    assert list(n) == [2, 1, 1] and list(dropped) == [0, 0, 1]


def test_a_single_star_segment_is_not_grouped_twice() -> None:
    rows = frame().assign(segment="*")
    groups = EvaluationGroups(rows, ["store"], MeasureSettings(), None, None)
    assert groups.groupings == ["segment"]
