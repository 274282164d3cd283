"""An input the pandas engine refuses is refused by the dask engine with the same message (the
same first rows, the same count for the whole file) when the offending rows lie in several
shards or several pieces of a file (a real multi-process local cluster, both engines)."""

from __future__ import annotations

from collections.abc import Callable

import pandas as pd
import pytest

from tests.dask.support import refusals
from tests.support.project import CURRENT, Project, actuals_frame, forecast_frame


def _many_series(frame: pd.DataFrame, n: int) -> pd.DataFrame:
    """``frame``'s rows repeated for ``n`` stores (series spread over every shard)."""
    return pd.concat([frame.assign(store=frame["store"] + f"-{i}") for i in range(n)],
                     ignore_index=True)


def test_repeated_actuals_counted_over_the_whole_file(make_project: Callable[..., Project],
                                                      cluster: str) -> None:
    actuals = _many_series(actuals_frame(CURRENT), 12)
    repeated = actuals.iloc[::5]  # a repeated row in every series
    actuals = pd.concat([actuals, repeated], ignore_index=True)
    project = make_project(forecast=_many_series(forecast_frame(CURRENT), 12), actuals=actuals)
    pandas_message, dask_message = refusals(project.config, cluster)
    assert f"hold {2 * len(repeated)} rows that repeat" in pandas_message
    assert dask_message == pandas_message


def _parquet_project(project: Project, name: str, frame: pd.DataFrame, rows: int) -> None:
    """``frame`` written as ``data/<name>.parquet`` (text columns as written, ``rows`` rows per
    row group) and the config pointed at it."""
    frame.to_parquet(project.data / f"{name}.parquet", index=False, row_group_size=rows)
    text = project.config.read_text(encoding="utf-8")
    project.config.write_text(text.replace(f"data/{name}.csv", f"data/{name}.parquet"),
                              encoding="utf-8")


def test_an_error_in_several_pieces_names_the_whole_files_rows(
        make_project: Callable[..., Project], cluster: str,
        monkeypatch: pytest.MonkeyPatch) -> None:
    """Dates that do not parse in several row-group pieces of one Parquet file: the first
    rows of the file and the count over the whole file, as the pandas engine says."""
    import accuracy_checks.dask.read as read

    monkeypatch.setattr(read, "PIECE_ROWS", 10)  # pieces of one row group (client side)
    forecast = _many_series(forecast_frame(CURRENT), 4)
    forecast.loc[[30, 31, 45, 70, 90], "week"] = "2026-13-40"
    project = make_project(forecast=forecast)
    _parquet_project(project, "forecast", forecast, 10)
    pandas_message, dask_message = refusals(project.config, cluster)
    assert "5 values" in pandas_message and "row 31" in pandas_message
    assert dask_message == pandas_message


def test_utc_offsets_mixed_across_pieces_are_refused(make_project: Callable[..., Project],
                                                     cluster: str,
                                                     monkeypatch: pytest.MonkeyPatch) -> None:
    """Text dates with one UTC offset in one row group and another in the next: each piece
    alone is consistent, the file is not; the pandas engine's message."""
    import accuracy_checks.dask.read as read

    monkeypatch.setattr(read, "PIECE_ROWS", 10)
    actuals = _many_series(actuals_frame(CURRENT), 2)
    # one offset per row group of 10 rows, alternating: no piece mixes them
    offset = ["+01:00" if i // 10 % 2 == 0 else "+02:00" for i in range(len(actuals))]
    actuals["week"] = actuals["week"] + "T00:00:00" + pd.Series(offset)
    project = make_project(forecast=_many_series(forecast_frame(CURRENT), 2), actuals=actuals)
    _parquet_project(project, "actuals", actuals, 10)
    pandas_message, dask_message = refusals(project.config, cluster)
    assert "different UTC offsets" in pandas_message
    assert dask_message == pandas_message


def test_the_first_offending_column_of_the_file_is_named(make_project: Callable[..., Project],
                                                         cluster: str) -> None:
    """A missing key in one row and a date that does not parse in an earlier one: the dask
    engine's first reads (the dates only) name the column the pandas engine names first."""
    forecast = _many_series(forecast_frame(CURRENT), 3)
    forecast.loc[2, "week"] = "2026-13-40"
    forecast.loc[9, "store"] = ""
    project = make_project(forecast=forecast)
    pandas_message, dask_message = refusals(project.config, cluster)
    assert "key column 'store'" in pandas_message and "line 11" in pandas_message
    assert dask_message == pandas_message
