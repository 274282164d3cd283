"""A snapshot the dask engine wrote (a folder of parts) is an archived cycle like a file."""

from __future__ import annotations

from collections.abc import Callable

import pandas as pd

from accuracy_checks import load_config, run_checks
from accuracy_checks.checks.coverage import SERIES_COUNT
from tests.support.project import Project, forecast_frame


def test_a_later_run_reads_the_workers_snapshot(make_project: Callable[..., Project],
                                                cluster: str) -> None:
    """The pandas engine's next run uses the cycle the dask engine archived: no
    ``archive.snapshot`` warning, and its series count is compared with that cycle."""
    project = make_project(earlier=forecast_frame(pd.Timestamp("2026-02-09")))
    config = load_config(project.config)
    first = project.write("f_2026-02-16.csv", forecast_frame(pd.Timestamp("2026-02-16")))
    done = run_checks(config, forecast_path=first, engine="dask", scheduler=cluster)
    assert done.snapshot and done.attempt == 1
    later = project.write("f_2026-02-23.csv", forecast_frame(pd.Timestamp("2026-02-23")))
    report = run_checks(config, forecast_path=later)
    assert not [r for r in report.results if r.check == "archive.snapshot"]
    count = [r for r in report.results if r.check == SERIES_COUNT]
    assert count and all(r.status != "skipped" for r in count)
    assert "2026-02-16" in str(count[0].details)
