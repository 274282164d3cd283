"""Segments (:mod:`accuracy_checks.sources.segments`): the mapping table, segment labels joined
by "/", the ``segment`` column of the forecast and of the actuals, shared categories.
"""

from __future__ import annotations

from pathlib import Path

import pandas as pd
import pytest

from accuracy_checks import sources
from accuracy_checks.errors import InputError
from accuracy_checks.sources.segments import (
    assign_segments,
    attach_segments,
    segment_labels,
    segments_of_series,
    unify_categories,
)
from tests.support.sources import config, forecast_text, read_error


def cat(values: list[str | None]) -> pd.Series:
    return pd.Series(values, dtype="category")


# ------------------------------------------------------------------------- the mapping


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


def test_segment_combinations_that_print_alike_are_refused() -> None:
    # ("a/b", "c") and ("a", "b/c") would both be named "a/b/c": merging them would pool two
    # segments' figures under one name
    frame = pd.DataFrame({"family": ["a/b", "a"], "kind": ["c", "b/c"]})
    with pytest.raises(InputError, match=r"same name 'a/b/c' \('a' \+ 'b/c' and 'a/b' \+ 'c'\)"):
        segment_labels([frame["family"], frame["kind"]])


def test_a_series_mapped_to_two_segments_is_refused(tmp_path: Path) -> None:
    (tmp_path / "m.csv").write_text("product,category\nP1,tools\nP1,plants\nP2,tools\n")
    msg = read_error(sources.read_mapping, config(tmp_path))
    assert "puts 1 series in more than one segment" in msg
    assert "product=P1 is in tools and plants" in msg


def test_a_mapping_that_shares_no_key_is_refused(tmp_path: Path) -> None:
    (tmp_path / "m.csv").write_text("item,category\nP1,tools\n")
    msg = read_error(sources.read_mapping, config(tmp_path))
    assert "shares no key column" in msg and "item, category" in msg


def test_no_mapping_configured_reads_none(tmp_path: Path) -> None:
    assert sources.read_mapping(config(tmp_path, mapping=None)) is None


# ----------------------------------------------------------------------- labels, segments


def test_segment_labels_join_the_columns_and_name_missing_values_unassigned() -> None:
    labels = segment_labels([cat(["a", "a", None, "b"]), cat(["x", "y", "x", None])])
    assert list(labels) == ["a/x", "a/y", "unassigned/x", "b/unassigned"]
    assert list(labels.categories) == sorted(set(labels))  # built on distinct combinations


def test_unify_categories_gives_every_frame_the_sorted_union() -> None:
    one = pd.DataFrame({"k": cat(["b", "a"]), "v": [1, 2]})
    two = pd.DataFrame({"k": cat(["c", "a"])})
    plain = pd.DataFrame({"k": ["z"]})  # not categorical: left alone
    out = unify_categories([one, two, plain], ["k", "absent"])
    assert list(out[0]["k"].cat.categories) == list(out[1]["k"].cat.categories) == ["a", "b", "c"]
    assert out[0]["k"].tolist() == ["b", "a"] and out[1]["k"].tolist() == ["c", "a"]
    assert out[2] is plain


def test_assign_segments_from_the_frame_or_the_mapping(tmp_path: Path) -> None:
    cfg = config(tmp_path)
    frame = pd.DataFrame({"store": cat(["S1", "S1"]), "product": cat(["P1", "P2"])})
    mapping = pd.DataFrame({"product": cat(["P1", "P2"]), "category": cat(["tools", "plants"])})
    frame, mapping = unify_categories([frame, mapping], ["product"])
    out = assign_segments(frame, cfg, mapping, role="forecast")
    assert out["segment"].tolist() == ["tools", "plants"] and "category" not in out.columns
    own = frame.assign(category=cat(["own", None]))
    assert assign_segments(own, cfg, None, role="forecast")["segment"].tolist() == [
        "own", "unassigned"]
    with pytest.raises(InputError, match="in neither the forecast file nor a mapping"):
        assign_segments(frame, cfg, None, role="forecast")


def test_without_segment_columns_every_row_is_in_all_series(tmp_path: Path) -> None:
    cfg = config(tmp_path, segments=False)
    frame = pd.DataFrame({"store": cat(["S1"]), "product": cat(["P1"])})
    assert assign_segments(frame, cfg, None, role="forecast")["segment"].tolist() == ["*"]
    assert attach_segments(frame, cfg, None, pd.DataFrame)["segment"].tolist() == ["*"]


def test_actuals_take_the_segment_the_forecasts_know_else_unassigned(tmp_path: Path) -> None:
    cfg = config(tmp_path)
    forecast = pd.DataFrame({"store": cat(["S1", "S1"]), "product": cat(["P1", "P2"]),
                             "segment": cat(["tools", "plants"])})
    earlier = forecast.assign(segment=cat(["old", "plants"]))
    actuals = pd.DataFrame({"store": cat(["S1", "S1", "S2"]), "product": cat(["P1", "P2", "P1"])})
    known = segments_of_series([earlier, forecast], ["store", "product"])
    assert len(known) == 2 and known["segment"].tolist() == ["tools", "plants"]  # last wins
    out = attach_segments(actuals, cfg, None, lambda: known)
    assert out["segment"].tolist() == ["tools", "plants", "unassigned"]


def test_the_forecast_reader_keeps_segment_columns_it_holds(tmp_path: Path) -> None:
    text = forecast_text(["P1"]).replace("issued_on\n", "issued_on,category\n")
    (tmp_path / "f.csv").write_text(text.replace("2026-03-02\n", "2026-03-02,tools\n"))
    frame = sources.read_forecast(config(tmp_path), segment_columns=["category", "absent"])
    assert frame["category"].tolist() == ["tools"] and "absent" not in frame.columns
