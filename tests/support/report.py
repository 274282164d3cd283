"""A multi-cycle audit store for the report and drift tests (no tests of its own).

Invented figures, recorded the way ``run_checks`` records them: each cycle's accuracy and
coverage results are judged by the config's thresholds, the real drift checks read the store
(:func:`accuracy_checks.checks.drift.drift_checks`), active waivers apply, and the run is recorded
with ``Store.record_run``.
"""

from __future__ import annotations

import uuid
from collections.abc import Sequence
from dataclasses import dataclass
from datetime import UTC, date, datetime, timedelta
from pathlib import Path

import numpy as np

from accuracy_checks.checks.drift import drift_checks
from accuracy_checks.checks.judge import Thresholds
from accuracy_checks.config import Config
from accuracy_checks.measures.catalogue import parse_config
from accuracy_checks.results import CheckResult, RunReport
from accuracy_checks.store import apply_waivers, open_store
from tests.support.configs import flow, levels, small_config

XSS = "<script>alert(1)</script>"
#: segment names no report may trip over: markup, entities, quotes of both kinds, non-ASCII
#: letters and symbols, an emoji, a tab, a C1 control, a non-character, a long name
HOSTILE = [
    XSS,
    'Gärten & Böden "drinnen"',
    "it's <b>bold</b> &amp; &lt;not&gt; ]]> <!-- x -->",
    "Ελληνικά · 日本語 · عربي · 🌱",
    "tab\there \x85 \x9b \ufdd0 \ufffe end",
    "a very long segment name " + "x" * 80,
]
FIRST_CYCLE = date(2025, 1, 6)  # a Monday



@dataclass
class BuiltStore:
    url: str
    config: Config
    cycles: list[str]
    segments: list[str]
    reports: list[RunReport]


def cycle_label(k: int) -> str:
    return (FIRST_CYCLE + timedelta(weeks=k)).isoformat()


def segment_names(n: int, *, xss: bool = False) -> list[str]:
    names = [f"seg-{i:03d}" for i in range(n)]
    if xss:
        names[-1] = XSS
    return names


def accuracy_results(segments: Sequence[str], k: int, rng: np.random.Generator,
                     book: Thresholds, *, step_segment: str | None,
                     step_from: int) -> list[CheckResult]:
    """WAPE and bias % at lags 1 and 4 per segment and "*", with worst-series examples on
    breaches. ``step_segment`` gets 15 points more WAPE and +9 % bias from ``step_from``."""
    out = []
    for i, seg in enumerate(["*", *segments]):
        for lag in (1, 4):
            step = seg == step_segment and k >= step_from
            wape = 18 + (i % 7) + 1.0 * lag + rng.normal(0, 1.2) + (15 if step else 0)
            bias = rng.normal(0, 1.5) + (9 if step else 0) + (3 if i % 11 == 3 else 0)
            for measure, value, unit in (("wape", wape, "%"), ("bias_pct", bias, "%")):
                j = book.judge(measure, seg, value)
                examples = []
                if j.status in ("warn", "fail"):
                    examples = [{"store": f"S{s}", "product": f"P{s * 7:04d}", "n_obs": 4,
                                 "error": 25.0 - s, "abs_error": 30.0 - s,
                                 "share_of_abs_error_pct": 9.0 - s,
                                 "share_of_bias_pct": 12.0 - s} for s in range(3)]
                out.append(CheckResult(
                    "accuracy", j.status, segment=seg, lag=lag, measure=measure,
                    value=float(value), warn=j.warn, fail=j.fail, n_series=40, n_obs=160,
                    unit=unit, message=f"{measure} of {seg} at lag {lag}", examples=examples))
    return out


def coverage_results(segments: Sequence[str], k: int, book: Thresholds) -> list[CheckResult]:
    out = []
    for i, seg in enumerate(["*", *segments]):
        missing = 2.5 if (k % 9 == 4 and i % 5 == 1) else 0.0
        j = book.judge("missing_series_pct", seg, missing)
        out.append(CheckResult(
            "coverage.missing_series", j.status, segment=seg, measure="missing_series_pct",
            value=missing, warn=j.warn, fail=j.fail, n_series=int(missing), unit="%",
            message=f"{missing:g} % of active series in {seg} have no forecast",
            examples=[{"store": "S06", "product": "P0001", "segment": seg}] if missing else []))
    return out


def build_store(root: Path, *, n_segments: int = 5, n_cycles: int = 12, xss: bool = False,
                seed: int = 11, drift_cycles: int = 6, min_history: int = 4,
                sustained: int = 3, step_from: int | None = None,
                waive: tuple[str, str, int] | None = None,
                names: Sequence[str] | None = None,
                label: str = "nightly-{k}") -> BuiltStore:
    """Record ``n_cycles`` weekly runs of ``n_segments`` segments into an SQLite store under
    ``root``. ``waive`` = (segment, measure, from cycle index): a waiver granted before that
    cycle's run (until 2099). ``names`` replaces the segment names (``n_segments`` is then
    their number); ``label`` is each run's pipeline label (``{k}``: the cycle's index)."""
    root.mkdir(parents=True, exist_ok=True)
    url = f"sqlite:///{root / 'audit.db'}"
    text = small_config(
        store=url, evaluation=flow({"lags": "[1, 4]"}),
        thresholds={"default": {"wape": levels(30, 45), "bias_pct": levels(5, 10)}},
        drift=flow({"cycles": drift_cycles, "min_history": min_history,
                    "sustained_cycles": sustained}))
    config = parse_config(text, source=root / "accuracy-checks.yaml")
    book = Thresholds(config)
    rng = np.random.default_rng(seed)
    segments = list(names) if names is not None else segment_names(n_segments, xss=xss)
    step_seg = segments[1] if len(segments) > 1 else None
    step_at = step_from if step_from is not None else max(n_cycles - 4, 1)
    cycles = [cycle_label(k) for k in range(n_cycles)]
    reports = []
    with open_store(url) as store:
        for k, cycle in enumerate(cycles):
            if waive is not None and k == waive[2]:
                store.waive(segment=waive[0], measure=waive[1], until=date(2099, 12, 31),
                            reason=f"known change in {waive[0]}", by="ana")
            results = [*coverage_results(segments, k, book),
                       *accuracy_results(segments, k, rng, book, step_segment=step_seg,
                                         step_from=step_at)]
            results += drift_checks(config, results, store, cycle=cycle)
            results = apply_waivers(results, store.active_waivers())
            started = datetime(2025, 1, 6, 6, tzinfo=UTC) + timedelta(weeks=k)
            report = RunReport(run_id=uuid.uuid4().hex, cycle=cycle, attempt=None,
                               results=results, started_at=started.isoformat(),
                               finished_at=(started + timedelta(minutes=3)).isoformat(),
                               label=label.format(k=k))
            store.record_run(report)
            reports.append(report)
    return BuiltStore(url, config, cycles, segments, reports)
