"""The fan-out path judges and words its figures as the single-process gate does.

:func:`~accuracy_checks.prefect.fanout.judge_stats` calls the check's own
:func:`~accuracy_checks.checks.judge.judge_figure`, so each fanned-out result carries the CLI's
status, reason, levels, message and details (the worst offenders of a breach and the
``cycles`` of segment ``"*"`` aside: the fan-out has sums, not rows, and reads no archive).
The figures themselves equal the single-process ones: bit for bit per segment, to rounding
for segment ``"*"`` (merged from the segments' sums).
"""

from __future__ import annotations

from pathlib import Path
from typing import Any

import pytest

from accuracy_checks.config import Config
from accuracy_checks.engine import archived_cycles, evaluate
from accuracy_checks.measures.catalogue import load_config
from accuracy_checks.prefect.fanout import (
    evaluation_rows,
    judge_stats,
    merge_partition_stats,
    partition_stats,
    segment_partitions,
)
from accuracy_checks.sources.load import load_inputs


@pytest.fixture(scope="module")
def demo_config(tmp_path_factory: pytest.TempPathFactory) -> Path:
    """The demo's last night: every actual in, earlier cycles archived."""
    from accuracy_checks.demo.scenario import generate_scenario
    from flows.demo_nightly import LATEST_CONFIG, latest_config_text

    out = generate_scenario(tmp_path_factory.mktemp("fanout"))
    config = out.out_dir / LATEST_CONFIG
    config.write_text(latest_config_text(out), encoding="utf-8")
    return config


def single_process(config: Config) -> dict[tuple[str | None, int | None, str | None], Any]:
    """The single-process gate's accuracy results of ``config``, by (segment, lag, measure)."""
    results = evaluate(config, load_inputs(config, archive=archived_cycles(config)))
    return {(r.segment, r.lag, r.measure): r for r in results if r.check == "accuracy"}


@pytest.mark.parametrize("n_parts", [1, 2, 7])
def test_fanned_out_statistics_equal_the_single_process_figures(demo_config: Path,
                                                                n_parts: int) -> None:
    config = load_config(demo_config)
    rows = evaluation_rows(config)
    parts = segment_partitions(rows.frame, n_parts)
    assert len(parts) == min(n_parts, 5)  # five demo segments
    assert sum(map(len, parts)) == len(rows.frame)
    for part in parts:  # whole segments only
        assert not set(part["segment"].astype(str)) & set().union(
            *(set(p["segment"].astype(str)) for p in parts if p is not part))
    stats = merge_partition_stats([partition_stats(p, rows.keys) for p in parts])
    fanned = judge_stats(stats, config, window=rows.window)
    reference = single_process(config)
    assert len(fanned) == 7 * 6 * 2  # core measures × (5 segments + "*") × lags 1 and 4
    assert {r.status for r in fanned} >= {"pass", "fail"}
    for r in fanned:
        ref = reference[(r.segment, r.lag, r.measure)]
        assert (r.status, r.n_obs, r.n_series, r.warn, r.fail, r.reason) == (
            ref.status, ref.n_obs, ref.n_series, ref.warn, ref.fail, ref.reason), r
        if r.segment != "*":  # the same rows in the same order: bit for bit
            assert r.value == ref.value, r
        elif ref.value is None:
            assert r.value is None
        else:  # merged from the segments (parallel variance formula): to rounding
            assert r.value == pytest.approx(ref.value, rel=1e-12, abs=1e-12), r


def test_fanned_out_results_read_as_the_clis(demo_config: Path) -> None:
    config = load_config(demo_config)
    single = single_process(config)
    rows = evaluation_rows(config)
    stats = merge_partition_stats([partition_stats(p, rows.keys)
                                   for p in segment_partitions(rows.frame, 3)])
    fanned = judge_stats(stats, config, window=rows.window)
    assert fanned and {r.status for r in fanned} >= {"pass", "fail"}
    assert any("beyond the fail level" in r.message for r in fanned)
    for r in fanned:
        ref = single[(r.segment, r.lag, r.measure)]
        assert (r.status, r.reason, r.warn, r.fail) == (
            ref.status, ref.reason, ref.warn, ref.fail), r
        # the CLI adds the worst offenders of a breach (it has the rows; the fan-out has sums)
        assert ref.message == r.message or (
            ref.examples and ref.message.startswith(f"{r.message} Worst series: ")), r
        ref_details = {k: v for k, v in ref.details.items() if k != "cycles"}
        assert r.details.keys() == ref_details.keys(), r
        if r.segment != "*":  # the same rows in the same order: bit for bit
            assert r.details == ref_details, r


def test_too_few_rows_read_as_the_clis(demo_config: Path) -> None:
    config = load_config(demo_config)
    config = config.model_copy(update={"evaluation": config.evaluation.model_copy(
        update={"min_obs": 10**9})})
    single = single_process(config)
    rows = evaluation_rows(config)
    fanned = judge_stats(merge_partition_stats([partition_stats(rows.frame, rows.keys)]),
                         config, window=rows.window)
    assert {r.reason for r in fanned} == {"too_few_rows"}
    for r in fanned:
        assert r.message == single[(r.segment, r.lag, r.measure)].message
