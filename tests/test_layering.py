"""The code layout keeps its promises: imports go one way, and no cycles.

The rule is the project's own (DEVELOPERS.md, "Architecture"): the command
line imports the reports, the reports the comparison and the search, those
the physics and the stages, and everything imports ``extract``; ``extract``
never imports ``analyze``.  Checked on the source text with :mod:`ast`, lazy
imports inside functions included, so a shortcut taken inside a function
breaks the test as surely as one at the top of a module.
"""

from __future__ import annotations

import ast
from pathlib import Path

import networkx as nx
import pytest

ROOT = Path(__file__).resolve().parents[1]

#: Rank of each package: a module may import modules of its own package
#: and of packages of a lower rank only.  The three ``extract`` subpackages
#: share a rank and must not import each other.
RANKS = {
    "extract": 0,
    "extract.layout": 1,
    "extract.netlist": 1,
    "extract.writers": 1,
    "analyze.stages": 2,
    "analyze.simulator": 2,
    "analyze.characterize": 3,
    "analyze.physics": 4,
    "analyze.search": 5,
    "analyze.simulate": 6,
    "analyze.compare": 7,
    "analyze.report": 8,
    "analyze.cli": 9,
    "analyze": 10,
}


def _modules():
    out = {}
    for top in ("extract", "analyze"):
        for path in sorted((ROOT / top).rglob("*.py")):
            rel = path.relative_to(ROOT).with_suffix("")
            parts = list(rel.parts)
            if parts[-1] == "__init__":
                parts = parts[:-1]
            out[".".join(parts)] = path
    return out


def _package(module: str, modules: dict) -> str:
    """The ranked package a module belongs to (its longest ranked prefix)."""
    parts = module.split(".")
    for k in range(len(parts), 0, -1):
        if ".".join(parts[:k]) in RANKS:
            return ".".join(parts[:k])
    raise AssertionError(f"{module} is in no ranked package")


def _imports(module: str, path: Path, modules: dict) -> set[str]:
    tree = ast.parse(path.read_text(), str(path))
    found = set()
    pkg = module if path.name == "__init__.py" else module.rsplit(".", 1)[0]
    for node in ast.walk(tree):
        if isinstance(node, ast.Import):
            names = [a.name for a in node.names]
        elif isinstance(node, ast.ImportFrom):
            base = node.module or ""
            if node.level:
                base = ".".join(pkg.split(".")[: len(pkg.split(".")) - node.level + 1] + ([base] if base else []))
            names = [base] + [f"{base}.{a.name}" for a in node.names]
        else:
            continue
        for name in names:
            if name in modules:
                found.add(name)
    found.discard(module)
    return found


def _graph():
    modules = _modules()
    g = nx.DiGraph()
    for m, p in modules.items():
        g.add_node(m)
        for dep in _imports(m, p, modules):
            g.add_edge(m, dep)
    return g, modules


def test_every_module_is_in_a_ranked_package():
    g, modules = _graph()
    for m in modules:
        _package(m, modules)


def test_imports_go_down_the_layers_only():
    g, modules = _graph()
    bad = []
    for a, b in g.edges:
        pa, pb = _package(a, modules), _package(b, modules)
        if pa == pb or b in ("extract", "analyze"):
            continue
        if RANKS[pb] >= RANKS[pa]:
            bad.append(f"{a} imports {b}")
    assert not bad, "; ".join(sorted(bad))


def test_extract_never_imports_analyze():
    g, modules = _graph()
    bad = [f"{a} -> {b}" for a, b in g.edges if a.startswith("extract") and b.startswith("analyze")]
    assert not bad


def test_no_import_cycles():
    g, _ = _graph()
    cycles = list(nx.simple_cycles(g))
    assert not cycles, cycles[:5]


@pytest.mark.parametrize("package", sorted(p for p in RANKS if "." in p))
def test_every_subpackage_says_what_it_holds_and_may_import(package):
    text = (ROOT / package.replace(".", "/") / "__init__.py").read_text()
    doc = ast.get_docstring(ast.parse(text))
    assert doc and "May import" in doc
