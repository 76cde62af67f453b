"""The package's layers, read from its source with ``ast`` (common practice, no source).

* Computational modules (the equations, the fits, the result objects) import nothing from the
  site-file loader, ``io``, ``report``, ``commands``, ``cli``, the batch runner or the analysis
  object, and never matplotlib: they work on data and options objects, so that they can be tested
  and reused without a site file. Imports under ``if TYPE_CHECKING:`` only name types and are
  allowed.
* No import cycle among the package's modules.
* Functions stay short (about 150 lines, docstring not counted) and take at most 8 positional
  arguments; the few that do not are listed in :data:`LONG_FUNCTIONS` with the reason.

Each checker is also run on a crafted module that breaks its rule, so that the test can fail.
"""

from __future__ import annotations

import ast
from pathlib import Path

import pytest

PACKAGE = Path(__file__).resolve().parents[1] / "lakebalance"

#: Modules (dotted, relative to the package) that compute: they must not reach the edges.
COMPUTATIONAL = (
    "stats",
    "options",
    "results",
    "vocabulary",
    "laws",
    "units",
    "errors",
    "resources",
    "records",
    "qa",
    "storage",
    "outlet",
    "evaporation",
    "balance",
    "dynamics",
    "flags",
    "seepage",
    "drawdown",
    "operations",
)
#: What they may not import (dotted prefixes; package-relative names or third-party names).
FORBIDDEN = (
    "lakebalance.config",
    "lakebalance.io",
    "lakebalance.report",
    "lakebalance.commands",
    "lakebalance.cli",
    "lakebalance.batch",
    "lakebalance.analysis",
    "matplotlib",
)

#: Functions allowed to be longer than MAX_LINES or to take more positional arguments, and why.
LONG_FUNCTIONS: dict[str, str] = {
    # none: every function is within the limits
}
MAX_LINES = 150
MAX_POSITIONAL = 8


def module_name(path: Path, root: Path = PACKAGE) -> str:
    rel = path.relative_to(root.parent).with_suffix("")
    parts = list(rel.parts)
    if parts[-1] == "__init__":
        parts = parts[:-1]
    return ".".join(parts)


def _is_type_checking(node: ast.If) -> bool:
    test = node.test
    return (isinstance(test, ast.Name) and test.id == "TYPE_CHECKING") or (
        isinstance(test, ast.Attribute) and test.attr == "TYPE_CHECKING"
    )


def runtime_imports(path: Path, root: Path = PACKAGE) -> set[str]:
    """Absolute names of every module imported at run time (top level or inside functions),
    leaving out ``if TYPE_CHECKING:`` blocks."""
    tree = ast.parse(path.read_text(encoding="utf-8"))
    me = module_name(path, root)
    package = me if path.name == "__init__.py" else me.rpartition(".")[0]
    found: set[str] = set()

    def visit(node: ast.AST) -> None:
        for child in ast.iter_child_nodes(node):
            if isinstance(child, ast.If) and _is_type_checking(child):
                for sub in child.orelse:
                    visit(sub)
                continue
            if isinstance(child, ast.Import):
                found.update(a.name for a in child.names)
            elif isinstance(child, ast.ImportFrom):
                if child.level:
                    base = package.split(".")
                    base = base[: len(base) - (child.level - 1)]
                    mod = ".".join(base + ([child.module] if child.module else []))
                else:
                    mod = child.module or ""
                found.add(mod)
                for a in child.names:  # "from . import api" imports a module
                    found.add(f"{mod}.{a.name}")
            visit(child)

    visit(tree)
    return found


def _modules(root: Path = PACKAGE) -> dict[str, Path]:
    return {module_name(p, root): p for p in sorted(root.rglob("*.py"))}


def layering_violations(root: Path = PACKAGE) -> list[str]:
    """``"module imports name"`` for every forbidden import of a computational module."""
    out = []
    top = root.name
    for name, path in _modules(root).items():
        rel = name.removeprefix(top + ".")
        if not any(rel == c or rel.startswith(c + ".") for c in COMPUTATIONAL):
            continue
        for imp in runtime_imports(path, root):
            for bad in FORBIDDEN:
                bad = bad.replace("lakebalance", top, 1)
                if imp == bad or imp.startswith(bad + "."):
                    out.append(f"{name} imports {imp}")
    return sorted(set(out))


def import_cycles(root: Path = PACKAGE) -> list[list[str]]:
    """Cycles in the graph of the package's top-level (import-time) imports."""
    modules = _modules(root)
    graph: dict[str, set[str]] = {}
    for name, path in modules.items():
        tree = ast.parse(path.read_text(encoding="utf-8"))
        top_level = ast.Module(
            body=[
                n
                for n in tree.body
                if isinstance(n, ast.Import | ast.ImportFrom)
                or (isinstance(n, ast.If) and not _is_type_checking(n))
            ],
            type_ignores=[],
        )
        tmp = path.with_name(path.stem + "__toplevel.py")
        try:
            tmp.write_text(ast.unparse(top_level), encoding="utf-8")
            deps = runtime_imports(tmp, root)
        finally:
            tmp.unlink()
        edges = set()
        for d in deps:
            while d and d not in modules:
                d = d.rpartition(".")[0]
            if d and d != name and not name.startswith(d + "."):  # a package's own __init__
                edges.add(d)
        graph[name] = edges
    cycles, state = [], {}

    def dfs(node: str, stack: list[str]) -> None:
        state[node] = 1
        stack.append(node)
        for nxt in sorted(graph.get(node, ())):
            if state.get(nxt) == 1:
                cycles.append(stack[stack.index(nxt) :] + [nxt])
            elif nxt not in state:
                dfs(nxt, stack)
        stack.pop()
        state[node] = 2

    for node in sorted(graph):
        if node not in state:
            dfs(node, [])
    return cycles


def oversized_functions(root: Path = PACKAGE) -> list[str]:
    """Functions longer than MAX_LINES or with more than MAX_POSITIONAL positional arguments."""
    out = []
    for name, path in _modules(root).items():
        tree = ast.parse(path.read_text(encoding="utf-8"))
        for node in ast.walk(tree):
            if not isinstance(node, ast.FunctionDef | ast.AsyncFunctionDef):
                continue
            qual = f"{name}.{node.name}"
            if qual in LONG_FUNCTIONS:
                continue
            length = (node.end_lineno or node.lineno) - node.lineno + 1
            doc = node.body[0] if node.body else None
            if isinstance(doc, ast.Expr) and isinstance(getattr(doc, "value", None), ast.Constant):
                length -= (doc.end_lineno or doc.lineno) - doc.lineno + 1  # the docstring
            positional = [a.arg for a in node.args.posonlyargs + node.args.args]
            positional = [a for a in positional if a not in ("self", "cls")]
            if length > MAX_LINES:
                out.append(f"{qual}: {length} lines")
            if len(positional) > MAX_POSITIONAL:
                out.append(f"{qual}: {len(positional)} positional arguments")
    return out


# ---- the package ----------------------------------------------------------------------------
def test_computational_modules_do_not_import_the_edges():
    assert layering_violations() == []


def test_no_import_cycles():
    assert import_cycles() == []


def test_functions_are_short_and_take_few_positional_arguments():
    assert oversized_functions() == []


# ---- the checkers can fail ------------------------------------------------------------------
@pytest.fixture
def fake_package(tmp_path):
    pkg = tmp_path / "lakebalance"
    (pkg / "io").mkdir(parents=True)
    for rel in ("__init__.py", "io/__init__.py", "config.py", "balance.py", "stats.py"):
        (pkg / rel).write_text("", encoding="utf-8")
    return pkg


def test_a_forbidden_import_is_found(fake_package):
    (fake_package / "balance.py").write_text(
        "from typing import TYPE_CHECKING\nif TYPE_CHECKING:\n    from .config import Site\n"
        "def f():\n    from .io import read_records\n    import matplotlib.pyplot\n",
        encoding="utf-8",
    )
    assert layering_violations(fake_package) == [
        "lakebalance.balance imports lakebalance.io",
        "lakebalance.balance imports lakebalance.io.read_records",
        "lakebalance.balance imports matplotlib.pyplot",
    ]


def test_a_cycle_is_found(fake_package):
    (fake_package / "balance.py").write_text("from . import stats\n", encoding="utf-8")
    (fake_package / "stats.py").write_text("from .balance import x\n", encoding="utf-8")
    cycles = import_cycles(fake_package)
    assert ["lakebalance.balance", "lakebalance.stats", "lakebalance.balance"] in cycles


def test_a_long_function_is_found(fake_package):
    body = "def g(a, b, c, d, e, f, g, h, i):\n" + "    x = 1\n" * 160
    (fake_package / "stats.py").write_text(body, encoding="utf-8")
    found = oversized_functions(fake_package)
    assert "lakebalance.stats.g: 161 lines" in found
    assert "lakebalance.stats.g: 9 positional arguments" in found
