"""The warehouse demo (:mod:`accuracy_checks.demo.warehouse`): the scenario in a DuckDB file, the
gate run from SQL, and the same figures as the same inputs read from the CSV files.

The reference is the project's own file path (not an outside source): every result of the run
from SQL must equal the run of the same cycle from the scenario's CSV files — status, counts,
levels, reason, examples, message, value to 1e-9.
"""

from __future__ import annotations

import math
from pathlib import Path

from accuracy_checks.cli.main import main
from accuracy_checks.demo.warehouse import WAREHOUSE_CONFIG, WAREHOUSE_FILE, run_warehouse_demo
from accuracy_checks.engine import run_checks
from accuracy_checks.measures.catalogue import load_config


def _csv_twin(out: Path) -> Path:
    """A config reading the warehouse run's inputs from the scenario's CSV files."""
    text = (out / WAREHOUSE_CONFIG).read_text(encoding="utf-8")
    last = sorted((out / "data" / "forecasts").iterdir())[-1].relative_to(out).as_posix()
    lines = []
    for line in text.splitlines():
        if "query: \"select * from forecasts where issued_on = " in line:
            line = f"  path: {last}"
        elif "table: actuals" in line:
            line = "  path: data/actuals.csv"
        elif line.startswith("history:"):
            line = "history: [data/earlier_forecasts.csv, data/forecasts]"
        elif "table: products" in line:
            line = "  mapping: data/products.csv"
        lines.append(line.replace(".accuracy_checks-warehouse", ".accuracy_checks-csv"))
    path = out / "csv-twin.yaml"
    path.write_text("\n".join(lines) + "\n", encoding="utf-8")
    return path


def test_the_gate_from_sql_gives_the_csv_files_figures(tmp_path: Path) -> None:
    lines: list[str] = []
    report = run_warehouse_demo(tmp_path, echo=lines.append)
    assert (tmp_path / WAREHOUSE_FILE).is_file()
    assert report.status == "fail"  # the planted problems of the final cycle
    assert any("read from SQL: FAIL" in line for line in lines)

    twin = run_checks(load_config(_csv_twin(tmp_path)))
    assert twin.cycle == report.cycle

    def key(r):  # type: ignore[no-untyped-def]
        return (r.check, r.segment, r.lag, r.measure, r.details.get("variant"))

    want = {key(r): r for r in twin.results}
    got = {key(r): r for r in report.results}
    assert set(got) == set(want)
    for k, w in want.items():
        g = got[k]
        assert (g.status, g.n_obs, g.n_series, g.warn, g.fail, g.reason, g.message,
                g.examples) == (w.status, w.n_obs, w.n_series, w.warn, w.fail, w.reason,
                                w.message, w.examples), k
        if w.value is None:
            assert g.value is None, k
        else:
            assert math.isclose(g.value, w.value, rel_tol=1e-9, abs_tol=1e-12), k


def test_the_command_runs_the_warehouse_demo(tmp_path: Path) -> None:
    assert main(["demo", "--warehouse", "--out", str(tmp_path / "wh")]) == 0
    assert (tmp_path / "wh" / WAREHOUSE_FILE).is_file()
    # a re-run in the same folder replaces the warehouse and runs again
    assert main(["demo", "--warehouse", "--out", str(tmp_path / "wh")]) == 0
