"""No import circles inside audiobw: the import graph, read from the AST, has no cycle.

Every ``import``/``from ... import`` counts, also those inside functions (a
lazy import still ties the two modules together).  The graph is built from
the source, so nothing is imported to check it.
"""

import ast
from pathlib import Path

PKG = Path(__file__).resolve().parents[1] / "audiobw"

#: Circles that exist today and are left for the module split (issue 14);
#: each is a set of modules that import one another.  Do not add to this list.
KNOWN: list[frozenset] = []


def module_name(path: Path) -> str:
    parts = list(path.relative_to(PKG.parent).with_suffix("").parts)
    if parts[-1] == "__init__":
        parts.pop()
    return ".".join(parts)


def import_graph() -> dict[str, set[str]]:
    modules = {module_name(p): p for p in PKG.rglob("*.py")}
    graph: dict[str, set[str]] = {m: set() for m in modules}
    for mod, path in modules.items():
        package = mod if path.name == "__init__.py" else mod.rpartition(".")[0]
        for node in ast.walk(ast.parse(path.read_text(encoding="utf-8"))):
            targets = []
            if isinstance(node, ast.Import):
                targets = [a.name for a in node.names]
            elif isinstance(node, ast.ImportFrom):
                if node.level:
                    base = package.split(".")
                    base = base[: len(base) - (node.level - 1)]
                    stem = ".".join(base + ([node.module] if node.module else []))
                else:
                    stem = node.module or ""
                targets = [stem] + [f"{stem}.{a.name}" for a in node.names]
            for t in targets:
                # a module's own parent packages are initialised before it anyway
                # (``from . import __version__``): not an edge
                if t in modules and t != mod and not mod.startswith(t + "."):
                    graph[mod].add(t)
    return graph


def cycles(graph: dict[str, set[str]]) -> list[frozenset]:
    """Strongly connected components with more than one module (Tarjan)."""
    index: dict[str, int] = {}
    low: dict[str, int] = {}
    stack: list[str] = []
    on: set[str] = set()
    out: list[frozenset] = []
    counter = [0]

    def visit(v):
        index[v] = low[v] = counter[0]
        counter[0] += 1
        stack.append(v)
        on.add(v)
        for w in graph[v]:
            if w not in index:
                visit(w)
                low[v] = min(low[v], low[w])
            elif w in on:
                low[v] = min(low[v], index[w])
        if low[v] == index[v]:
            comp = set()
            while True:
                w = stack.pop()
                on.discard(w)
                comp.add(w)
                if w == v:
                    break
            if len(comp) > 1:
                out.append(frozenset(comp))

    for v in sorted(graph):
        if v not in index:
            visit(v)
    return out


def test_the_checker_finds_a_circle():
    g = {"a": {"b"}, "b": {"c"}, "c": {"a"}, "d": {"a"}}
    assert cycles(g) == [frozenset({"a", "b", "c"})]
    assert cycles({"a": {"b"}, "b": set()}) == []


def test_graph_sees_relative_imports():
    g = import_graph()
    assert "audiobw.sweep" in g["audiobw.jobs"]
    assert "audiobw.report.sweepio" in g["audiobw.jobs"]


def test_no_import_circles():
    found = cycles(import_graph())
    assert [sorted(c) for c in found if c not in KNOWN] == []
    # a known circle that is gone must leave the list too
    assert [sorted(c) for c in KNOWN if c not in found] == []


#: The command line's own modules: the only ones that may import the CLI kit.
CLI_LAYER = ("audiobw.cli", "audiobw.clikit", "audiobw.commands", "audiobw._start", "audiobw.__main__")


def test_nothing_below_the_cli_imports_the_cli_kit():
    # cautions live in audiobw.cautions so render, report and demo need no click
    graph = import_graph()
    below = {m: deps for m, deps in graph.items() if not m.startswith(CLI_LAYER)}
    assert sorted(m for m, deps in below.items() if "audiobw.clikit" in deps or "audiobw.cli" in deps) == []
