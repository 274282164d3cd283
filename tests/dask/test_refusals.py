"""An input the pandas engine refuses is refused by the dask engine with the same message (the
same first rows, the same count for the whole file) when the offending rows lie in several
shards or several pieces of a file (a real multi-process local cluster, both engines)."""

from __future__ import annotations

from collections.abc import Callable
from pathlib import Path

import pandas as pd
import pytest

from accuracy_checks import load_config, run_checks
from accuracy_checks.errors import InputError
from tests.support.project import CURRENT, Project, actuals_frame, forecast_frame


def _messages(config: Path, cluster: str) -> list[str]:
    """The InputError message of each engine (pandas, dask) on ``config``."""
    cfg = load_config(config)
    out = []
    for engine in ("pandas", "dask"):
        with pytest.raises(InputError) as err:
            run_checks(cfg, engine=engine, scheduler=cluster if engine == "dask" else None,
                       snapshot=False)
        out.append(str(err.value))
    return out


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
    pandas_message, dask_message = _messages(project.config, cluster)
    assert f"hold {2 * len(repeated)} rows that repeat" in pandas_message
    assert dask_message == pandas_message
