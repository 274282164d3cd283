"""The input readers' rules (issue 10): identifiers are text, one date format per column, no
column named twice, reserved segment names, plain values in messages, the calendar's bounds.

Each test reads small files written here through :mod:`accuracy_checks.sources.read` and checks
the frame it returns or the one-paragraph :class:`InputError` it raises.
"""

from __future__ import annotations

import gzip
from datetime import date
from pathlib import Path

import numpy as np
import pandas as pd
import pyarrow as pa
import pyarrow.parquet as pq
import pytest

from accuracy_checks.config import Config, parse_config
from accuracy_checks.errors import InputError
from accuracy_checks.evaluation.grid import grid_dates, grid_positions
from accuracy_checks.sources import read as sources

CONFIG = """\
version: 1
forecast:
  path: {forecast}
  keys: [store, product]
  period: week
  value: units
  issued: issued_on
{forecast_extra}actuals:
  path: {actuals}
  period: week
  value: units_sold
{actuals_extra}frequency: W-MON
horizon: 2
segments:
  columns: [category]
  mapping: {mapping}
"""


def config(tmp_path: Path, *, forecast: str = "f.csv", actuals: str = "a.csv",
           mapping: str = "m.csv", forecast_extra: str = "", actuals_extra: str = "") -> Config:
    text = CONFIG.format(forecast=forecast, actuals=actuals, mapping=mapping,
                         forecast_extra=forecast_extra, actuals_extra=actuals_extra)
    return parse_config(text, source=tmp_path / "c.yaml")


def forecast_text(products: list[str], weeks: list[str] | None = None) -> str:
    weeks = weeks or ["2026-03-02"] * len(products)
    lines = ["store,product,week,units,issued_on"]
    lines += [f"S1,{p},{w},10,2026-03-02" for p, w in zip(products, weeks, strict=True)]
    return "\n".join(lines) + "\n"


def read_error(fn: object, *args: object, **kwargs: object) -> str:
    with pytest.raises(InputError) as info:
        fn(*args, **kwargs)  # type: ignore[operator]
    msg = str(info.value)
    assert "\n" not in msg and "np." not in msg and "nan" not in msg.lower().split()
    return msg


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
    cfg = config(tmp_path, forecast_extra='  date_formats: {week: "%d/%m/%Y"}\n')
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
    cfg = config(tmp_path, actuals_extra=f'  date_formats: {{week: "{fmt}"}}\n')
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
                 actuals_extra='  date_formats: {week: "%d/%m/%Y"}\n')
    assert sources.read_actuals(cfg)["period"].tolist() == [pd.Timestamp("2026-03-02")] * 2


# ------------------------------------------------------------ a column named twice


@pytest.mark.parametrize("name", ["f.csv", "f.tsv", "f.csv.gz"])
def test_a_column_named_twice_in_a_csv_header_is_refused(tmp_path: Path, name: str) -> None:
    sep = "\t" if name.endswith(".tsv") else ","
    text = sep.join(["store", "product", "week", "units", "issued_on", "units"]) + "\n"
    text += sep.join(["S1", "P1", "2026-03-02", "10", "2026-03-02", "99"]) + "\n"
    path = tmp_path / name
    if name.endswith(".gz"):
        with gzip.open(path, "wt", encoding="utf-8-sig") as fh:  # with a byte-order mark
            fh.write(text)
    else:
        path.write_text(text, encoding="utf-8-sig")
    msg = read_error(sources.read_forecast, config(tmp_path, forecast=name))
    assert name in msg and "2 columns named 'units'" in msg and "forecast.value" in msg


def test_a_repeated_column_the_tool_does_not_read_is_harmless(tmp_path: Path) -> None:
    text = forecast_text(["P1"]).replace("issued_on\n", "issued_on,note,note\n")
    text = text.replace("2026-03-02\n", "2026-03-02,a,b\n")
    (tmp_path / "f.csv").write_text(text)
    assert len(sources.read_forecast(config(tmp_path))) == 1


def test_a_column_named_twice_in_a_parquet_schema_is_refused(tmp_path: Path) -> None:
    table = pa.Table.from_arrays(
        [pa.array(["S1"]), pa.array(["P1"]), pa.array(["2026-02-23"]), pa.array([1.0]),
         pa.array(["P9"])], names=["store", "product", "week", "units_sold", "product"])
    pq.write_table(table, tmp_path / "a.parquet")
    msg = read_error(sources.read_actuals, config(tmp_path, actuals="a.parquet"))
    assert "a.parquet" in msg and "2 columns named 'product'" in msg


# ------------------------------------------------------------------ reserved segments


@pytest.mark.parametrize("name", ["*", " * ", "unassigned"])
def test_reserved_segment_names_in_the_mapping_are_refused(tmp_path: Path, name: str) -> None:
    (tmp_path / "m.csv").write_text(f"product,category\nP1,tools\nP2,{name}\n")
    msg = read_error(sources.read_mapping, config(tmp_path))
    assert "m.csv" in msg and "'category'" in msg and "reserved segment name" in msg
    assert f"line 3: '{name}'" in msg


def test_reserved_segment_name_in_the_forecast_is_refused(tmp_path: Path) -> None:
    text = forecast_text(["P1", "P2"]).replace("issued_on\n", "issued_on,category\n")
    text = text.replace("S1,P1,2026-03-02,10,2026-03-02\n", "S1,P1,2026-03-02,10,2026-03-02,*\n")
    text = text.replace("S1,P2,2026-03-02,10,2026-03-02\n", "S1,P2,2026-03-02,10,2026-03-02,a\n")
    (tmp_path / "f.csv").write_text(text)
    msg = read_error(sources.read_forecast, config(tmp_path), segment_columns=["category"])
    assert "f.csv" in msg and "'*'" in msg and "line 2" in msg


def test_segment_values_are_text_as_written(tmp_path: Path) -> None:
    (tmp_path / "m.csv").write_text("product,category\nP1,01\nP2,1\nP3,NA\n")
    table = sources.read_mapping(config(tmp_path))
    assert table is not None
    assert table["category"].tolist() == ["01", "1", "NA"]


# ---------------------------------------------------------------- plain values


def test_messages_print_plain_values() -> None:
    assert sources._plain(np.int64(45936)) == "45936"
    assert sources._plain(np.float64(7.5)) == "7.5"
    assert sources._plain("007") == "'007'"
    assert sources._plain(float("nan")) == "(empty)"
    assert sources._plain(None) == "(empty)"
    assert sources._plain(pd.Timestamp("2026-03-02")) == "2026-03-02T00:00:00"


# ------------------------------------------------------------------ the calendar


def test_grid_beyond_the_calendar_is_an_input_error() -> None:
    with pytest.raises(InputError, match="2262-04-11") as info:
        grid_dates(pd.Timestamp("2262-04-05"), 13, "D")
    assert "`horizon`" in str(info.value) and "'D'" in str(info.value)
    with pytest.raises(InputError, match="run past the calendar"):
        grid_positions(pd.Series(pd.to_datetime(["2262-04-02", "2262-04-11"])), "MS")
    assert len(grid_dates(pd.Timestamp("2262-04-01"), 11, "D")) == 11


def test_parquet_shortcuts_leave_repeated_or_out_of_calendar_columns_to_the_full_read(
        tmp_path: Path) -> None:
    # the period/cycle pre-reads of Parquet files must not crash: they give up (None) and the
    # full read names the problem
    week = pa.array([np.datetime64("2026-03-02", "us"), np.datetime64("3000-01-01", "us")])
    late = pa.table({"store": ["S1", "S1"], "product": ["P1", "P1"], "week": week,
                     "units_sold": [1.0, 2.0]})
    pq.write_table(late, tmp_path / "a.parquet")
    cfg = config(tmp_path, actuals="a.parquet")
    assert sources.actual_periods(cfg) is None
    assert "3000-01-01" in read_error(sources.read_actuals, cfg)
    twice = late.append_column("week", late["week"])
    pq.write_table(twice, tmp_path / "a.parquet")
    assert sources.actual_periods(cfg) is None
    history = pa.table({"store": ["S1", "S1"], "product": ["P1", "P1"], "week": week,
                        "units": [1.0, 2.0], "issued_on": week})
    pq.write_table(history, tmp_path / "h.parquet")
    assert sources.cycle_starts(tmp_path / "h.parquet", cfg) is None
    pq.write_table(history.append_column("issued_on", history["week"]), tmp_path / "h.parquet")
    assert sources.cycle_starts(tmp_path / "h.parquet", cfg) is None


# ---------------------------------------------------------- rows that do not fit the header


def test_an_unquoted_decimal_comma_is_refused_not_cut(tmp_path: Path) -> None:
    # "12,5" unquoted is two fields: a reader that keeps only the named columns reads 12
    text = "store,product,week,units_sold\nS1,P1,2026-02-23,10\nS1,P2,2026-02-23,12,5\n"
    (tmp_path / "a.csv").write_text(text)
    msg = read_error(sources.read_actuals, config(tmp_path))
    assert "a.csv" in msg and "5 fields on line 3" in msg and "header has 4" in msg
    # the same on every line: no line fits the header
    text = "store,product,week,units_sold\nS1,P1,2026-02-23,10,5\nS1,P2,2026-02-23,12,5\n"
    (tmp_path / "a.csv").write_text(text)
    msg = read_error(sources.read_actuals, config(tmp_path))
    assert "a.csv" in msg and "lines 2, 3" in msg and "decimal comma" in msg


def test_a_separator_at_the_end_of_every_line_is_harmless(tmp_path: Path) -> None:
    text = "store,product,week,units_sold\nS1,P1,2026-02-23,10,\nS1,P2,2026-02-23,12,\n"
    (tmp_path / "a.csv").write_text(text)
    actuals = sources.read_actuals(config(tmp_path))
    assert actuals["store"].tolist() == ["S1", "S1"]  # not shifted into an index
    assert actuals["actual"].tolist() == [10.0, 12.0]


def test_a_truncated_compressed_file_is_an_input_error(tmp_path: Path) -> None:
    data = gzip.compress(forecast_text(["P1", "P2"] * 200).encode())
    (tmp_path / "f.csv.gz").write_bytes(data[: len(data) // 2])
    msg = read_error(sources.read_forecast, config(tmp_path, forecast="f.csv.gz"))
    assert "f.csv.gz" in msg and "cannot be read" in msg


def test_segment_combinations_that_print_alike_are_refused() -> None:
    # ("a/b", "c") and ("a", "b/c") would both be named "a/b/c": merging them would pool two
    # segments' figures under one name
    frame = pd.DataFrame({"family": ["a/b", "a"], "kind": ["c", "b/c"]})
    with pytest.raises(InputError, match=r"same name 'a/b/c' \('a' \+ 'b/c' and 'a/b' \+ 'c'\)"):
        sources._labels([frame["family"], frame["kind"]])
