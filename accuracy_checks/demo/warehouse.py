"""The demo from a warehouse: the invented scenario as DuckDB tables, the gate run from SQL.

``accuracy-checks demo --warehouse`` calls :func:`run_warehouse_demo`: it writes the scenario
(:func:`~accuracy_checks.demo.scenario.generate_scenario`), loads it into one DuckDB file
(``warehouse.duckdb``: tables ``forecasts`` — every cycle's forecast and the earlier cycles —,
``actuals`` and ``products``), writes a config whose inputs are SQL sources
(``accuracy-checks-warehouse.yaml``) and runs the gate on the final cycle from it: the
forecast is a query for the latest issue date, the history a query for the earlier ones, the
actuals and the mapping are tables. The figures equal those of the same cycle read from the
CSV files (the narrated demo's last cycle). Needs the ``warehouse`` extra (DuckDB).
"""

from __future__ import annotations

from collections.abc import Callable
from pathlib import Path

from accuracy_checks.demo.scenario import Scenario, generate_scenario, prepare_folder
from accuracy_checks.engine import run_checks
from accuracy_checks.errors import UsageError
from accuracy_checks.measures.catalogue import load_config
from accuracy_checks.outputs.findings import top_findings
from accuracy_checks.results import RunReport

__all__ = ["WAREHOUSE_CONFIG", "WAREHOUSE_FILE", "load_warehouse", "run_warehouse_demo"]

WAREHOUSE_FILE = "warehouse.duckdb"
WAREHOUSE_CONFIG = "accuracy-checks-warehouse.yaml"
#: the run state of the warehouse run, apart from the narrated demo's
_STATE = ".accuracy_checks-warehouse"


def load_warehouse(scenario: Scenario) -> Path:
    """Load the scenario's CSV files into ``warehouse.duckdb`` (replaced if present); its path.

    Columns keep the files' types as DuckDB reads them: keys as text, weeks and issue dates as
    dates, values as numbers (the key columns are declared text, so no key could turn into a
    number).
    """
    try:
        import duckdb
    except ImportError:
        raise UsageError(
            "accuracy-checks demo --warehouse needs DuckDB: install the warehouse extra "
            "(pip install -e \".[warehouse]\") and run it again."
        ) from None
    out = scenario.out_dir
    path = out / WAREHOUSE_FILE
    path.unlink(missing_ok=True)
    keys = "{'store': 'VARCHAR', 'product': 'VARCHAR'}"
    forecasts = [scenario.history_path, *scenario.forecast_paths]
    with duckdb.connect(str(path)) as db:
        db.execute(
            "create table forecasts as select * from read_csv(?, header = true, "
            f"union_by_name = true, types = {keys})",
            [[str(p) for p in forecasts]])
        db.execute(f"create table actuals as select * from read_csv(?, types = {keys})",
                   [str(scenario.actuals_path)])
        db.execute("create table products as select * from read_csv(?, types = "
                   "{'product': 'VARCHAR', 'category': 'VARCHAR'})", [str(scenario.products_path)])
    return path


def _config_text(scenario: Scenario) -> str:
    """The narrated demo's config with its inputs moved to SQL sources on the warehouse."""
    text = scenario.config_path.read_text(encoding="utf-8")
    url = f"duckdb:///{WAREHOUSE_FILE}"
    latest = "(select max(issued_on) from forecasts)"
    places = {
        "forecast": f'sql: {{url: "{url}", query: "select * from forecasts where issued_on = '
                    f'{latest}"}}',
        "actuals": f'sql: {{url: "{url}", table: actuals}}',
    }
    lines = []
    section = None
    for line in text.splitlines():
        if line and not line.startswith(" "):
            section = line.split(":", 1)[0]
        stripped = line.strip()
        if stripped.startswith("path:") and section in places:
            line = f"  {places[section]}"
        elif line.startswith("history:"):
            line = (f'history: {{sql: {{url: "{url}", query: "select * from forecasts '
                    f'where issued_on < {latest}"}}}}')
        elif stripped.startswith("mapping:"):
            line = f'  mapping: {{sql: {{url: "{url}", table: products}}}}'
        elif line.startswith(("archive:", "store:")):
            line = line.replace(".accuracy_checks", _STATE)
        elif line.startswith("# The demo runs every cycle"):
            line = "# The gate on the final cycle, every input read from the DuckDB warehouse."
        elif line.startswith("# the first demo cycle"):
            continue
        lines.append(line)
    return "\n".join(lines) + "\n"


def run_warehouse_demo(out_dir: Path, *, cycles: int = 6, seed: int = 7,
                       echo: Callable[[str], None] = print) -> RunReport:
    """Write the scenario and its warehouse into ``out_dir``, run the gate from SQL on the
    final cycle, narrate the verdict; the run's report."""
    out_dir = Path(out_dir).resolve()
    prepare_folder(out_dir, run_state=(".accuracy_checks", _STATE),
                   hint="Pass a new or empty folder with --out.")
    scenario = generate_scenario(out_dir, cycles=cycles, seed=seed)
    warehouse = load_warehouse(scenario)
    config_path = out_dir / WAREHOUSE_CONFIG
    config_path.write_text(_config_text(scenario), encoding="utf-8")
    echo(f"accuracy-checks demo --warehouse: invented data, no real company, store or person.\n"
         f"Wrote the garden-centre scenario into the DuckDB file {warehouse}\n"
         "(tables forecasts, actuals, products) and a config that reads every input from it:\n"
         f"{config_path}\n")
    report = run_checks(load_config(config_path))
    verdict = report.status.upper()
    counts = report.counts()
    echo(f"Final cycle {report.cycle}, read from SQL: {verdict}  ({counts['pass']} passed, "
         f"{counts['warn']} warned, {counts['fail'] + counts['error']} failed)")
    echo("".join(f"  - {f}\n" for f in top_findings(report)) or "  - no warnings or failures\n")
    echo("Run it by hand (a re-run is recorded as a new attempt of the cycle):\n"
         f"  cd {out_dir}\n"
         f"  accuracy-checks run --config {WAREHOUSE_CONFIG}\n"
         "The demo itself exits 0: the failing final cycle is part of the show.")
    return report

