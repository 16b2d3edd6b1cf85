"""The package's import structure: data flows one way (DEVELOPERS.md, "Layers").

Every module of ``src/evtkin`` is parsed (``ast``, nothing is imported) and every import of an
evtkin module is an edge, wherever it is written: at the top, inside a function (a lazy import is
still a dependency) or under ``TYPE_CHECKING``. The test fails when a module imports a module of
a higher layer, when modules import each other in a circle, or when a module has no layer.
"""

from __future__ import annotations

import ast
from collections.abc import Iterable, Mapping
from pathlib import Path

SRC = Path(__file__).resolve().parents[1] / "src"

#: layers from the bottom up; a module may import modules of its own layer or lower ones.
#: The key is a module or package prefix; the longest matching prefix decides.
LAYERS: dict[str, int] = {
    # 0: leaves that every layer may use
    "evtkin._version": 0, "evtkin.errors": 0, "evtkin.files": 0, "evtkin._jit": 0,
    "evtkin._processes": 0,
    # 1: the event model (the behaviours the readers attach to particle records)
    "evtkin.events": 1,
    # 2: readers and writers of event files
    "evtkin.io": 2,
    # 3: physics on events: objects, composites, and the expression language over them
    "evtkin.select": 3, "evtkin.expr": 3,
    # 4: histograms, cross sections, normalisation, bands
    "evtkin.hists": 4,
    # 5: statistical comparison (numbers in, numbers out)
    "evtkin.compare": 5,
    # 6: results folders, plots, reports
    "evtkin.output": 6,
    # 7: the analysis description
    "evtkin.config": 7,
    # 8: running an analysis; the toy-sample maker (apart from the product path)
    "evtkin.run": 8, "evtkin.toy": 8,
    # 9: the edge: command line and the package's public facade
    "evtkin.cli": 9, "evtkin.__main__": 9, "evtkin": 9,
}


def module_name(path: Path, root: Path = SRC) -> str:
    parts = list(path.relative_to(root).with_suffix("").parts)
    if parts[-1] == "__init__":
        parts.pop()
    return ".".join(parts)


def _is_package(path: Path) -> bool:
    return path.name == "__init__.py"


def imports_of(path: Path, modules: Iterable[str], root: Path = SRC) -> set[str]:
    """The evtkin modules ``path`` imports (``from pkg import sub`` names module ``pkg.sub``
    when it is one)."""
    known = set(modules)
    me = module_name(path, root)
    package = me if _is_package(path) else me.rpartition(".")[0]
    out: set[str] = set()
    for node in ast.walk(ast.parse(path.read_text(encoding="utf-8"), str(path))):
        if isinstance(node, ast.Import):
            names = [a.name for a in node.names]
        elif isinstance(node, ast.ImportFrom):
            if node.level:
                base = package.split(".")
                base = base[: len(base) - (node.level - 1)]
                target = ".".join([*base, *([node.module] if node.module else [])])
            else:
                target = node.module or ""
            names = [f"{target}.{a.name}" if f"{target}.{a.name}" in known else target
                     for a in node.names]
        else:
            continue
        for name in names:
            while name and name not in known:  # ``import evtkin.io.lhe as x`` → evtkin.io.lhe
                name = name.rpartition(".")[0]
            if name and name != me:
                out.add(name)
    return out


def import_graph(root: Path = SRC) -> dict[str, set[str]]:
    files = sorted((root / "evtkin").rglob("*.py"))
    modules = [module_name(f, root) for f in files]
    return {module_name(f, root): imports_of(f, modules, root) for f in files}


def layer_of(module: str, layers: Mapping[str, int] = LAYERS) -> int | None:
    best: tuple[int, int] | None = None
    for prefix, rank in layers.items():
        matches = module == prefix or module.startswith(prefix + ".")
        if matches and (best is None or len(prefix) > best[0]):
            best = (len(prefix), rank)
    return None if best is None else best[1]


def upward_imports(graph: Mapping[str, set[str]], layers: Mapping[str, int] = LAYERS
                   ) -> list[str]:
    bad = []
    for mod, deps in sorted(graph.items()):
        here = layer_of(mod, layers)
        for dep in sorted(deps):
            there = layer_of(dep, layers)
            if here is not None and there is not None and there > here:
                bad.append(f"{mod} (layer {here}) imports {dep} (layer {there})")
    return bad


def circles(graph: Mapping[str, set[str]]) -> list[list[str]]:
    """The strongly connected components with more than one module (Tarjan's algorithm)."""
    index: dict[str, int] = {}
    low: dict[str, int] = {}
    stack: list[str] = []
    on_stack: set[str] = set()
    found: list[list[str]] = []
    counter = 0

    def visit(v: str) -> None:
        nonlocal counter
        index[v] = low[v] = counter
        counter += 1
        stack.append(v)
        on_stack.add(v)
        for w in sorted(graph.get(v, ())):
            if w not in index:
                visit(w)
                low[v] = min(low[v], low[w])
            elif w in on_stack:
                low[v] = min(low[v], index[w])
        if low[v] == index[v]:
            comp = []
            while True:
                w = stack.pop()
                on_stack.discard(w)
                comp.append(w)
                if w == v:
                    break
            if len(comp) > 1:
                found.append(sorted(comp))

    for v in sorted(graph):
        if v not in index:
            visit(v)
    return found


# --------------------------------------------------------------------------- the package

def test_the_graph_is_read() -> None:
    graph = import_graph()
    assert "evtkin.run.units" in graph
    assert "evtkin.run.plan" in graph["evtkin.run.units"]  # a top-level import
    assert "evtkin.io.lhe" in graph["evtkin.run.inputs.lhe"]  # an import inside a function


def test_every_module_has_a_layer() -> None:
    missing = [m for m in import_graph() if layer_of(m) is None]
    assert not missing


def test_no_lower_layer_imports_a_higher_one() -> None:
    bad = upward_imports(import_graph())
    assert not bad, "upward imports:\n" + "\n".join(bad)


def test_no_import_circles() -> None:
    found = circles(import_graph())
    assert not found, "modules importing each other in a circle: " + "; ".join(
        " ↔ ".join(c) for c in found)


def test_nothing_inside_imports_the_package_root() -> None:
    users = sorted(m for m, deps in import_graph().items() if "evtkin" in deps
                   and m not in ("evtkin.__main__",) and not m.startswith("evtkin.cli"))
    assert not users


# --------------------------------------------------------------------------- self-check

def test_the_checks_can_fail(tmp_path: Path) -> None:
    """A synthetic package with an upward import and a circle: both are reported."""
    pkg = tmp_path / "evtkin"
    (pkg / "io").mkdir(parents=True)
    (pkg / "run").mkdir()
    (pkg / "__init__.py").write_text("")
    (pkg / "io" / "__init__.py").write_text("")
    (pkg / "run" / "__init__.py").write_text("")
    (pkg / "io" / "reader.py").write_text(
        "def f():\n    from evtkin.run import loop  # upward, lazily\n")
    (pkg / "run" / "loop.py").write_text("from . import plan\n")
    (pkg / "run" / "plan.py").write_text(
        "from typing import TYPE_CHECKING\nif TYPE_CHECKING:\n    import evtkin.run.loop\n")
    graph = import_graph(tmp_path)
    assert graph["evtkin.io.reader"] == {"evtkin.run.loop"}
    assert graph["evtkin.run.loop"] == {"evtkin.run.plan"}
    assert graph["evtkin.run.plan"] == {"evtkin.run.loop"}
    layers = {"evtkin.io": 2, "evtkin.run": 8, "evtkin": 9}
    assert upward_imports(graph, layers) == [
        "evtkin.io.reader (layer 2) imports evtkin.run.loop (layer 8)"]
    assert circles(graph) == [["evtkin.run.loop", "evtkin.run.plan"]]
    assert circles({"a": {"b"}, "b": set()}) == []
