"""Bad input is normal input: randomly damaged forecast files never crash the gate.

Whatever the damage (a dropped column, text in a number column, garbage dates, blank keys,
repeated or missing rows, NaN/inf/negative values, crossed quantiles, a second issue date,
numeric-looking keys with leading zeros, a date in another format, non-finite and huge values
written as text, a column named twice, a reserved segment name), the CLI ends with exit code
0, 1 or 2 — a verdict or one clear paragraph — never an internal error (3) or a traceback.
And keys are text: ``007`` and ``7`` are always two series.
"""

from __future__ import annotations

import json
from collections.abc import Callable

import numpy as np
import pandas as pd
import pytest
from hypothesis import HealthCheck, example, given, settings
from hypothesis import strategies as st

from accuracy_checks.cli.main import main
from tests.support.damage import (
    ACTUALS_DAMAGE,
    DAMAGE,
    damaged_by,
    damaged_forecast,
    damaged_project,
)
from tests.support.project import CURRENT, EARLIER, PRODUCTS, Project, actuals_frame, forecast_frame


def assert_verdict_or_message(project: Project, capsys: pytest.CaptureFixture[str],
                              kinds: list[str]) -> None:
    """The gate on ``project`` ends with a verdict (0, 1) or one line of error (2), never
    an internal error or a traceback."""
    code = main(["run", "--config", str(project.config), "-q", "--no-color", "--no-snapshot"])
    out = capsys.readouterr()
    assert code in (0, 1, 2), (kinds, out.err)
    assert "Traceback" not in out.err and "internal error" not in out.err
    if code == 2:
        assert out.err.startswith("accuracy-checks: error: ") and out.err.count("\n") == 1


@damaged_by(DAMAGE)
def test_damaged_forecasts_get_a_verdict_or_a_clear_message(
        make_project: Callable[..., Project], capsys: pytest.CaptureFixture[str],
        kinds: list[str], seed: int) -> None:
    rng = np.random.default_rng(seed)
    frame = damaged_forecast(kinds, rng)
    project = make_project(forecast=frame)
    assert_verdict_or_message(project, capsys, kinds)


@example(kinds=["mapping_repeated_header", "mapping_repeat"], seed=0)  # once broke the helper
@damaged_by(ACTUALS_DAMAGE)
def test_damaged_actuals_and_mappings_get_a_verdict_or_a_clear_message(
        make_project: Callable[..., Project], capsys: pytest.CaptureFixture[str],
        kinds: list[str], seed: int) -> None:
    rng = np.random.default_rng(seed)
    project = damaged_project(make_project, kinds, rng)
    assert_verdict_or_message(project, capsys, kinds)


NUMERIC_LOOKING = st.one_of(
    st.from_regex(r"0{0,3}[1-9][0-9]{0,2}", fullmatch=True),
    st.sampled_from(["7.0", "1e3", "0", "00", "NA", "nan", "None", "inf", "TRUE", "-7"]),
)


@settings(max_examples=12, deadline=None,
          suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(names=st.lists(NUMERIC_LOOKING, min_size=3, max_size=3, unique=True),
       stores=st.lists(st.from_regex(r"0{0,2}[1-9]", fullmatch=True), min_size=2, max_size=2,
                       unique=True))
def test_keys_that_look_like_numbers_are_counted_as_written(
        make_project: Callable[..., Project], capsys: pytest.CaptureFixture[str],
        names: list[str], stores: list[str]) -> None:
    """``007``, ``07`` and ``7`` (or ``NA`` and ``nan``) are different series everywhere."""
    product = dict(zip(PRODUCTS, names, strict=True))
    store = dict(zip(["S1", "S2"], stores, strict=True))

    def rename(frame: pd.DataFrame) -> pd.DataFrame:
        return frame.assign(product=frame["product"].map(product),
                            store=frame["store"].map(store))

    earlier = pd.concat([forecast_frame(d) for d in EARLIER], ignore_index=True)
    project = make_project(forecast=rename(forecast_frame(CURRENT)), earlier=rename(earlier),
                           actuals=rename(actuals_frame(CURRENT)))
    project.write("products.csv", pd.DataFrame({"product": names,
                                                "category": list(PRODUCTS.values())}))
    out = project.root / "r.json"
    code = main(["run", "--config", str(project.config), "-q", "--no-color", "--no-snapshot",
                 "--json", str(out)])
    err = capsys.readouterr().err
    assert code == 0, (names, stores, err)
    doc = json.loads(out.read_text())
    assert doc["inputs"]["forecast"]["series"] == 6, (names, stores)
    wape = {r["segment"]: r["n_series"] for r in doc["results"]
            if r["check"] == "accuracy" and r["measure"] == "wape"}
    assert wape == {"*": 6, "tools": 2, "plants": 4}, (names, stores)
