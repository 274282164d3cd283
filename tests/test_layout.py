"""The limits of the layout, as tests that fail (DEVELOPERS.md, "Layout").

- no module of ``accuracy_checks`` over 500 lines;
- zero import cycles between modules of ``accuracy_checks`` (and of the example ``flows``),
  counting every import at any depth: inside functions, under ``if TYPE_CHECKING:``, and
  ``importlib.import_module("accuracy_checks.…")`` with a literal name — an import hidden
  inside a function to dodge a cycle is still a cycle;
- lower layers never import higher ones (the table ``LAYERS`` below), plus the rules that config
  imports neither pandas nor the measure registry and the checks import no renderer, no command
  line and no SQL;
- README.md fits in 250 lines; no tracked file cites a file the repository does not ship;
- ``import accuracy_checks`` loads neither pandas nor an integration.

The import graph is read with :mod:`ast`, never by importing: ``from accuracy_checks.x import
y`` is an edge to the module ``accuracy_checks.x.y`` when that module exists, else to
``accuracy_checks.x``. Importing a module also runs its parent packages' ``__init__``; those
implicit edges are not counted (every module would otherwise depend on the package root).
"""

from __future__ import annotations

import ast
import json
import re
import subprocess
import sys
from collections.abc import Iterable
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
PACKAGE = "accuracy_checks"

MAX_MODULE_LINES = 500
MAX_README_LINES = 250

#: Layers, low → high. A module may import modules of its own layer or of a lower one, never of
#: a higher one. The longest matching prefix places a module; the package root
#: (``accuracy_checks/__init__.py``, the public API) is the top layer.
LAYERS: tuple[tuple[str, tuple[str, ...]], ...] = (
    ("errors/results", ("accuracy_checks.errors", "accuracy_checks.results",
                        "accuracy_checks.version")),
    ("config", ("accuracy_checks.config",)),
    ("sources/evaluation/measures", ("accuracy_checks.sources", "accuracy_checks.evaluation",
                                     "accuracy_checks.measures")),
    ("checks/store", ("accuracy_checks.checks", "accuracy_checks.store")),
    # dask: the dask engine, beside engine.py (which calls it lazily); recording: the run's
    # store and archive steps, which engine.py calls
    ("outputs/report/engine/dask", ("accuracy_checks.outputs", "accuracy_checks.report",
                                    "accuracy_checks.engine", "accuracy_checks.recording",
                                    "accuracy_checks.dask")),
    ("cli/demo/prefect/gx/api", ("accuracy_checks.cli", "accuracy_checks.__main__",
                                 "accuracy_checks.demo", "accuracy_checks.prefect",
                                 "accuracy_checks.gx", "accuracy_checks.api",
                                 "accuracy_checks")),
)

#: (importer prefix, forbidden import prefixes, why)
FORBIDDEN: tuple[tuple[str, tuple[str, ...], str], ...] = (
    ("accuracy_checks.config", ("pandas", "accuracy_checks.measures"),
     "config stays free of pandas and of the measure registry"),
    ("accuracy_checks.checks", ("accuracy_checks.outputs", "accuracy_checks.report",
                                "accuracy_checks.cli", "sqlalchemy"),
     "checks import no renderer, no command line and no SQL (ask the store's queries)"),
)

#: what ``import accuracy_checks`` must not load
HEAVY = ("pandas", "prefect", "great_expectations", "dask")


# --------------------------------------------------------------------------- the import graph


def _modules(package_dir: Path) -> dict[str, Path]:
    """Every module of a package by dotted name (a package by its own name, for __init__)."""
    found: dict[str, Path] = {}
    for path in sorted(package_dir.rglob("*.py")):
        parts = list(path.relative_to(package_dir.parent).with_suffix("").parts)
        if parts[-1] == "__init__":
            parts.pop()
        found[".".join(parts)] = path
    return found


def _is_package(name: str, modules: dict[str, Path]) -> bool:
    return modules[name].name == "__init__.py"


def _resolve_from(module: str, node: ast.ImportFrom, modules: dict[str, Path]) -> str | None:
    """The absolute module a ``from … import`` names (relative imports resolved)."""
    if not node.level:
        return node.module
    base = module.split(".")
    if not _is_package(module, modules):
        base = base[:-1]
    base = base[: len(base) - (node.level - 1)]
    return ".".join([*base, node.module] if node.module else base)


def _imports(module: str, modules: dict[str, Path]) -> set[str]:
    """Every name ``module`` imports, at any depth, as dotted module names."""
    tree = ast.parse(modules[module].read_text(encoding="utf-8"), str(modules[module]))
    names: set[str] = set()
    for node in ast.walk(tree):
        if isinstance(node, ast.Import):
            names.update(alias.name for alias in node.names)
        elif isinstance(node, ast.ImportFrom):
            target = _resolve_from(module, node, modules)
            if target is None:
                continue
            for alias in node.names:
                sub = f"{target}.{alias.name}"
                names.add(sub if sub in modules else target)
        elif (isinstance(node, ast.Call) and _is_import_module(node.func) and node.args
              and isinstance(node.args[0], ast.Constant) and isinstance(node.args[0].value, str)):
            names.add(node.args[0].value)
    return names


def _is_import_module(func: ast.expr) -> bool:
    return (isinstance(func, ast.Attribute) and func.attr == "import_module") or (
        isinstance(func, ast.Name) and func.id == "import_module")


def _graph(modules: dict[str, Path], roots: Iterable[str]) -> dict[str, set[str]]:
    """module → the modules of ``roots`` it imports (no self-edges)."""
    prefixes = tuple(roots)
    graph: dict[str, set[str]] = {}
    for module in modules:
        targets = set()
        for name in _imports(module, modules):
            if not any(name == p or name.startswith(p + ".") for p in prefixes):
                continue
            while name not in modules and "." in name:  # `import a.b.func`-style leftovers
                name = name.rsplit(".", 1)[0]
            if name in modules and name != module:
                targets.add(name)
        graph[module] = targets
    return graph


def _strongly_connected(graph: dict[str, set[str]]) -> list[list[str]]:
    """Tarjan's strongly connected components with more than one module."""
    index: dict[str, int] = {}
    low: dict[str, int] = {}
    stack: list[str] = []
    on_stack: set[str] = set()
    found: list[list[str]] = []
    counter = 0

    for start in sorted(graph):
        if start in index:
            continue
        work = [(start, iter(sorted(graph[start])))]
        index[start] = low[start] = counter
        counter += 1
        stack.append(start)
        on_stack.add(start)
        while work:
            node, children = work[-1]
            child = next(children, None)
            if child is not None:
                if child not in index:
                    index[child] = low[child] = counter
                    counter += 1
                    stack.append(child)
                    on_stack.add(child)
                    work.append((child, iter(sorted(graph[child]))))
                elif child in on_stack:
                    low[node] = min(low[node], index[child])
                continue
            work.pop()
            if work:
                parent = work[-1][0]
                low[parent] = min(low[parent], low[node])
            if low[node] == index[node]:
                component = []
                while True:
                    member = stack.pop()
                    on_stack.discard(member)
                    component.append(member)
                    if member == node:
                        break
                if len(component) > 1:
                    found.append(sorted(component))
    return found


def _one_cycle(graph: dict[str, set[str]], component: list[str]) -> list[str]:
    """A shortest cycle through the component's first module, as a path a → … → a."""
    members = set(component)
    start = component[0]
    previous: dict[str, str] = {}
    frontier = [start]
    while frontier:
        following = []
        for node in frontier:
            for child in sorted(graph[node] & members):
                if child == start:
                    path = [node]
                    while path[-1] != start:
                        path.append(previous[path[-1]])
                    return [*reversed(path), start]
                if child not in previous:
                    previous[child] = node
                    following.append(child)
        frontier = following
    return component  # unreachable for a strongly connected component


def _cycle_report(graph: dict[str, set[str]]) -> list[str]:
    return [
        f"{len(component)} modules in a cycle: {' → '.join(_one_cycle(graph, component))}"
        f" (all of them: {', '.join(component)})"
        for component in _strongly_connected(graph)
    ]


def _layer(module: str) -> tuple[int, str] | None:
    best: tuple[int, int, str] | None = None
    for rank, (label, prefixes) in enumerate(LAYERS):
        for prefix in prefixes:
            if (module == prefix or module.startswith(prefix + ".")) and (
                    best is None or len(prefix) > best[0]):
                best = (len(prefix), rank, label)
    return None if best is None else (best[1], best[2])


PACKAGE_MODULES = _modules(ROOT / PACKAGE)
PACKAGE_GRAPH = _graph(PACKAGE_MODULES, [PACKAGE])


# --------------------------------------------------------------------------------- the tests


def test_no_module_over_500_lines() -> None:
    long = {
        str(path.relative_to(ROOT)): n
        for path in PACKAGE_MODULES.values()
        if (n := len(path.read_text(encoding="utf-8").splitlines())) > MAX_MODULE_LINES
    }
    assert not long, f"modules over {MAX_MODULE_LINES} lines (split them by job): " + ", ".join(
        f"{name} ({n})" for name, n in sorted(long.items(), key=lambda kv: -kv[1]))


def test_no_import_cycles() -> None:
    cycles = _cycle_report(PACKAGE_GRAPH)
    assert not cycles, "import cycles (imports inside functions count):\n" + "\n".join(cycles)


def test_example_flows_import_no_cycle() -> None:
    modules = _modules(ROOT / "flows")
    cycles = _cycle_report(_graph(modules, ["flows"]))
    assert not cycles, "import cycles in flows/:\n" + "\n".join(cycles)


def test_every_module_has_a_layer() -> None:
    unplaced = sorted(m for m in PACKAGE_MODULES if _layer(m) is None)
    assert not unplaced, (
        f"modules outside the layer table of {Path(__file__).name} (a new room, or a module at "
        f"the top that belongs in one): {', '.join(unplaced)}")


def test_lower_layers_never_import_higher_ones() -> None:
    violations = []
    for module, targets in sorted(PACKAGE_GRAPH.items()):
        here = _layer(module)
        for target in sorted(targets):
            there = _layer(target)
            if here and there and there[0] > here[0]:
                violations.append(
                    f"{module} (layer {here[0]}, {here[1]}) imports {target} "
                    f"(layer {there[0]}, {there[1]})")
    assert not violations, "lower layers import higher ones:\n" + "\n".join(violations)


def test_forbidden_imports() -> None:
    violations = []
    for module in sorted(PACKAGE_MODULES):
        names = _imports(module, PACKAGE_MODULES)
        for importer, forbidden, why in FORBIDDEN:
            if not (module == importer or module.startswith(importer + ".")):
                continue
            for name in sorted(names):
                if any(name == f or name.startswith(f + ".") for f in forbidden):
                    violations.append(f"{module} imports {name}: {why}")
    assert not violations, "\n".join(violations)


def test_readme_fits_in_250_lines() -> None:
    n = len((ROOT / "README.md").read_text(encoding="utf-8").splitlines())
    assert n <= MAX_README_LINES, (
        f"README.md has {n} lines (at most {MAX_README_LINES}): move detail into docs/")


# the names are assembled so that this file does not cite them itself
_OUTSIDE = re.compile(
    r"\.\./shared\b|/work/" + "shared" + r"\b|\b(?:METRICS|PRODUCT|STYLE|INTEGRATIONS)\." + "md")


def _tracked_files() -> list[Path]:
    done = subprocess.run(["git", "ls-files", "-z"], cwd=ROOT, capture_output=True, check=True)
    return [ROOT / name for name in done.stdout.decode().split("\0") if name]


def test_no_file_cites_files_outside_the_repository() -> None:
    citing = []
    for path in _tracked_files():
        if not path.is_file():
            continue  # deleted in the working tree, not yet committed
        try:
            text = path.read_text(encoding="utf-8")
        except UnicodeDecodeError:
            continue  # binary
        for lineno, line in enumerate(text.splitlines(), 1):
            if _OUTSIDE.search(line):
                citing.append(f"{path.relative_to(ROOT)}:{lineno}: {line.strip()[:100]}")
    assert not citing, "files cite files the repository does not ship (cite docs/…):\n" + (
        "\n".join(citing))


def test_import_stays_light() -> None:
    code = ("import json, sys, accuracy_checks; "
            "print(json.dumps(sorted(m for m in sys.modules)))")
    done = subprocess.run([sys.executable, "-c", code], cwd=ROOT, capture_output=True,
                          text=True, check=True)
    loaded = json.loads(done.stdout)
    heavy = sorted(m for m in loaded if m.split(".")[0] in HEAVY)
    assert not heavy, f"`import accuracy_checks` loads {', '.join(heavy)}"


def test_the_cycle_finder_finds_a_planted_cycle() -> None:
    graph = {"a": {"b"}, "b": {"c"}, "c": {"a", "d"}, "d": set(), "e": {"d"}}
    assert _strongly_connected(graph) == [["a", "b", "c"]]
    assert _one_cycle(graph, ["a", "b", "c"]) == ["a", "b", "c", "a"]
    assert _strongly_connected({"a": {"b"}, "b": set()}) == []
