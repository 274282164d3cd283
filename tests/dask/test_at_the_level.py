"""A figure exactly at its level is not beyond it, whatever the last bit of its sums.

The forecasts of the earlier cycles are 110 % (or 90 %) of the actuals, so the bias is exactly
−10 % (or +10 %): the configured fail level. In binary arithmetic the sums of the 110 % case
give −10.000000000000004 (depending on the order of summing: the dask engine sums per shard);
both engines must judge it ``warn`` — beyond the warn level 5, at the fail level 10, not beyond
it (docs/checks.md: values are compared at 12 significant digits) — and word it alike.
"""

from __future__ import annotations

from collections.abc import Callable

import pandas as pd
import pytest

from tests.dask.support import both, compare
from tests.support.project import EARLIER, Project, forecast_frame


@pytest.mark.parametrize("ratio", [1.1, 0.9])
def test_a_bias_exactly_at_the_fail_level_is_a_warning_on_both_engines(
        make_project: Callable[..., Project], cluster: str, ratio: float) -> None:
    earlier = pd.concat([forecast_frame(d, bias=ratio) for d in EARLIER], ignore_index=True)
    project = make_project(earlier=earlier)
    pandas, dask = both(project.config, cluster)
    compare(pandas, dask)
    bias = [r for r in pandas.results if r.measure == "bias_pct" and r.check == "accuracy"]
    assert bias and all(abs(abs(r.value) - 10.0) < 1e-9 for r in bias)  # ±10 % in reals
    assert {r.status for r in bias} == {"warn"}
