"""Builders of the output checks' tests (tests/checks/test_output.py, test_output_schema.py):
a clean canonical forecast frame of a few series and one with negative values."""

from __future__ import annotations

import pandas as pd

KEYS = ["store", "product"]
QCOLS = ["q0.1", "q0.9"]
ISSUED = pd.Timestamp("2026-02-27")


def frame(
    series: dict[tuple[str, str], str] | None = None,
    *,
    periods: int = 3,
    start: str = "2026-03-02",
    freq: str = "W-MON",
) -> pd.DataFrame:
    """A clean canonical forecast frame: each series × ``periods`` periods."""
    series = series or {("S1", "P1"): "tools", ("S1", "P2"): "plants", ("S2", "P1"): "tools"}
    dates = pd.date_range(start, periods=periods, freq=freq)
    rows = []
    for i, ((store, product), segment) in enumerate(series.items()):
        for j, d in enumerate(dates):
            f = 10.0 * (i + 1) + j
            rows.append(
                {
                    "store": store,
                    "product": product,
                    "period": d,
                    "issued": ISSUED,
                    "forecast": f,
                    "q0.1": f * 0.8,
                    "q0.9": f * 1.2,
                    "segment": segment,
                }
            )
    out = pd.DataFrame(rows)
    for c in ["store", "product", "segment"]:
        out[c] = out[c].astype("str")
    return out


def negative_frame() -> pd.DataFrame:
    """:func:`frame` with negative values in 2 rows: one of segment tools, one of plants."""
    f = frame()
    f.loc[0, "forecast"] = -1.0  # tools
    f.loc[0, "q0.1"] = -2.0  # same row
    f.loc[3, "q0.1"] = -0.5  # plants
    return f
