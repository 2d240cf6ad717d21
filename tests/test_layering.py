"""The package's import structure: no import cycles, imports downward only, light entry points.

The import graph is read from the source with :mod:`ast` (nothing is imported to build it).
Only imports that run when a module is imported count: statements at module level,
including those inside top-level ``try``/``if``/``with``/``for`` blocks and class bodies,
but not inside ``if TYPE_CHECKING:`` blocks and not inside functions or methods (those run
on first use, after every module has finished importing).

How an import statement becomes edges of the graph, for an importing module ``M``:

* ``import forecastaudit.a.b`` and ``from forecastaudit.a.b import name`` name the module
  ``forecastaudit.a.b``; ``from forecastaudit.a import b`` names ``forecastaudit.a.b`` when
  ``b`` is a submodule (a file or a folder of the package), else ``forecastaudit.a``.
  Relative imports are resolved against ``M``'s package first.
* Importing a submodule runs its parent packages' ``__init__`` first, so the edge goes to the
  submodule and to each of its parent packages, except the packages that contain ``M``
  itself: those have started importing before ``M`` ran, so Python does not run them again.
  In particular a package ``__init__`` that re-exports from its own submodules
  (``forecastaudit/reference/__init__.py`` importing ``forecastaudit.reference.fit``) is not a
  cycle: no edge is added from a submodule back to the package that contains it unless the
  submodule imports that package explicitly.
* ``from forecastaudit import Name`` of a public name resolved lazily by the package root
  (its ``_PUBLIC`` table, PEP 562 ``__getattr__``) imports the module that defines ``Name``
  at that moment, so the edge goes to that module.
"""

from __future__ import annotations

import ast
import subprocess
import sys
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1] / "forecastaudit"
PACKAGE = "forecastaudit"

# ---------------------------------------------------------------------- the import graph


def _module_names() -> dict[str, Path]:
    """Every module of the package: dotted name -> source file."""
    found: dict[str, Path] = {}
    for path in sorted(ROOT.rglob("*.py")):
        parts = list(path.relative_to(ROOT.parent).with_suffix("").parts)
        if parts[-1] == "__init__":
            parts = parts[:-1]
        found[".".join(parts)] = path
    return found


MODULES = _module_names()


def _is_package(name: str) -> bool:
    return MODULES.get(name, Path()).name == "__init__.py"


def _is_type_checking(test: ast.expr) -> bool:
    return (isinstance(test, ast.Name) and test.id == "TYPE_CHECKING") or (
        isinstance(test, ast.Attribute) and test.attr == "TYPE_CHECKING"
    )


def _import_time_statements(body: list[ast.stmt]):
    """Statements that run when the module is imported (see the module docstring)."""
    for node in body:
        if isinstance(node, ast.FunctionDef | ast.AsyncFunctionDef):
            continue
        if isinstance(node, ast.If):
            if _is_type_checking(node.test):
                yield from _import_time_statements(node.orelse)
                continue
            negated = isinstance(node.test, ast.UnaryOp) and isinstance(node.test.op, ast.Not)
            if negated and _is_type_checking(node.test.operand):
                yield from _import_time_statements(node.body)
                continue
        yield node
        if isinstance(node, ast.ClassDef):
            yield from _import_time_statements(node.body)
            continue
        for field in ("body", "orelse", "finalbody"):
            yield from _import_time_statements(getattr(node, field, None) or [])
        for handler in getattr(node, "handlers", None) or []:
            yield from _import_time_statements(handler.body)
        for case in getattr(node, "cases", None) or []:
            yield from _import_time_statements(case.body)


def _lazy_root_names() -> dict[str, str]:
    """The package root's ``_PUBLIC`` table: public name -> defining module."""
    tree = ast.parse(MODULES[PACKAGE].read_text(encoding="utf-8"))
    for node in tree.body:
        target = node.target if isinstance(node, ast.AnnAssign) else None
        if isinstance(node, ast.Assign) and len(node.targets) == 1:
            target = node.targets[0]
        if isinstance(target, ast.Name) and target.id == "_PUBLIC":
            value = ast.literal_eval(node.value)
            return {str(k): str(v) for k, v in value.items()}
    return {}


LAZY = _lazy_root_names()


def _ancestors(name: str) -> list[str]:
    parts = name.split(".")
    return [".".join(parts[:i]) for i in range(1, len(parts))]


def _own_packages(importer: str) -> set[str]:
    """The packages that have started importing before ``importer`` runs."""
    return {*_ancestors(importer), *([importer] if _is_package(importer) else [])}


def _targets(importer: str, node: ast.Import | ast.ImportFrom) -> set[str]:
    """The package modules named by one import statement (before the parent rule)."""
    named: set[str] = set()
    if isinstance(node, ast.Import):
        for alias in node.names:
            if alias.name == PACKAGE or alias.name.startswith(PACKAGE + "."):
                named.add(alias.name)
        return named
    if node.level:
        base = importer if _is_package(importer) else importer.rpartition(".")[0]
        for _ in range(node.level - 1):
            base = base.rpartition(".")[0]
        source = f"{base}.{node.module}" if node.module else base
    else:
        source = node.module or ""
    if not (source == PACKAGE or source.startswith(PACKAGE + ".")):
        return named
    for alias in node.names:
        candidate = f"{source}.{alias.name}"
        if candidate in MODULES:
            named.add(candidate)
        elif source == PACKAGE and alias.name in LAZY:
            named.add(LAZY[alias.name])
        else:
            named.add(source)
    return named


def import_graph() -> dict[str, set[str]]:
    """Module -> the package modules it imports at import time (edges as documented above)."""
    graph: dict[str, set[str]] = {}
    for name, path in MODULES.items():
        tree = ast.parse(path.read_text(encoding="utf-8"), filename=str(path))
        own = _own_packages(name)
        edges: set[str] = set()
        for node in _import_time_statements(tree.body):
            if isinstance(node, ast.Import | ast.ImportFrom):
                for target in _targets(name, node):
                    edges.update(a for a in (*_ancestors(target), target) if a not in own)
        edges.discard(name)
        graph[name] = {e for e in edges if e in MODULES}
    return graph


GRAPH = import_graph()


def _cycles(graph: dict[str, set[str]]) -> list[list[str]]:
    """Strongly connected components with more than one module (Tarjan 1972), each as one
    cycle through its members, spelled out as ``a -> b -> ... -> a``."""
    index: dict[str, int] = {}
    low: dict[str, int] = {}
    stack: list[str] = []
    on_stack: set[str] = set()
    components: list[list[str]] = []
    counter = 0

    def strongconnect(v: str) -> None:  # recursion depth is bounded by the module count
        nonlocal counter
        index[v] = low[v] = counter
        counter += 1
        stack.append(v)
        on_stack.add(v)
        for w in sorted(graph.get(v, ())):
            if w not in index:
                strongconnect(w)
                low[v] = min(low[v], low[w])
            elif w in on_stack:
                low[v] = min(low[v], index[w])
        if low[v] == index[v]:
            component = []
            while True:
                w = stack.pop()
                on_stack.discard(w)
                component.append(w)
                if w == v:
                    break
            if len(component) > 1:
                components.append(sorted(component))

    for v in sorted(graph):
        if v not in index:
            strongconnect(v)
    return [_one_cycle(graph, component) for component in components]


def _one_cycle(graph: dict[str, set[str]], component: list[str]) -> list[str]:
    """A shortest cycle through the first member of a strongly connected component."""
    members = set(component)
    start = component[0]
    paths = {start: [start]}
    queue = [start]
    while queue:
        v = queue.pop(0)
        for w in sorted(graph[v] & members):
            if w == start:
                return [*paths[v], start]
            if w not in paths:
                paths[w] = [*paths[v], w]
                queue.append(w)
    return [*component, start]  # not reached: a component always has a cycle


def test_the_graph_sees_known_imports() -> None:
    # Guards the parser itself: imports known to be in the package at module level.
    assert "forecastaudit.spec" in GRAPH["forecastaudit.conventions"]
    assert "forecastaudit.reference.fit" in GRAPH["forecastaudit.reference"]
    # The root imports only its version at module level; its public names are lazy.
    assert GRAPH[PACKAGE] == {"forecastaudit._version"}
    # Imports inside functions do not count (the plugin imports the pipeline on first use).
    assert "forecastaudit.pipeline" not in GRAPH["forecastaudit.pytest_plugin"]


def test_rules_on_small_sources(tmp_path: Path) -> None:
    source = """
from typing import TYPE_CHECKING
import os
from forecastaudit.spec import ModelSpec
try:
    from forecastaudit.errors import SpecError
except ImportError:
    pass
if TYPE_CHECKING:
    from forecastaudit.result import AuditResult
class Thing:
    from forecastaudit import layout
    def method(self):
        from forecastaudit.pipeline import audit
def function():
    import forecastaudit.cli
"""
    seen = set()
    for node in _import_time_statements(ast.parse(source).body):
        if isinstance(node, ast.Import | ast.ImportFrom):
            seen |= _targets("forecastaudit.example", node)
    assert seen == {"forecastaudit.spec", "forecastaudit.errors", "forecastaudit.layout"}
    # A submodule of another package also runs that package's __init__ ...
    assert _own_packages("forecastaudit.adapters.registry") == {
        "forecastaudit",
        "forecastaudit.adapters",
    }
    # ... and a lazily resolved root name imports the module that defines it.
    node = ast.parse("from forecastaudit import ModelSpec").body[0]
    assert _targets("forecastaudit.cli", node) == {LAZY["ModelSpec"]}
    # The cycle finder on a hand-made graph: a -> b -> c -> a, and d alone.
    graph = {"a": {"b"}, "b": {"c"}, "c": {"a", "d"}, "d": set()}
    assert _cycles(graph) == [["a", "b", "c", "a"]]


def test_no_import_cycles() -> None:
    cycles = _cycles(GRAPH)
    assert not cycles, "module-level import cycles:\n" + "\n".join(
        " -> ".join(cycle) for cycle in cycles
    )


# ---------------------------------------------------------------------- dependency direction

#: The layers of design.md ("Layout"), lowest first, by the first name below the package
#: (``forecastaudit.adapters.registry`` belongs to ``adapters``). A module may import from its
#: own layer and from the layers below it, never from a layer above.
LAYERS: list[tuple[str, set[str]]] = [
    (
        "foundation",
        # ``forecastaudit`` is the lazy package root; ``data`` holds the shipped files and
        # is not in design.md's list (it has no imports).
        {"forecastaudit", "spec", "layout", "conventions", "series", "estimate", "errors",
         "imported", "environments", "jsonutil", "files", "_version", "validation", "data"},
    ),
    ("estimators and reference", {"adapters", "reference"}),
    # ``fitting`` (running the adapters' fits on the execution seam) is not in design.md's
    # list; it sits with the seam it drives.
    ("execution", {"run", "fitting"}),
    ("diagnosis and search", {"diagnosis", "search"}),
    ("audit", {"pipeline", "result", "model_choice", "panel", "reading"}),
    ("record and report", {"record", "report"}),
    ("entry points", {"cli", "pytest_plugin", "testing", "demo"}),
]  # fmt: skip

#: Edges of the current code that point upward, allowed here until the code is changed.
#: Each is (importer, imported) as module names.
KNOWN_UPWARD: set[tuple[str, str]] = set()


def _unit(module: str) -> str:
    parts = module.split(".")
    return parts[1] if len(parts) > 1 else parts[0]


def _layer(module: str) -> int:
    unit = _unit(module)
    for number, (_, units) in enumerate(LAYERS):
        if unit in units:
            return number
    raise LookupError(unit)


def test_every_module_has_a_layer() -> None:
    unplaced = sorted({_unit(m) for m in MODULES} - set().union(*(u for _, u in LAYERS)))
    assert not unplaced, f"place these in LAYERS (design.md, 'Layout'): {unplaced}"


def _upward_edges() -> set[tuple[str, str]]:
    return {
        (importer, imported)
        for importer, targets in GRAPH.items()
        for imported in targets
        if _layer(imported) > _layer(importer)
    }


def test_modules_import_downward_only() -> None:
    found = _upward_edges()
    new = sorted(found - KNOWN_UPWARD)
    assert not new, "imports from a higher layer (design.md, 'Layout'):\n" + "\n".join(
        f"{a} ({LAYERS[_layer(a)][0]}) imports {b} ({LAYERS[_layer(b)][0]})" for a, b in new
    )
    gone = sorted(KNOWN_UPWARD - found)
    assert not gone, f"no longer imported upward; remove from KNOWN_UPWARD: {gone}"


def test_layer_order_catches_an_upward_import() -> None:
    # The rule itself: the diagnosis may use the reference, the reference may not use the
    # diagnosis; a module may use its own layer.
    assert _layer("forecastaudit.reference.fit") < _layer("forecastaudit.diagnosis.rescore")
    assert _layer("forecastaudit.pipeline") == _layer("forecastaudit.result")
    assert _layer("forecastaudit") == _layer("forecastaudit.spec") == 0


# ---------------------------------------------------------------------- light entry points

HEAVY = {"pandas", "scipy", "statsmodels", "numpy", "matplotlib", "pmdarima", "sktime",
         "statsforecast"}  # fmt: skip
MUST_NOT_LOAD = {"pandas", "scipy", "statsmodels"}


def _loaded_by(statement: str) -> list[str]:
    """Top-level packages among HEAVY loaded by ``statement`` in a fresh interpreter."""
    code = (
        f"import sys\n{statement}\n"
        f"print(sorted({{m.split('.')[0] for m in sys.modules}} & set({sorted(HEAVY)!r})))"
    )
    done = subprocess.run(
        [sys.executable, "-c", code],
        capture_output=True,
        text=True,
        timeout=120,
        check=False,
        cwd=ROOT.parent,
    )
    assert done.returncode == 0, done.stderr[-2000:]
    return ast.literal_eval(done.stdout.strip().splitlines()[-1])


@pytest.mark.parametrize(
    "statement", ["import forecastaudit", "import forecastaudit.pytest_plugin"]
)
def test_entry_points_load_no_heavy_library(statement: str) -> None:
    # pytest imports every installed plugin at start-up, in every project of the environment,
    # and `import forecastaudit` is documented as loading nothing heavy (its lazy root).
    loaded = set(_loaded_by(statement))
    assert not loaded & MUST_NOT_LOAD, loaded
    assert not loaded, f"{statement} loads {sorted(loaded)}"
