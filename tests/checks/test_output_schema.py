"""The output checks as declarations: each row mask on hand-made rows, and the pandera schema
whose checks carry the check ids.

Every expected mask below is read off the small frames built here (no outside source: these
checks are rules of this project, see docs/checks.md).
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pandera.pandas as pa
import pytest

from accuracy_checks.checks.output_schema import (
    NEGATIVE_VALUES,
    OUTPUT_CHECKS,
    crossing_mask,
    duplicate_mask,
    failed_masks,
    invalid_mask,
    negative_mask,
    output_schema,
    require_output_columns,
    stale_issue_mask,
)
from accuracy_checks.errors import InputError
from tests.support.output import KEYS, QCOLS, frame, negative_frame


def test_schema_is_a_pandera_schema_whose_checks_carry_the_check_ids() -> None:
    schema = output_schema(keys=KEYS, quantile_columns=QCOLS)
    schema.validate(frame(), lazy=True)
    with pytest.raises(pa.errors.SchemaErrors) as caught:
        schema.validate(negative_frame(), lazy=True)
    names = {e.check.name for e in caught.value.schema_errors}
    assert names == {NEGATIVE_VALUES}


def test_schema_leaves_out_quantile_order_with_fewer_than_two_quantiles() -> None:
    names = [c.name for c in output_schema(keys=KEYS, quantile_columns=["q0.5"]).checks]
    assert names == [c for c in OUTPUT_CHECKS if c != "output.quantile_order"]


def test_failed_masks_hold_the_offending_rows_of_failing_checks_only() -> None:
    schema = output_schema(keys=KEYS, quantile_columns=QCOLS)
    assert failed_masks(schema, frame()) == {}
    masks = failed_masks(schema, negative_frame())
    assert list(masks) == [NEGATIVE_VALUES]
    assert np.flatnonzero(masks[NEGATIVE_VALUES]).tolist() == [0, 3]


def test_duplicate_mask_marks_every_repeated_row() -> None:
    f = pd.DataFrame({"k": ["a", "a", "b", "a", None, None], "p": [1, 2, 1, 1, 3, 3]})
    assert duplicate_mask(f, ["k", "p"]).tolist() == [True, False, False, True, True, True]
    assert duplicate_mask(f.iloc[:1], ["k", "p"]).tolist() == [False]


def test_invalid_mask_marks_null_nan_and_infinity() -> None:
    f = pd.DataFrame({"forecast": [1.0, np.nan, np.inf, 2.0], "q": [0.0, 1.0, 1.0, -np.inf]})
    assert invalid_mask(f, ["forecast", "q"]).tolist() == [False, True, True, True]
    with pytest.raises(InputError, match="not numbers"):
        invalid_mask(pd.DataFrame({"forecast": ["x"]}), ["forecast"])


def test_negative_mask_respects_the_segments_that_allow_negatives() -> None:
    f = pd.DataFrame({"forecast": [-1.0, 0.0, -2.0], "segment": ["tools", "tools", "plants"]})
    assert negative_mask(f, ["forecast"]).tolist() == [True, False, True]
    assert negative_mask(f, ["forecast"], "tools").tolist() == [False, False, True]
    assert negative_mask(f, ["forecast"], True).tolist() == [False, False, False]


def test_crossing_mask_compares_with_the_running_maximum() -> None:
    # row 1: q0.9 below q0.1 across a missing q0.5
    f = pd.DataFrame({"q0.1": [1.0, 5.0, 1.0], "q0.5": [2.0, np.nan, 3.0],
                      "q0.9": [3.0, 4.0, 2.5]})
    assert crossing_mask(f, ["q0.1", "q0.5", "q0.9"]).tolist() == [False, True, True]
    assert crossing_mask(f, ["q0.1"]).tolist() == [False, False, False]


def test_stale_issue_mask_keeps_the_latest_issue_date() -> None:
    issued = pd.to_datetime(["2026-02-27", "2026-02-20", None, "2026-02-27"])
    assert stale_issue_mask(pd.DataFrame({"issued": issued})).tolist() == [
        False, True, True, False]
    undated = pd.DataFrame({"issued": pd.to_datetime([None, None])})
    assert stale_issue_mask(undated).tolist() == [True, True]


def test_required_columns_are_named() -> None:
    with pytest.raises(InputError, match=r"lacks the column\(s\) \['segment'\]"):
        require_output_columns(frame().drop(columns="segment"), KEYS, QCOLS, ["tools"])
    require_output_columns(frame().drop(columns="segment"), KEYS, QCOLS, True)
