"""Parquet files written from a cut frame keep its index in their pandas metadata."""

from __future__ import annotations

from collections.abc import Callable

from tests.dask.support import both, compare
from tests.support.project import CURRENT, Project, actuals_frame, forecast_frame


def test_a_parquet_forecast_written_after_a_cut_reads_as_on_pandas(
        make_project: Callable[..., Project], cluster: str) -> None:
    """A forecast saved by ``frame.iloc[k:].to_parquet()`` (a RangeIndex from k in its
    metadata) gives the pandas engine's results: the converted columns stay aligned (the
    index once misaligned the keys: series read as missing, keys as empty)."""
    project = make_project()
    forecast = forecast_frame(CURRENT)
    first = (forecast["store"] == forecast["store"].iloc[0]) & \
        (forecast["product"] == forecast["product"].iloc[0])
    cut = forecast[~first]
    assert cut.index[0] > 0
    path = project.data / "forecast.parquet"
    cut.to_parquet(path)
    actuals = actuals_frame(CURRENT)
    a_path = project.data / "actuals.parquet"
    actuals.iloc[1:].to_parquet(a_path)
    pandas_report, dask_report = both(project.config, cluster, forecast_path=path,
                                      actuals_path=a_path)
    assert not [r for r in pandas_report.results
                if r.check == "output.duplicate_rows" and r.status == "fail"]
    compare(pandas_report, dask_report)
