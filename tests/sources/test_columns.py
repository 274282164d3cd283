"""The column rules of :mod:`accuracy_checks.sources.columns` (issue 10): identifiers are text,
one date format per column, plain values in messages, the calendar's bounds.

Most tests read small files written here through the readers and check the frame they return or
the one-paragraph :class:`InputError` they raise; the converters are also called directly.
"""

from __future__ import annotations

from datetime import date
from pathlib import Path

import numpy as np
import pandas as pd
import pyarrow as pa
import pyarrow.parquet as pq
import pytest

from accuracy_checks import sources
from accuracy_checks.sources.columns import (
    RESERVED_SEGMENTS,
    Column,
    convert,
    listed_rows,
    plain,
    to_date,
    to_key,
    to_number,
)
from tests.support.sources import config, forecast_text, read_error, week_format

# ----------------------------------------------------------------------- keys are text


def test_csv_keys_that_look_like_numbers_stay_the_text_written(tmp_path: Path) -> None:
    # 007, 7 and 07 are three products; "NA" and "TRUE" are names like any other
    (tmp_path / "f.csv").write_text(forecast_text(["007", "7", "07", "NA", "TRUE"]))
    frame = sources.read_forecast(config(tmp_path))
    assert frame["product"].tolist() == ["007", "7", "07", "NA", "TRUE"]
    assert frame["product"].cat.categories.dtype == object or str(
        frame["product"].cat.categories.dtype) == "str"
    assert frame["store"].tolist() == ["S1"] * 5


def test_csv_key_columns_of_digits_only_keep_leading_zeros(tmp_path: Path) -> None:
    # every value numeric-looking (a reader would infer integers): still text
    text = "store,product,week,units,issued_on\n01,007,2026-03-02,1,2026-03-02\n" \
           "1,7,2026-03-02,2,2026-03-02\n"
    (tmp_path / "f.csv").write_text(text)
    frame = sources.read_forecast(config(tmp_path))
    assert frame["store"].tolist() == ["01", "1"]
    assert frame["product"].tolist() == ["007", "7"]


def test_blank_key_is_missing_and_named(tmp_path: Path) -> None:
    (tmp_path / "f.csv").write_text(forecast_text(["P1", " ", "P3"]))
    msg = read_error(sources.read_forecast, config(tmp_path))
    assert "'product'" in msg and "line 3: ' '" in msg and "f.csv" in msg


def test_parquet_integer_keys_match_csv_text_by_their_plain_decimal_text(
        tmp_path: Path) -> None:
    table = pa.table({"store": pa.array(["S1", "S1"]), "product": pa.array([7, 70], pa.int32()),
                      "week": ["2026-02-23", "2026-02-23"], "units_sold": [1.0, 2.0]})
    pq.write_table(table, tmp_path / "a.parquet")
    cfg = config(tmp_path, actuals="a.parquet")
    actuals = sources.read_actuals(cfg)
    assert actuals["product"].tolist() == ["7", "70"]
    (tmp_path / "f.csv").write_text(forecast_text(["007", "7"]))
    forecast = sources.read_forecast(cfg)
    # the CSV text "7" matches the Parquet integer 7; "007" does not
    assert set(forecast["product"]) & set(actuals["product"]) == {"7"}


def test_parquet_whole_floats_are_integers_other_floats_are_refused(tmp_path: Path) -> None:
    # an integer column with nulls arrives as floats: its whole values are still integers
    pq.write_table(pa.table({"store": ["S1", "S1", "S1"],
                             "product": pa.array([7, None, 12], pa.int64()),
                             "week": ["2026-02-23"] * 3, "units_sold": [1.0, 2.0, 3.0]}),
                   tmp_path / "a.parquet")
    msg = read_error(sources.read_actuals, config(tmp_path, actuals="a.parquet"))
    assert "empty in 1 rows" in msg and "row 2: (empty)" in msg
    pq.write_table(pa.table({"store": ["S1", "S1"], "product": [7.0, 12.0],
                             "week": ["2026-02-23"] * 2, "units_sold": [1.0, 2.0]}),
                   tmp_path / "a.parquet")
    assert sources.read_actuals(config(tmp_path, actuals="a.parquet"))[
        "product"].tolist() == ["7", "12"]
    pq.write_table(pa.table({"store": ["S1", "S1"], "product": [7.0, 7.5],
                             "week": ["2026-02-23"] * 2, "units_sold": [1.0, 2.0]}),
                   tmp_path / "a.parquet")
    msg = read_error(sources.read_actuals, config(tmp_path, actuals="a.parquet"))
    assert "a.parquet" in msg and "'product'" in msg and "not whole" in msg
    assert "row 2: 7.5" in msg


@pytest.mark.parametrize(("values", "words"), [
    (pa.array([True, False]), "true/false"),
    (pa.array([pd.Timestamp("2026-01-01"), pd.Timestamp("2026-01-02")]), "dates"),
    (pa.array([date(2026, 1, 1), date(2026, 1, 2)], pa.date32()), "date values"),
])
def test_parquet_keys_that_are_not_text_or_integers_are_refused(
        tmp_path: Path, values: pa.Array, words: str) -> None:
    pq.write_table(pa.table({"store": ["S1", "S1"], "product": values,
                             "week": ["2026-02-23"] * 2, "units_sold": [1.0, 2.0]}),
                   tmp_path / "a.parquet")
    msg = read_error(sources.read_actuals, config(tmp_path, actuals="a.parquet"))
    assert "'product'" in msg and words in msg and "as text" in msg


# ------------------------------------------------------------------ one date format


def test_a_column_mixing_iso_and_day_month_year_is_refused(tmp_path: Path) -> None:
    (tmp_path / "f.csv").write_text(forecast_text(
        ["P1", "P2", "P3"], ["2026-03-02", "09/03/2026", "2026-03-09"]))
    msg = read_error(sources.read_forecast, config(tmp_path))
    assert "f.csv" in msg and "'week'" in msg and "1 value that is not a date" in msg
    assert "line 3: '09/03/2026'" in msg
    assert "forecast.date_formats" in msg and "%d/%m/%Y" in msg


def test_an_explicit_format_reads_day_month_year_and_refuses_iso(tmp_path: Path) -> None:
    (tmp_path / "f.csv").write_text(forecast_text(["P1", "P2"], ["02/03/2026", "09/03/2026"]))
    cfg = config(tmp_path, forecast_more=week_format("%d/%m/%Y"))
    frame = sources.read_forecast(cfg)
    # 9 March, not 3 September
    assert frame["period"].tolist() == [pd.Timestamp("2026-03-02"), pd.Timestamp("2026-03-09")]
    assert frame["issued"].tolist() == [pd.Timestamp("2026-03-02")] * 2  # issued_on: ISO
    (tmp_path / "f.csv").write_text(forecast_text(["P1", "P2"], ["02/03/2026", "2026-03-09"]))
    msg = read_error(sources.read_forecast, cfg)
    assert "line 3: '2026-03-09'" in msg and "'%d/%m/%Y'" in msg
    assert "forecast.date_formats" in msg


@pytest.mark.parametrize(("fmt", "written"), [("%Y%m%d", "20260302"),
                                              ("%d%m%Y", "02032026")])
def test_dates_of_digits_only_keep_their_leading_zeros(tmp_path: Path, fmt: str,
                                                       written: str) -> None:
    text = f"store,product,week,units_sold\nS1,P1,{written},1\nS1,P2,{written},2\n"
    (tmp_path / "a.csv").write_text(text)
    cfg = config(tmp_path, actuals_more=week_format(fmt))
    assert sources.read_actuals(cfg)["period"].tolist() == [pd.Timestamp("2026-03-02")] * 2


def test_mixed_offsets_keep_their_message(tmp_path: Path) -> None:
    (tmp_path / "f.csv").write_text(forecast_text(
        ["P1", "P2"], ["2026-03-02T00:00:00+01:00", "2026-03-02T00:00:00+02:00"]))
    assert "mixes time zones" in read_error(sources.read_forecast, config(tmp_path))
    (tmp_path / "f.csv").write_text(forecast_text(
        ["P1", "P2"], ["2026-03-02T00:00:00+01:00", "2026-03-02"]))
    assert "with and without time-zone offsets" in read_error(sources.read_forecast,
                                                              config(tmp_path))
    (tmp_path / "f.csv").write_text(forecast_text(
        ["P1", "P2"], ["2026-03-02T23:00:00+01:00", "2026-03-09T00:00:00+01:00"]))
    frame = sources.read_forecast(config(tmp_path))  # one offset: the wall-clock date kept
    assert frame["period"].tolist() == [pd.Timestamp("2026-03-02 23:00"),
                                        pd.Timestamp("2026-03-09")]


def test_a_spreadsheet_serial_number_is_shown_as_a_plain_number(tmp_path: Path) -> None:
    pq.write_table(pa.table({"store": ["S1"], "product": ["P1"], "week": [45936],
                             "units_sold": [1.0]}), tmp_path / "a.parquet")
    msg = read_error(sources.read_actuals, config(tmp_path, actuals="a.parquet"))
    assert "row 1: 45936" in msg and "np.int64" not in msg
    (tmp_path / "a.csv").write_text("store,product,week,units_sold\nS1,P1,45936,1\n")
    msg = read_error(sources.read_actuals, config(tmp_path))
    assert "line 2: '45936'" in msg


def test_dates_beyond_the_calendar_are_refused(tmp_path: Path) -> None:
    (tmp_path / "f.csv").write_text(forecast_text(["P1", "P2"], ["2026-03-02", "9999-12-31"]))
    msg = read_error(sources.read_forecast, config(tmp_path))
    assert "line 3: '9999-12-31'" in msg and "2262-04-11" in msg
    pq.write_table(pa.table({"store": ["S1"], "product": ["P1"],
                             "week": pa.array([np.datetime64("3000-01-01", "us")]),
                             "units_sold": [1.0]}), tmp_path / "a.parquet")
    msg = read_error(sources.read_actuals, config(tmp_path, actuals="a.parquet"))
    assert "row 1: 3000-01-01T00:00:00" in msg


def test_parquet_timestamps_and_dates_are_taken_as_they_are(tmp_path: Path) -> None:
    pq.write_table(pa.table({
        "store": ["S1", "S1"], "product": ["P1", "P2"],
        "week": pa.array([date(2026, 3, 2)] * 2, pa.date32()),
        "units_sold": [1.0, 2.0]}), tmp_path / "a.parquet")
    cfg = config(tmp_path, actuals="a.parquet",
                 actuals_more=week_format("%d/%m/%Y"))
    assert sources.read_actuals(cfg)["period"].tolist() == [pd.Timestamp("2026-03-02")] * 2


# ---------------------------------------------------------------- plain values


def test_messages_print_plain_values() -> None:
    assert plain(np.int64(45936)) == "45936"
    assert plain(np.float64(7.5)) == "7.5"
    assert plain("007") == "'007'"
    assert plain(float("nan")) == "(empty)"
    assert plain(None) == "(empty)"
    assert plain(pd.Timestamp("2026-03-02")) == "2026-03-02T00:00:00"


# ------------------------------------------------------------- the converters, directly


KEY = Column("product", "key", "forecast.keys")


def test_to_key_strips_text_and_shares_one_category_per_distinct_value() -> None:
    s = pd.Series([" 7", "7", "007", "7 "])
    out = to_key(s, Path("f.csv"), KEY, "forecast", 2)
    assert out.tolist() == ["7", "7", "007", "7"]
    assert sorted(out.cat.categories) == ["007", "7"]  # " 7" and "7 " are the text "7"


def test_to_key_integers_are_their_decimal_text_and_missing_keys_are_refused() -> None:
    assert to_key(pd.Series([7, 70]), Path("a.parquet"), KEY, "actuals", 1).tolist() == [
        "7", "70"]
    msg = read_error(to_key, pd.Series(["P1", None, ""]), Path("f.csv"), KEY, "forecast", 2)
    assert "empty in 2 rows" in msg and "line 3: (empty)" in msg and "line 4: ''" in msg


def test_a_segment_label_may_be_missing_but_not_reserved() -> None:
    seg = Column("category", "text", "segments.columns")
    out = convert(pd.Series(["tools", None]), Path("m.csv"), seg, "mapping", 2)
    assert out.tolist()[0] == "tools" and pd.isna(out.tolist()[1])
    for name in RESERVED_SEGMENTS:
        msg = read_error(convert, pd.Series(["tools", name]), Path("m.csv"), seg, "mapping", 2)
        assert "reserved segment name" in msg and f"line 3: {name!r}" in msg


def test_to_number_reads_text_numbers_and_names_the_others() -> None:
    value = Column("units", "number", "forecast.value")
    out = to_number(pd.Series([" 1.5", "", "2"]), Path("f.csv"), value, "forecast", 2)
    np.testing.assert_array_equal(out.to_numpy(), [1.5, np.nan, 2.0])
    msg = read_error(to_number, pd.Series(["1", "12,5"]), Path("f.csv"), value, "forecast", 2)
    assert "1 value that is not a number" in msg and "line 3: '12,5'" in msg
    msg = read_error(to_number, pd.Series([True, False]), Path("f.parquet"), value,
                     "forecast", 1)
    assert "true/false" in msg


def test_to_date_parses_each_format_and_refuses_empty_dates() -> None:
    week = Column("week", "date", "forecast.period", fmt="%d/%m/%Y")
    out = to_date(pd.Series(["09/03/2026", "02/03/2026"]), Path("f.csv"), week, "forecast", 2)
    assert out.tolist() == [pd.Timestamp("2026-03-09"), pd.Timestamp("2026-03-02")]
    assert out.dtype == "datetime64[ns]"
    msg = read_error(to_date, pd.Series(["09/03/2026", " "]), Path("f.csv"), week, "forecast", 2)
    assert "empty in 1 rows" in msg and "line 3" in msg


def test_listed_rows_numbers_csv_lines_and_parquet_rows_and_counts_the_rest() -> None:
    mask = np.array([True] * 7 + [False])
    values = pd.Series(list("abcdefgh"))
    assert listed_rows(mask, values, 2) == (
        "line 2: 'a', line 3: 'b', line 4: 'c', line 5: 'd', line 6: 'e' and 2 more")
    assert listed_rows(np.array([False, True]), pd.Series([1, 2]), 1) == "row 2: 2"

