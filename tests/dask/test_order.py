"""The dask engine's examples and offender ties come out in the pandas engine's order when the
tied series and the offending rows sit in different shards, with key categories that are not
in alphabetical order of appearance (a real multi-process local cluster, both engines)."""

from __future__ import annotations

from collections.abc import Callable

import numpy as np
import pandas as pd

from tests.dask.support import both, compare
from tests.support.project import CURRENT, EARLIER, HORIZON, Project, weeks

#: stores in an order of appearance that is not alphabetical (nor its reverse)
STORES = ["S7", "S10", "S2", "A3", "S1", "Z0", "B9", "S05", "M4", "a1", "S3", "K8"]
PRODUCTS = ["P3", "P1", "P2"]


#: one series of a segment no other series has ("fruit", first in the segments' order): the
#: shard that holds it numbers the segments apart from the others
LONE = ("K8", "P4")


def _series() -> list[tuple[str, str]]:
    return [*((s, p) for s in STORES for p in PRODUCTS), LONE]


def _forecast(issued: pd.Timestamp) -> pd.DataFrame:
    """Every series forecast 100 each week: the same error everywhere (offender ties)."""
    rows = [{"store": s, "product": p, "week": w.date().isoformat(), "units": 100.0,
             "p10": 80.0, "p90": 120.0, "issued_on": issued.date().isoformat()}
            for s, p in _series() for w in weeks(issued, HORIZON)]
    return pd.DataFrame(rows)


def _actuals() -> pd.DataFrame:
    first = EARLIER[0] - pd.Timedelta(weeks=6)
    rows = [{"store": s, "product": p, "week": w.date().isoformat(), "units_sold": 90.0}
            for s, p in reversed(_series())
            for w in pd.date_range(first, CURRENT - pd.Timedelta(weeks=1), freq="W-MON")]
    return pd.DataFrame(rows)


def test_ties_and_examples_across_shards(make_project: Callable[..., Project],
                                         cluster: str) -> None:
    forecast = _forecast(CURRENT)
    # offending rows spread over every series (so over every shard), in file order
    bad = np.arange(3, len(forecast), 7)
    forecast.loc[bad[::2], "units"] = np.nan
    forecast.loc[bad[1::2], "units"] = -1.0
    forecast.loc[bad[1::3], "p10"] = 500.0  # crossing quantiles
    forecast = forecast.loc[~forecast["store"].isin(["B9", "S3"])]  # missing series
    extra = _forecast(CURRENT).loc[lambda f: f["store"].isin(["S7", "a1"])].assign(
        store=lambda f: "X" + f["store"])  # unexpected series
    gaps = forecast.index[forecast["week"] == weeks(CURRENT, HORIZON)[-1].date().isoformat()]
    forecast = pd.concat([forecast.drop(index=gaps[::3]), extra], ignore_index=True)
    earlier = pd.concat([_forecast(d) for d in EARLIER], ignore_index=True)
    project = make_project(forecast=forecast, earlier=earlier, actuals=_actuals())
    project.write("products.csv", pd.DataFrame({"product": ["P1", "P2", "P3", "P4"],
                                                "category": ["tools", "plants", "plants",
                                                             "fruit"]}))
    pandas_report, dask_report = both(project.config, cluster)
    by_check = {(r.check, r.segment): r for r in pandas_report.results
                if r.check != "accuracy" or r.measure == "bias_pct"}
    bias = by_check[("accuracy", "*")]
    assert bias.status == "fail" and len(bias.examples) >= 5, bias
    assert len({e["error"] for e in bias.examples}) == 1  # ties: the order is the tie-break
    # the pandas engine's tie-break: the key labels in sorted order (the categories' order)
    labels = [(e["store"], e["product"]) for e in bias.examples]
    assert labels == sorted(labels) and labels[0] == ("A3", "P1")
    assert by_check[("accuracy", "fruit")].status == "fail"
    for name in ("coverage.missing_series", "coverage.horizon", "output.invalid_values",
                 "output.negative_values", "output.quantile_order"):
        assert len(by_check[(name, "*")].examples) > 3, name
    compare(pandas_report, dask_report)
