"""accuracy_checks.evaluation_frame and the light package root.

Expected rows are rebuilt from the project's CSV files with pandas: lag 1 is the cycle's first
period (here the issue date itself, as the fixture's cycles start on their Monday), and the
window is the 2 most recent weeks that have actuals (``evaluation.window: 2``).
"""

from __future__ import annotations

import subprocess
import sys
from collections.abc import Callable
from pathlib import Path

import numpy as np
import pandas as pd
import pyarrow as pa
import pytest

import accuracy_checks
from accuracy_checks import load_config
from tests.support.paths import REPO
from tests.support.project import Project


def test_root_import_loads_neither_gx_nor_pandas() -> None:
    code = ("import accuracy_checks, sys; "
            "assert 'great_expectations' not in sys.modules, 'GX imported'; "
            "assert 'pandas' not in sys.modules, 'pandas imported'; "
            "assert callable(accuracy_checks.evaluation_frame)")
    done = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                          check=False, cwd=REPO)
    assert done.returncode == 0, done.stderr


def test_evaluation_frame_rows_and_columns(make_project: Callable[..., Project]) -> None:
    project = make_project()
    frame = accuracy_checks.evaluation_frame(project.config)
    assert list(frame.columns[:8]) == ["store", "product", "period", "issued", "lag", "segment",
                                       "forecast", "actual"]
    assert not [c for c in frame.columns if str(c).startswith("__")]
    assert frame["lag"].dtype == np.int64 and set(frame["lag"]) == {1}

    earlier = pd.read_csv(project.data / "earlier.csv")
    actuals = pd.read_csv(project.data / "actuals.csv")
    window = sorted(actuals["week"].unique())[-2:]
    want = earlier[(earlier["week"] == earlier["issued_on"]) & earlier["week"].isin(window)]
    want = want.merge(actuals, on=["store", "product", "week"], how="left")
    got = frame.assign(week=frame["period"].dt.strftime("%Y-%m-%d"),
                       store=frame["store"].astype(str), product=frame["product"].astype(str))
    got = got.sort_values(["store", "product", "week"]).reset_index(drop=True)
    want = want.sort_values(["store", "product", "week"]).reset_index(drop=True)
    assert len(got) == len(want) == 12
    assert got["week"].tolist() == want["week"].tolist()
    np.testing.assert_allclose(got["forecast"], want["units"], rtol=1e-12)
    np.testing.assert_allclose(got["actual"], want["units_sold"], rtol=1e-12)
    segments = got["segment"].astype(str)
    assert (segments == got["product"].map({"P1": "tools", "P2": "plants", "P3": "plants"})).all()


def test_evaluation_frame_takes_a_config_object(make_project: Callable[..., Project]) -> None:
    project = make_project()
    by_path = accuracy_checks.evaluation_frame(str(project.config))
    by_config = accuracy_checks.evaluation_frame(load_config(project.config))
    pd.testing.assert_frame_equal(by_path, by_config)


def test_evaluation_frame_reports_a_bad_config(tmp_path: Path) -> None:
    with pytest.raises(accuracy_checks.ConfigError, match="does not exist"):
        accuracy_checks.evaluation_frame(f"{tmp_path}/missing.yaml")


def test_evaluation_frame_from_frames_equals_the_files(make_project: Callable[..., Project]
                                                       ) -> None:
    project = make_project()
    from_files = accuracy_checks.evaluation_frame(project.config)
    earlier = pa.Table.from_pandas(pd.read_csv(project.data / "earlier.csv"))
    from_frames = accuracy_checks.evaluation_frame(
        project.config, history=earlier, actuals=pd.read_csv(project.data / "actuals.csv"),
        mapping=pd.read_csv(project.data / "products.csv"))
    pd.testing.assert_frame_equal(from_frames, from_files, check_categorical=False)
