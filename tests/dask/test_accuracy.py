"""The accuracy stage as mergeable partials equals the pandas engine's accuracy results.

For any split of the series into shards, ``finish_accuracy(plan, merge_partials([
accuracy_partial(plan, e_i, a_i) …]))`` gives ``run_accuracy``'s results on the whole: same
checks, statuses, reasons, counts, examples (and their order), messages and details, values to
1e-9 relative. Pure pandas: no dask needed.
"""

from __future__ import annotations

import math
import pickle
from collections.abc import Sequence
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd
import pytest

from accuracy_checks.checks.accuracy import run_accuracy
from accuracy_checks.checks.judge import Thresholds
from accuracy_checks.config import Config
from accuracy_checks.dask.accuracy import (
    accuracy_partial,
    accuracy_plan,
    finish_accuracy,
    merge_partials,
)
from accuracy_checks.engine import archived_cycles
from accuracy_checks.measures.catalogue import load_config
from accuracy_checks.results import CheckResult
from accuracy_checks.sources import frames as F
from accuracy_checks.sources.load import load_inputs


def shard_codes(earlier: pd.DataFrame, actuals: pd.DataFrame, keys: list[str], n: int,
                seed: int) -> tuple[np.ndarray, np.ndarray]:
    """A random shard number (0 … n − 1) per series, for each row of both frames."""
    both = pd.concat([earlier[keys], actuals[keys]], ignore_index=True).astype(str)
    series = pd.MultiIndex.from_frame(both) if len(keys) > 1 else pd.Index(both[keys[0]])
    codes, uniques = pd.factorize(series)
    rng = np.random.default_rng(seed)
    shard_of = rng.integers(0, n, size=len(uniques))
    shard = shard_of[codes]
    return shard[:len(earlier)], shard[len(earlier):]


def by_shards(config: Config, earlier: pd.DataFrame, actuals: pd.DataFrame, n: int,
              seed: int = 0, *, book: Thresholds) -> list[CheckResult]:
    """The dask stage's results with the series split into ``n`` random shards (each shard's
    rows in the frames' order), partials merged in a shuffled tree."""
    finite = actuals[F.ACTUAL].to_numpy(dtype=np.float64, na_value=np.nan)
    periods = actuals.loc[np.isfinite(finite), F.PERIOD].unique()
    starts = earlier.groupby(F.ISSUED, sort=False)[F.PERIOD].min()
    plan = accuracy_plan(config, actual_periods=list(periods),
                         cycle_starts=dict(zip(starts.index, starts.to_numpy(), strict=True)))
    keys = list(config.forecast.keys)
    e_shard, a_shard = shard_codes(earlier, actuals, keys, n, seed)
    # each partial travels pickled, as between dask workers
    parts = [pickle.loads(pickle.dumps(accuracy_partial(
        plan, earlier.loc[e_shard == i], actuals.loc[a_shard == i]))) for i in range(n)]
    rng = np.random.default_rng(seed + 1)
    rng.shuffle(parts)  # type: ignore[arg-type]
    while len(parts) > 1:  # a tree of pairwise merges
        parts = [merge_partials(parts[i:i + 2]) for i in range(0, len(parts), 2)]
    return finish_accuracy(plan, parts[0], book=book)


def close(a: Any, b: Any, path: str) -> None:
    """``a`` equals ``b``, floats to 1e-9 relative."""
    if isinstance(a, float) and isinstance(b, float):
        if math.isnan(a) or math.isnan(b):
            assert math.isnan(a) and math.isnan(b), path
        else:
            assert a == pytest.approx(b, rel=1e-9, abs=1e-12), path
    elif isinstance(a, dict) and isinstance(b, dict):
        assert list(a) == list(b), path
        for k in a:
            close(a[k], b[k], f"{path}.{k}")
    elif isinstance(a, list | tuple) and isinstance(b, list | tuple):
        assert len(a) == len(b), path
        for i, (x, y) in enumerate(zip(a, b, strict=True)):
            close(x, y, f"{path}[{i}]")
    else:
        assert a == b, path


def assert_same(got: Sequence[CheckResult], want: Sequence[CheckResult]) -> None:
    """Same results in the same order: every field equal, numbers to 1e-9 relative, messages
    equal but for the last digits of the numbers they quote."""
    assert [(r.check, r.segment, r.lag, r.measure, r.status) for r in got] == \
        [(r.check, r.segment, r.lag, r.measure, r.status) for r in want]
    for g, w in zip(got, want, strict=True):
        gd, wd = dict(g.__dict__), dict(w.__dict__)
        if gd["message"] != wd["message"]:  # numbers worded from values equal to rounding
            assert _words(gd.pop("message")) == _words(wd.pop("message")), (g, w)
        else:
            gd.pop("message"), wd.pop("message")
        close(gd, wd, f"{w.segment}/{w.lag}/{w.measure}")


def _words(text: str) -> list[str]:
    return [w for w in text.split() if not any(ch.isdigit() for ch in w)]


@pytest.fixture(scope="module")
def demo_config(tmp_path_factory: pytest.TempPathFactory) -> Path:
    """The demo's last night: every actual in, earlier cycles archived."""
    from accuracy_checks.demo.scenario import generate_scenario
    from flows.demo_nightly import LATEST_CONFIG, latest_config_text

    out = generate_scenario(tmp_path_factory.mktemp("dask-accuracy"))
    config = out.out_dir / LATEST_CONFIG
    config.write_text(latest_config_text(out), encoding="utf-8")
    return config


#: the demo's config as written, and variants: every family this engine computes with tight
#: levels (many breaches, so many offender lists), more lags and a longer tracking window
VARIANTS = {
    "as_written": {},
    "families": {
        "  min_obs: 20\n": "  min_obs: 5\n  measures: [smape, mase, fva_naive, "
                          "fva_seasonal_naive, tracking_signal, trigg, interval_coverage, "
                          "pinball, mis, msis, error_cost]\n",
        "thresholds:\n": "costs:\n  currency: EUR\n  default: {under: 2, over: 1}\n"
                          "  segments:\n    pet-care: {under: 5, over: 1}\nthresholds:\n",
        "  default:\n": "  default:\n    smape: {warn: 5, fail: 30}\n"
                       "    error_cost: {warn: 100}\n"
                       "    mase: {warn: 0.2, fail: 0.8}\n    tracking_signal: {warn: 0.1}\n"
                       "    trigg: {warn: 0.05}\n    fva_naive: {warn: 50}\n"
                       "    mae: {warn: 1}\n    me: {warn: 0.01}\n"
                       "    interval_coverage: {warn: 1, fail: 5}\n    pinball: {warn: 1}\n"
                       "    mis: {warn: 1}\n    msis: {warn: 0.5}\n",
    },
    "lags": {
        "  lags: [1, 4]\n  window: 4\n": "  lags: [1, 2, 3, 4, 6]\n  window: 6\n"
                                          "  tracking_window: 9\n  seasonal_period: 3\n",
        "  min_obs: 20\n": "  min_obs: 1\n  offenders: 3\n  measures: [smape, mase, "
                          "tracking_signal, trigg, fva_seasonal_naive, interval_coverage, "
                          "pinball, mis, msis, error_cost]\n  coverage_test_level: 0.5\n",
        "thresholds:\n": "costs:\n  segments:\n    pet-care: {under: 5, over: 1}\n"
                          "    seasonal-plants: {under: 1, over: 3}\nthresholds:\n",
        "  default:\n": "  default:\n    rmse: {warn: 0.5}\n    sde: {warn: 0.5}\n"
                       "    mape: {warn: 0.5}\n",
    },
}


def variant_config(path: Path, name: str) -> Config:
    text = path.read_text(encoding="utf-8")
    for old, new in VARIANTS[name].items():
        assert old in text
        text = text.replace(old, new, 1)
    out = path.with_name(f"variant-{name}.yaml")
    out.write_text(text, encoding="utf-8")
    return load_config(out)


@pytest.fixture(scope="module", params=list(VARIANTS))
def demo(demo_config: Path, request: pytest.FixtureRequest
         ) -> tuple[Config, pd.DataFrame, pd.DataFrame, Thresholds, list[CheckResult]]:
    config = variant_config(demo_config, request.param)
    inputs = load_inputs(config, archive=archived_cycles(config))
    book = Thresholds(config)
    want = run_accuracy(config, inputs.earlier, inputs.actuals, book=book)
    return config, inputs.earlier, inputs.actuals, book, want


@pytest.mark.parametrize("n", [1, 2, 7])
def test_demo_split_into_shards_gives_the_pandas_results(demo: Any, n: int) -> None:
    config, earlier, actuals, book, want = demo
    assert any(r.examples for r in want)  # breaches with worst offenders are compared
    assert any(r.segment == "*" for r in want)
    got = by_shards(config, earlier, actuals, n, seed=n, book=book)
    assert_same(got, want)
