"""The house plan (chain/__init__.py) holds: module-level imports flow one way,
and the heavy libraries stay in their rooms."""

import ast
from pathlib import Path

import pytest

PACKAGE = Path(__file__).parents[1] / "chain"

#: room → rank; a module may import at module level only rooms of lower rank
#: (or its own room)
RANKS = {
    "about": 0, "errors": 0, "units": 0, "fileio": 0, "decibels": 0, "graph": 0, "rootfind": 0, "discover": 0,
    "tubes": 1,
    "language": 2,
    "circuit": 3, "kinds": 3.5,
    "build": 4,
    "dc": 5,
    "smallsignal": 6,
    "formulas": 7, "headroom": 7,
    "transient": 7.5, "studies": 7.6,
    "analysis": 8, "spread": 8,
    "report": 9, "plot": 9,
    "changes": 10, "page": 10, "watch": 10,
    "cli": 11, "__main__": 12,
}
#: heavy third-party packages and the only rooms that may import them
HEAVY = {"lcapy": {"formulas"}, "sympy": {"formulas"}, "matplotlib": {"plot"}, "schemdraw": {"plot"},
         "watchfiles": {"watch"}}

MODULES = sorted(p for p in PACKAGE.rglob("*.py") if p.name != "__init__.py" or p.parent != PACKAGE)


def room(path: Path) -> str:
    rel = path.relative_to(PACKAGE)
    return rel.parts[0].removesuffix(".py")


def imports(path: Path):
    tree = ast.parse(path.read_text(encoding="utf-8"))
    top_level = set(id(n) for n in tree.body)
    for node in ast.walk(tree):
        names = []
        if isinstance(node, ast.Import):
            names = [a.name for a in node.names]
        elif isinstance(node, ast.ImportFrom) and node.module and node.level == 0:
            names = [node.module]
        for name in names:
            yield name, id(node) in top_level


def test_every_room_has_a_rank():
    assert {room(p) for p in MODULES} <= set(RANKS)


@pytest.mark.parametrize("path", MODULES, ids=[str(p.relative_to(PACKAGE)) for p in MODULES])
def test_module_level_imports_flow_one_way(path):
    mine = room(path)
    for name, top in imports(path):
        parts = name.split(".")
        if parts[0] == "chain" and len(parts) > 1 and top:
            other = parts[1]
            assert RANKS[other] < RANKS[mine] or other == mine, f"{path.name} imports {name} at module level"


@pytest.mark.parametrize("path", MODULES, ids=[str(p.relative_to(PACKAGE)) for p in MODULES])
def test_imports_inside_functions_flow_one_way_too(path):
    """A lazy import is still a dependency: no room reaches up the house plan
    from inside a function either (issue 9)."""
    mine = room(path)
    for name, top in imports(path):
        parts = name.split(".")
        if parts[0] == "chain" and len(parts) > 1 and not top:
            other = parts[1]
            assert RANKS[other] < RANKS[mine] or other == mine, f"{path.name} imports {name} inside a function"


@pytest.mark.parametrize("path", MODULES, ids=[str(p.relative_to(PACKAGE)) for p in MODULES])
def test_heavy_libraries_stay_in_their_rooms(path):
    mine = room(path)
    for name, _ in imports(path):
        lib = name.split(".")[0]
        if lib in HEAVY:
            assert mine in HEAVY[lib], f"{path.relative_to(PACKAGE)} imports {lib}"


def _module_name(path: Path) -> str:
    parts = path.relative_to(PACKAGE.parent).with_suffix("").parts
    return ".".join(parts[:-1] if parts[-1] == "__init__" else parts)


def test_no_import_loops():
    """The house reads top-down: no module reaches, directly or through
    others, back to itself — imports inside functions included (issue 9)."""
    import networkx as nx

    paths = sorted(PACKAGE.rglob("*.py"))
    names = {_module_name(p) for p in paths}
    graph = nx.DiGraph()
    for path in paths:
        me = _module_name(path)
        if me == "chain":
            continue  # the front door may name every room
        for name, _ in imports(path):
            if name in names and name not in (me, "chain"):
                graph.add_edge(me, name)
    loops = sorted(nx.simple_cycles(graph))
    assert not loops, "import loops: " + "; ".join(" -> ".join(c + [c[0]]) for c in loops[:5])
