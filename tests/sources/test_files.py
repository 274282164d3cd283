"""Finding and reading files (:mod:`accuracy_checks.sources.files`): a file or a folder of
CSV/Parquet files, headers (a missing column, a column named twice), rows that do not fit the
header, damaged files. Each problem is one paragraph naming the file and the column or lines.
"""

from __future__ import annotations

import gzip
from pathlib import Path

import pandas as pd
import pyarrow as pa
import pyarrow.parquet as pq
import pytest

from accuracy_checks import sources
from accuracy_checks.sources.columns import Column
from accuracy_checks.sources.files import (
    check_header,
    columns_of,
    file_header,
    list_files,
    read_columns,
)
from tests.support.sources import config, forecast_text, read_error

# ------------------------------------------------------------------- finding the files


def test_a_folder_gives_its_csv_and_parquet_files_in_name_order(tmp_path: Path) -> None:
    for name in ("b.parquet", "a.csv", "c.csv.gz", "notes.md", "d.tsv"):
        (tmp_path / name).write_text("")
    assert [p.name for p in list_files(tmp_path, "actuals", "actuals.path")] == [
        "a.csv", "b.parquet", "c.csv.gz", "d.tsv"]
    assert list_files(tmp_path / "a.csv", "actuals", "actuals.path") == [tmp_path / "a.csv"]


def test_a_missing_file_or_an_empty_folder_is_named_with_its_config_key(tmp_path: Path) -> None:
    msg = read_error(list_files, tmp_path / "nope.csv", "forecast", "forecast.path")
    assert "nope.csv" in msg and "`forecast.path`" in msg and "does not exist" in msg
    (tmp_path / "empty").mkdir()
    msg = read_error(list_files, tmp_path / "empty", "actuals", "actuals.path")
    assert "holds no .csv or .parquet files" in msg and "`actuals.path`" in msg


def test_a_folder_of_files_is_read_as_one_frame(tmp_path: Path) -> None:
    (tmp_path / "a").mkdir()
    (tmp_path / "a" / "1.csv").write_text("store,product,week,units_sold\nS1,P1,2026-02-23,1\n")
    pd.DataFrame({"store": ["S2"], "product": ["P1"], "week": [pd.Timestamp("2026-02-23")],
                  "units_sold": [2.0]}).to_parquet(tmp_path / "a" / "2.parquet", index=False)
    actuals = sources.read_actuals(config(tmp_path, actuals="a"))
    assert actuals["store"].tolist() == ["S1", "S2"]
    assert actuals["actual"].tolist() == [1.0, 2.0]


# ------------------------------------------------------------------------------ headers


def test_file_header_keeps_repeated_names_as_written(tmp_path: Path) -> None:
    (tmp_path / "f.csv").write_text("a,b,a\n1,2,3\n")
    assert file_header(tmp_path / "f.csv", "forecast") == ["a", "b", "a"]
    assert columns_of(tmp_path / "f.csv", "forecast", "forecast.path") == ["a", "b", "a"]
    (tmp_path / "e.csv").write_text("")
    assert "is empty (not even a header line)" in read_error(file_header, tmp_path / "e.csv",
                                                             "forecast")


def test_a_missing_column_is_named_with_the_columns_the_file_has(tmp_path: Path) -> None:
    (tmp_path / "f.csv").write_text("store,item\nS1,P1\n")
    column = Column("product", "key", "forecast.keys")
    msg = read_error(check_header, tmp_path / "f.csv", [column], "forecast")
    assert "no column 'product'" in msg and "`forecast.keys`" in msg
    assert "Its columns are: store, item" in msg


def test_a_header_without_rows_is_refused_unless_allowed(tmp_path: Path) -> None:
    (tmp_path / "h.csv").write_text("store,product,week,units,issued_on\n")
    columns = [Column("store", "key", "forecast.keys"), Column("units", "number", "v", "forecast")]
    msg = read_error(read_columns, tmp_path / "h.csv", columns, role="history", key="history")
    assert "has a header but no rows" in msg and "`history`" in msg
    frame = read_columns(tmp_path / "h.csv", columns, role="history", key="history",
                         allow_empty=True)
    assert list(frame.columns) == ["store", "forecast"] and len(frame) == 0


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


def test_parquet_row_filter_keeps_only_the_dates_asked(tmp_path: Path) -> None:
    weeks = pa.array([pd.Timestamp("2026-02-16"), pd.Timestamp("2026-02-23")])
    pq.write_table(pa.table({"store": ["S1", "S1"], "product": ["P1", "P1"], "week": weeks,
                             "units_sold": [1.0, 2.0]}), tmp_path / "a.parquet")
    columns = [Column("week", "date", "actuals.period", "period"),
               Column("units_sold", "number", "actuals.value", "actual")]
    frame = read_columns(tmp_path / "a.parquet", columns, role="actuals", key="actuals.path",
                         row_filter=("week", [pd.Timestamp("2026-02-23")]))
    assert frame["period"].tolist() == [pd.Timestamp("2026-02-23")]
    assert frame["actual"].tolist() == [2.0]


@pytest.mark.parametrize("text", ["a,b\n1,2\n", "a\tb\n1\t2\n"])
def test_a_tsv_is_read_with_tabs(tmp_path: Path, text: str) -> None:
    name = "f.tsv" if "\t" in text else "f.csv"
    (tmp_path / name).write_text(text)
    assert file_header(tmp_path / name, "forecast") == ["a", "b"]


def test_a_header_read_as_one_column_names_the_separator_it_holds(tmp_path: Path) -> None:
    (tmp_path / "f.csv").write_text("store;product\nS1;P1\n")
    column = Column("product", "key", "forecast.keys")
    msg = read_error(check_header, tmp_path / "f.csv", [column], "forecast")
    assert "seems separated by semicolons, but this reader expects commas" in msg


@pytest.mark.parametrize("encoding", ["latin-1", "utf-16"])
def test_a_file_that_is_not_utf8_says_so_and_how_to_fix_it(tmp_path: Path,
                                                            encoding: str) -> None:
    (tmp_path / "f.csv").write_text("störe,product\nS1,P1\n", encoding=encoding)
    column = Column("product", "key", "forecast.keys")
    msg = read_error(check_header, tmp_path / "f.csv", [column], "forecast")
    assert "it is not UTF-8 text" in msg and "Save it as UTF-8" in msg
