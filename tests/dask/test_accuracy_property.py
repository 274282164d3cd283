"""Property: for random canonical frames and any split of their series into shards, the dask
accuracy stage (plan → partials → merge → finish) gives ``run_accuracy``'s results.

The frames are small and hard: integer values (ties between offenders, ordered by the key
categories' codes, which are deliberately not in label order), missing and infinite forecasts,
zero and negative actuals, crossed quantiles, series without actuals, cycles that reach the
window at some lags only, one segment "*" or several.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from hypothesis import HealthCheck, Phase, given, settings
from hypothesis import strategies as st

from accuracy_checks.checks.accuracy import run_accuracy
from accuracy_checks.checks.judge import Thresholds
from accuracy_checks.config import Config
from accuracy_checks.dask.accuracy import accuracy_plan
from accuracy_checks.errors import ConfigError
from accuracy_checks.measures.catalogue import parse_config
from tests.dask.test_accuracy import assert_same, by_shards

MEASURES = ("[smape, mase, fva_naive, fva_seasonal_naive, tracking_signal, trigg, "
            "interval_coverage, pinball, mis, msis]")
#: error_cost apart, without the tracking measures: the pandas engine's error_cost raises on
#: an evaluation window without rows when the tracking window has some
COST = "[smape, mase, error_cost]"


def config(segments: bool, offenders: int, measures: str = MEASURES) -> Config:
    text = (
        "version: 1\n"
        "forecast: {path: f.csv, keys: [sku], period: p, value: v, issued: i,"
        " quantiles: {0.1: p10, 0.9: p90}}\n"
        "actuals: {path: a.csv, period: p, value: v}\n"
        "frequency: D\nhorizon: 4\n"
        f"evaluation: {{lags: [1, 2, 3], window: 3, tracking_window: 5, seasonal_period: 2,"
        f" min_obs: 1, offenders: {offenders}, coverage_test_level: 0.9,"
        f" measures: {measures}}}\n"
        "costs: {default: {under: 3, over: 1}, segments: {b: {under: 1, over: 1}}}\n"
        "thresholds:\n"
        "  default: {me: {warn: 0.1}, bias_pct: {warn: 1}, wape: {warn: 1, fail: 50},"
        " mape: {warn: 1}, rmse: {warn: 0.1}, sde: {warn: 0.1}, smape: {warn: 1},"
        " mase: {warn: 0.01}, "
        + ("error_cost: {warn: 1}}\n" if measures == COST else
           "tracking_signal: {warn: 0.01}, trigg: {warn: 0.01}, fva_naive: {warn: 90},"
           " interval_coverage: {warn: 1}, pinball: {warn: 0.1}, mis: {warn: 0.1},"
           " msis: {warn: 0.01}}\n")
        + ("  segments: {a: {wape: {warn: 200}}}\n" if segments else "")
    )
    return parse_config(text, source=Path("/x/c.yaml"))


values = st.one_of(st.integers(-3, 12).map(float), st.just(0.0), st.just(np.nan))


@st.composite
def frames(draw: st.DrawFn) -> tuple[pd.DataFrame, pd.DataFrame, bool]:
    n_series = draw(st.integers(1, 7))
    names = [f"s{i}" for i in range(n_series)]
    order = draw(st.permutations(names))  # category codes not in label order
    seg_names = draw(st.sampled_from([["*"], ["a"], ["a", "b"], ["a", "b", "c"]]))
    segment_of = {s: draw(st.sampled_from(seg_names)) for s in names}
    day0 = pd.Timestamp("2026-01-01")
    issues = sorted(draw(st.sets(st.integers(0, 8), min_size=1, max_size=4)))
    rows = []
    for issue in issues:
        start = issue + draw(st.integers(0, 1))
        for s in names:
            for step in range(4):
                if not draw(st.booleans()) and step:
                    continue
                f = draw(st.one_of(values, st.just(np.inf)))
                low, high = draw(st.integers(0, 4)), draw(st.integers(-1, 4))
                rows.append((s, day0 + pd.Timedelta(days=start + step),
                             day0 + pd.Timedelta(days=issue), f, f - low, f + high))
    earlier = pd.DataFrame(rows, columns=["sku", "period", "issued", "forecast", "q0.1",
                                          "q0.9"])
    acts = []
    with_actuals = [s for s in names if draw(st.integers(0, 5))]  # some series have none
    for s in with_actuals:
        for day in range(0, 14):
            if draw(st.integers(0, 3)):
                acts.append((s, day0 + pd.Timedelta(days=day), draw(values)))
    actuals = pd.DataFrame(acts, columns=["sku", "period", "actual"])
    for frame in (earlier, actuals):
        frame["sku"] = pd.Categorical(frame["sku"], categories=list(order))
        frame["segment"] = pd.Categorical([segment_of[s] for s in frame["sku"].astype(str)],
                                          categories=seg_names)
    return earlier, actuals, seg_names != ["*"]


# no shrinking: shrinking these frames takes minutes on a shared machine; a failure prints the
# example as drawn
@settings(max_examples=60, deadline=None, phases=[Phase.explicit, Phase.reuse, Phase.generate],
          suppress_health_check=[HealthCheck.too_slow, HealthCheck.data_too_large])
@given(got=frames(), n=st.integers(1, 5), seed=st.integers(0, 1000),
       offenders=st.integers(0, 3), cost=st.booleans())
def test_random_frames_in_random_shards_give_the_pandas_results(
        got: tuple[pd.DataFrame, pd.DataFrame, bool], n: int, seed: int,
        offenders: int, cost: bool) -> None:
    earlier, actuals, segments = got
    cfg = config(segments, offenders, COST if cost else MEASURES)
    book = Thresholds(cfg)
    want = run_accuracy(cfg, earlier, actuals, book=book)
    assert_same(by_shards(cfg, earlier, actuals, n, seed, book=book), want)


def test_nothing_to_evaluate_gives_the_pandas_no_data_results() -> None:
    cfg = config(True, 2)
    book = Thresholds(cfg)
    earlier = pd.DataFrame({"sku": pd.Categorical(["s0"]), "period": [pd.Timestamp("2026-01-01")],
                            "issued": [pd.Timestamp("2026-01-01")], "forecast": [1.0],
                            "q0.1": [0.0], "q0.9": [2.0],
                            "segment": pd.Categorical(["a"])})
    for e, a in ((earlier.iloc[:0], earlier.iloc[:0].assign(actual=1.0)[
            ["sku", "period", "actual", "segment"]]),
                 (earlier, earlier.assign(actual=np.nan)[["sku", "period", "actual",
                                                          "segment"]])):
        want = run_accuracy(cfg, e, a, book=book)
        assert want
        assert_same(by_shards(cfg, e, a, 3, 0, book=book), want)


def test_a_measure_without_a_mergeable_form_is_refused_naming_the_pandas_engine(
        monkeypatch: pytest.MonkeyPatch) -> None:
    import accuracy_checks.dask.accuracy as stage

    monkeypatch.setattr(stage, "AVAILABLE", stage.AVAILABLE - {"trigg"})
    with pytest.raises(ConfigError, match=r"'trigg' is not yet available on the dask engine"
                       r".*engine: pandas"):
        accuracy_plan(config(True, 2), actual_periods=[], cycle_starts={})


def test_shards_numbering_segments_apart_are_renumbered_by_one_order() -> None:
    """Shards rank their segments by their own (sorted) categories: parts that number a
    segment apart are renumbered by the labels' order (``unassigned`` last) before they
    merge, so each group keeps one identity."""
    import dataclasses

    from accuracy_checks.dask.accuracy import AccuracyPartial, merge_partials
    from accuracy_checks.dask.accuracy_tables import GROUP_KEYS

    def sums(ranks: dict[str, int]) -> pd.DataFrame:
        return pd.DataFrame([["evaluation", "segment", 1, r, s] for s, r in ranks.items()],
                            columns=GROUP_KEYS).assign(n=1)

    one = AccuracyPartial(n_rows=1, segments={"a": 0, "unassigned": 1, "c": 2})
    one = dataclasses.replace(one, sums=sums(one.segments))
    other = AccuracyPartial(n_rows=1, segments={"b": 0, "c": 1})
    other = dataclasses.replace(other, sums=sums(other.segments))
    merged = merge_partials([one, other])
    assert merged.segments == {"a": 0, "b": 1, "c": 2, "unassigned": 3}
    assert merged.sums is not None
    got = merged.sums.sort_values("seg_rank")
    assert got["segment"].tolist() == ["a", "b", "c", "unassigned"]
    assert got["n"].tolist() == [1, 1, 2, 1]


def test_a_plan_without_a_cycle_start_is_refused_not_guessed() -> None:
    from accuracy_checks.dask.accuracy import accuracy_partial

    cfg = config(False, 2)
    day = pd.Timestamp("2026-01-05")
    earlier = pd.DataFrame({"sku": pd.Categorical(["s0"]), "period": [day], "issued": [day],
                            "forecast": [1.0], "q0.1": [0.0], "q0.9": [2.0],
                            "segment": pd.Categorical(["*"])})
    actuals = earlier[["sku", "period", "segment"]].assign(actual=1.0)
    plan = accuracy_plan(cfg, actual_periods=[day], cycle_starts={})
    with pytest.raises(ValueError, match=r"cycle_starts lack the issue date\(s\) \['2026-01-05'\]"):
        accuracy_partial(plan, earlier, actuals)


def test_a_plugin_measure_is_refused_naming_its_origin(monkeypatch: pytest.MonkeyPatch) -> None:
    import dataclasses

    import accuracy_checks.dask.accuracy as stage
    from accuracy_checks.measures.registry import get_measure

    def plugged(measure_id: str):  # type: ignore[no-untyped-def]
        found = get_measure(measure_id)
        return (dataclasses.replace(found, origin="plugin mase = acme:mase")
                if measure_id == "mase" else found)

    monkeypatch.setattr(stage, "get_measure", plugged)
    with pytest.raises(ConfigError, match=r"'mase' \(it comes from plugin mase = acme:mase\)"):
        accuracy_plan(config(True, 2), actual_periods=[], cycle_starts={})
