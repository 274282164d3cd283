"""Builders of the coverage checks' tests (tests/checks/test_coverage.py, test_horizon.py):
canonical forecast and actuals frames of a few series, a threshold book from a small config,
and :func:`check`, which runs :func:`~accuracy_checks.checks.coverage.coverage_checks` on them.
"""

from __future__ import annotations

from collections.abc import Iterable, Sequence

import pandas as pd

from accuracy_checks.checks.coverage import coverage_checks
from accuracy_checks.checks.judge import Thresholds
from accuracy_checks.measures.catalogue import parse_config
from accuracy_checks.results import CheckResult
from tests.support.configs import small_config

KEYS = ["store", "product"]
CYCLE = pd.Timestamp("2026-03-02")  # a Monday: the first forecast week
ISSUED = pd.Timestamp("2026-02-27")
Series = tuple[str, str]


def book(
    thresholds: str = "  default: {}", *, frequency: str = "W-MON", horizon: int = 3
) -> Thresholds:
    """The thresholds of a small config; ``thresholds`` is the YAML text of its block."""
    text = small_config(frequency=frequency, horizon=horizon) + f"thresholds:\n{thresholds}\n"
    return Thresholds(parse_config(text))


def forecast(
    series: dict[Series, str],
    *,
    periods: Iterable[pd.Timestamp] | None = None,
    per_series: dict[Series, list[str]] | None = None,
) -> pd.DataFrame:
    """Canonical forecast rows: every series over ``periods`` (3 weeks from CYCLE), unless
    ``per_series`` lists its dates."""
    default = list(
        periods if periods is not None else pd.date_range(CYCLE, periods=3, freq="W-MON")
    )
    rows = []
    for key, segment in series.items():
        dates = [pd.Timestamp(d) for d in (per_series or {}).get(key, default)]
        rows += [
            {
                "store": key[0],
                "product": key[1],
                "period": d,
                "issued": ISSUED,
                "forecast": 1.0,
                "segment": segment,
            }
            for d in dates
        ]
    return _typed(
        pd.DataFrame(rows, columns=["store", "product", "period", "issued", "forecast", "segment"])
    )


def actuals(rows: Sequence[tuple[str, str, str, float | None, str]]) -> pd.DataFrame:
    """Canonical actuals from (store, product, week, actual, segment)."""
    out = pd.DataFrame(rows, columns=["store", "product", "period", "actual", "segment"])
    out["period"] = pd.to_datetime(out["period"])
    out["actual"] = out["actual"].astype("float64")
    return _typed(out)


def _typed(f: pd.DataFrame) -> pd.DataFrame:
    for c in ["store", "product", "segment"]:
        f[c] = f[c].astype("str")
    f["period"] = f["period"].astype("datetime64[us]")
    return f


def weekly_actuals(series: dict[Series, str], weeks: int = 4, value: float = 10.0) -> pd.DataFrame:
    """Every series has an actual in each of the ``weeks`` weeks before CYCLE."""
    dates = pd.date_range(end=CYCLE - pd.Timedelta(days=7), periods=weeks, freq="W-MON")
    return actuals(
        [(s, p, d.isoformat(), value, seg) for (s, p), seg in series.items() for d in dates]
    )


def check(
    fc: pd.DataFrame,
    act: pd.DataFrame,
    *,
    b: Thresholds | None = None,
    frequency: str = "W-MON",
    horizon: int = 3,
    active_periods: int = 4,
    **kw: object,
) -> list[CheckResult]:
    return coverage_checks(
        fc,
        act,
        keys=KEYS,
        frequency=frequency,
        horizon=horizon,
        active_periods=active_periods,
        book=b or book(frequency=frequency, horizon=horizon),
        **kw,  # type: ignore[arg-type]
    )


def pick(results: list[CheckResult], name: str) -> dict[str, CheckResult]:
    return {r.segment: r for r in results if r.check == name}  # type: ignore[misc]


FOUR = {
    ("S1", "P1"): "tools",
    ("S1", "P2"): "tools",
    ("S2", "P1"): "plants",
    ("S2", "P2"): "plants",
}
