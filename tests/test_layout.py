"""The package's shape (issue 11): folders read as the data flow, no module over 600
lines, no import cycle, the core never imports the tools around it.

Source: the project's design brief and its contributor guide (common practice, no
outside source). ``import-linter`` checks the layer contracts in CI as well
(``lint-imports``, contracts in pyproject.toml); this test needs nothing but ``ast``.
"""

from __future__ import annotations

import ast
from pathlib import Path

PKG = Path(__file__).resolve().parents[1] / "advisory"
CORE = ("io", "pipeline", "geo", "physics", "tables", "service")
TOOLS = ("bench", "cli")
MAX_LINES = 600


def _module_name(path: Path) -> str:
    rel = path.relative_to(PKG.parent).with_suffix("")
    parts = list(rel.parts)
    if parts[-1] == "__init__":
        parts.pop()
    return ".".join(parts)


def _modules() -> dict[str, Path]:
    return {_module_name(p): p for p in sorted(PKG.rglob("*.py"))}


def _imports(path: Path, name: str, known: set[str]) -> set[str]:
    """Package modules imported anywhere in the file (functions included)."""
    tree = ast.parse(path.read_text(), str(path))
    is_pkg = path.name == "__init__.py"
    found: set[str] = set()
    for node in ast.walk(tree):
        if isinstance(node, ast.Import):
            targets = [a.name for a in node.names]
        elif isinstance(node, ast.ImportFrom):
            base = node.module or ""
            if node.level:
                parent = name.split(".")
                parent = parent if is_pkg else parent[:-1]
                parent = parent[:len(parent) - (node.level - 1)]
                base = ".".join(parent + ([base] if base else []))
            targets = [base] + [f"{base}.{a.name}" for a in node.names]
        else:
            continue
        for t in targets:
            while t and t not in known:
                t = t.rpartition(".")[0]
            if t and t != name:
                found.add(t)
    return found


def _graph() -> dict[str, set[str]]:
    mods = _modules()
    known = set(mods)
    return {m: _imports(p, m, known) for m, p in mods.items()}


def test_no_module_over_600_lines():
    long = {m: n for m, p in _modules().items()
            if (n := len(p.read_text().splitlines())) > MAX_LINES}
    assert long == {}


def test_no_import_cycles():
    # Tarjan's strongly connected components over module-level import edges. A package's
    # __init__ importing its own submodules (re-exports) is not a cycle of jobs, so
    # edges from a package to its own children are left out.
    graph = {m: {t for t in deps if not t.startswith(m + ".")} for m, deps in _graph().items()}
    index: dict[str, int] = {}
    low: dict[str, int] = {}
    stack: list[str] = []
    on: set[str] = set()
    cycles: list[list[str]] = []
    counter = [0]

    def visit(v: str) -> None:
        index[v] = low[v] = counter[0]
        counter[0] += 1
        stack.append(v)
        on.add(v)
        for w in graph.get(v, ()):
            if w not in index:
                visit(w)
                low[v] = min(low[v], low[w])
            elif w in on:
                low[v] = min(low[v], index[w])
        if low[v] == index[v]:
            comp = []
            while True:
                w = stack.pop()
                on.discard(w)
                comp.append(w)
                if w == v:
                    break
            if len(comp) > 1:
                cycles.append(sorted(comp))

    for v in sorted(graph):
        if v not in index:
            visit(v)
    assert cycles == []


def test_the_core_never_imports_the_tools():
    bad = sorted((m, t) for m, deps in _graph().items()
                 if m.split(".")[1:2] and m.split(".")[1] in CORE
                 for t in deps if t.split(".")[1:2] and t.split(".")[1] in TOOLS)
    assert bad == []
