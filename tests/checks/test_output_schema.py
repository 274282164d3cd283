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
    output_masks,
    output_schema,
    require_output_columns,
    row_codes,
    stale_issue_mask,
)
from accuracy_checks.checks.series_index import date_codes
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


def messy_frame(n_series: int = 300, seed: int = 3) -> pd.DataFrame:
    """:func:`frame`'s columns over many series with every kind of offending row: repeated
    rows (one with a missing key, one with a missing period), NaN and infinite values,
    negatives, crossed quantiles, an older and a missing issue date, categorical keys."""
    rng = np.random.default_rng(seed)
    dates = pd.date_range("2026-03-02", periods=4, freq="W-MON")
    ids = np.repeat(np.arange(n_series), len(dates))
    f = pd.DataFrame({
        "store": pd.Categorical([f"S{i % 7}" for i in ids]),
        "product": pd.Categorical([f"P{i // 7}" for i in ids]),
        "period": np.tile(dates.values, n_series),
        "issued": pd.Timestamp("2026-02-27"),
        "forecast": rng.gamma(2.0, 10.0, len(ids)),
        "segment": rng.choice(["tools", "plants"], len(ids)),
    })
    f["q0.1"] = f["forecast"] * 0.8
    f["q0.9"] = f["forecast"] * 1.2
    f.loc[[3, 50], "forecast"] = [np.nan, np.inf]
    f.loc[[7, 8, 90], "q0.1"] = [-1.0, -2.0, 1e9]
    f.loc[[7, 8], "segment"] = ["plants", "tools"]
    f.loc[11, "issued"] = pd.Timestamp("2026-02-20")
    f.loc[12, "issued"] = pd.NaT
    f.loc[[20, 21], "period"] = pd.NaT
    f.loc[30, "store"] = np.nan
    extra = f.iloc[[5, 5, 30, 20]]
    return pd.concat([f, extra], ignore_index=True)


@pytest.mark.parametrize("allow", [False, True, ["tools"]])
@pytest.mark.parametrize("categorical", [True, False])
def test_output_masks_are_the_masks_the_schema_finds(allow: object, categorical: bool) -> None:
    # the run's direct masks (no pandera pass) must be exactly what validating the schema finds
    f = messy_frame()
    if not categorical:
        f = f.astype({"store": "str", "product": "str"})
    qcols = ["q0.1", "q0.9"]
    schema = output_schema(keys=KEYS, quantile_columns=qcols, allow_negative=allow)  # type: ignore[arg-type]
    found = failed_masks(schema, f)
    direct = output_masks(f, keys=KEYS, quantile_columns=qcols, allow_negative=allow)  # type: ignore[arg-type]
    assert sorted(direct) == sorted(found)
    assert len(direct) == (4 if allow is True else 5)
    for name, mask in found.items():
        assert direct[name].tolist() == mask.tolist(), name
    for clean in (frame(), f.iloc[:0]):
        assert output_masks(clean, keys=KEYS, quantile_columns=qcols) == {}


def test_duplicate_mask_matches_pandas_on_counted_and_sorted_code_spaces() -> None:
    f = messy_frame(n_series=2000)
    columns = [*KEYS, "period", "issued"]
    dated = f.dropna(subset=["period", "issued"]).reset_index(drop=True)
    assert row_codes(dated, columns)[1] <= 4 * len(dated)  # the counted path
    for frame_ in (f, dated):
        expected = frame_[columns].duplicated(keep=False).tolist()
        assert duplicate_mask(frame_, columns).tolist() == expected
    # every key a text of its own: a code space far beyond the rows, so the sorted path
    wide = f.assign(store=f["store"].astype("str") + "-" + f.index.astype("str"))
    wide.loc[len(f) - 4 :, "store"] = wide["store"].iloc[[5, 5, 30, 20]].to_numpy()
    assert row_codes(wide, columns)[1] > 4 * len(wide)
    assert duplicate_mask(wide, columns).tolist() == wide[columns].duplicated(keep=False).tolist()


@pytest.mark.parametrize("dates", [
    ["2026-03-09", None, "2026-03-02", "2026-03-09"],
    ["2026-03-02 06:00", "2026-03-02 00:00", None, "2026-03-02 06:00"],
    ["2026-03-02", "1700-01-01", "2250-06-30", "2026-03-02"],  # centuries apart
    [None, None],
    ["2026-03-02", "2026-03-02"],  # one date: no hashing
])
@pytest.mark.parametrize("unit", ["s", "us", "ns"])
def test_date_codes_number_dates_as_factorize_does(dates: list[str | None],
                                                          unit: str) -> None:
    values = pd.Series(pd.to_datetime(dates)).astype(f"datetime64[{unit}]")
    for sort in (True, False):
        codes, uniques = date_codes(values, sort=sort)
        want_codes, want_uniques = pd.factorize(values, sort=sort)
        assert codes.tolist() == want_codes.tolist()
        assert list(uniques) == list(want_uniques)


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
