"""The package layout is the architecture: imports go one way only.

``analysis`` never loads Qt or ``app``; inside each package a subpackage imports only
leaf modules and the subpackages below it in the declared order; sibling feature
packages of ``app`` never import each other. Checked from the source (every import
statement, deferred ones included) and by importing every analysis module in a clean
interpreter.
"""

from __future__ import annotations

import ast
import pkgutil
import subprocess
import sys
from pathlib import Path

import analysis

ROOT = Path(__file__).resolve().parents[2]

#: analysis subpackages, lowest first; each may import the leaf modules and those before it.
ANALYSIS_LAYERS = ["stack", "project", "arrival", "spherulites", "kinetics", "reporting", "synthetic", "cli"]
ANALYSIS_LEAVES = {"errors", "progress", "results", "edits", "units", "settings", "heuristics", "textio",
                   "outputs",
                   "__init__"}

#: app subpackages, lowest first; the three pages sit on one level and never import each other.
APP_LAYERS = [{"core"}, {"widgets"}, {"microscopy", "kinetics", "temperature"}, {"window"}]

#: known crossings still to be removed; every entry needs a reason and shrinks to nothing.
ALLOWED: dict[tuple[str, str], str] = {}


def _imports(path: Path) -> set[str]:
    tree = ast.parse(path.read_text(encoding="utf-8"))
    for node in ast.walk(tree):  # imports for type checkers only run no code
        if isinstance(node, ast.If) and getattr(node.test, "id", getattr(node.test, "attr", "")) == "TYPE_CHECKING":
            node.body = []
    found = set()
    for node in ast.walk(tree):
        if isinstance(node, ast.Import):
            found.update(alias.name for alias in node.names)
        elif isinstance(node, ast.ImportFrom) and node.module and node.level == 0:
            found.add(node.module)
            found.update(f"{node.module}.{alias.name}" for alias in node.names)
    return found


def _part(module: str, package: str) -> str | None:
    parts = module.split(".")
    if parts[0] != package or len(parts) < 2:
        return None
    return parts[1]


def _violations(package: str, rank) -> list[str]:
    bad = []
    for path in sorted((ROOT / package).rglob("*.py")):
        rel = path.relative_to(ROOT / package).parts
        own = rel[0][:-3] if len(rel) == 1 else rel[0]
        for target in _imports(path):
            other = _part(target, package)
            if other is None or other == own:
                continue
            if not rank(own, other) and (own, other) not in ALLOWED:
                bad.append(f"{package}/{'/'.join(rel)} imports {target}")
    return sorted(set(bad))


def _analysis_rank(own: str, other: str) -> bool:
    if other in ANALYSIS_LEAVES:
        return True
    if own in ANALYSIS_LEAVES:
        return False  # leaves import only leaves
    if other not in ANALYSIS_LAYERS:
        return True  # a module-level name such as __version__
    return ANALYSIS_LAYERS.index(other) < ANALYSIS_LAYERS.index(own)


def _app_level(name: str) -> int:
    return next(i for i, group in enumerate(APP_LAYERS) if name in group)


def _app_rank(own: str, other: str) -> bool:
    known = set().union(*APP_LAYERS)
    if own not in known or other not in known:
        return own == "__init__"
    return _app_level(other) < _app_level(own)


def test_every_analysis_subpackage_is_declared():
    packages = {m.name for m in pkgutil.iter_modules(analysis.__path__) if m.ispkg}
    assert packages == set(ANALYSIS_LAYERS)
    modules = {m.name for m in pkgutil.iter_modules(analysis.__path__) if not m.ispkg}
    assert modules <= ANALYSIS_LEAVES


def test_every_app_subpackage_is_declared():
    import app

    packages = {m.name for m in pkgutil.iter_modules(app.__path__) if m.ispkg}
    assert packages == set().union(*APP_LAYERS)
    assert not [m.name for m in pkgutil.iter_modules(app.__path__) if not m.ispkg]


def test_analysis_imports_only_downwards():
    assert _violations("analysis", _analysis_rank) == []


def test_app_imports_only_downwards_and_pages_never_import_each_other():
    assert _violations("app", _app_rank) == []


def test_analysis_source_never_names_qt_or_app():
    for path in (ROOT / "analysis").rglob("*.py"):
        for target in _imports(path):
            assert target.split(".")[0] not in ("PySide6", "pyqtgraph", "shiboken6", "app"), (path, target)


def _all_analysis_modules():
    return sorted(m.name for m in pkgutil.walk_packages(analysis.__path__, "analysis."))


def test_importing_every_analysis_module_loads_no_qt():
    modules = _all_analysis_modules()
    code = (
        "import importlib, sys\n"
        f"for name in {modules!r}:\n"
        "    importlib.import_module(name)\n"
        "bad = sorted(m for m in sys.modules if m.split('.')[0] in ('PySide6', 'pyqtgraph', 'app', 'shiboken6'))\n"
        "print(','.join(bad))\n"
    )
    result = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert result.stdout.strip() == "", f"analysis/ pulled in: {result.stdout.strip()}"
    assert "analysis.stack.frames" in modules and "analysis.cli.main" in modules


def test_no_import_cycle_between_modules():
    graph = {}
    for package in ("analysis", "app"):
        for path in (ROOT / package).rglob("*.py"):
            name = ".".join(path.relative_to(ROOT).with_suffix("").parts).removesuffix(".__init__")
            graph[name] = set()
            for target in _imports(path):
                while target and target not in graph and not (ROOT / Path(*target.split("."))).with_suffix(".py").exists():
                    target = target.rpartition(".")[0]
                if target and target != name and target.split(".")[0] in ("analysis", "app"):
                    graph[name].add(target)
    for name in graph:
        graph[name] = {t for t in graph[name] if t in graph or (ROOT / Path(*t.split("."))).with_suffix(".py").exists()}
    state: dict[str, int] = {}

    def visit(node, trail):
        state[node] = 1
        for nxt in sorted(graph.get(node, ())):
            if state.get(nxt) == 1:
                raise AssertionError("import cycle: " + " -> ".join(trail[trail.index(nxt):] + [nxt]))
            if nxt not in state:
                visit(nxt, trail + [nxt])
        state[node] = 2

    for node in sorted(graph):
        if node not in state:
            visit(node, [node])
