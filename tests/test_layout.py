"""The package's rooms keep the data flow's order (DESIGN.md, "Layout").

Every ``import`` in scanmass, at module level or inside a function (and under
``if TYPE_CHECKING``, since a type named from a later stage is a dependency on it too), is
read with :mod:`ast` from the sources of the scanmass that the tests import. The test fails
when a module imports a later stage than its own, when the import graph has a cycle, when a
module belongs to no stage, and when an entry of :data:`KNOWN_VIOLATIONS` no longer occurs
(so the list only shrinks).
"""

from __future__ import annotations

import ast
from collections.abc import Iterator
from pathlib import Path

import pytest

import scanmass

#: The stages in data-flow order; a module may import its own stage and earlier ones only.
#: A stage is a module (``scanmass.section``) or a subpackage with all its modules
#: (``scanmass.scale`` holds ``scanmass.scale.mat`` ...). Modules of one stage may import each other.
LAYERS: list[tuple[str, ...]] = [
    (
        "scanmass.errors",
        "scanmass.options",
        "scanmass.names",
        "scanmass.geometry",
        "scanmass.numeric",
        "scanmass.raster",
        "scanmass.readfile",
    ),
    ("scanmass.load",),
    ("scanmass.scale",),
    ("scanmass.segment",),
    ("scanmass.mapping",),
    ("scanmass.section",),
    ("scanmass.uncertainty",),
    ("scanmass.measurement",),
    ("scanmass.mass",),  # works on Measurements only; the pipeline applies it when asked
    ("scanmass.pipeline",),
    ("scanmass.outputs",),
    ("scanmass.batch",),
    ("scanmass.testing",),
    ("scanmass.serve",),
    ("scanmass.cli",),
]
#: Outside the order: the package's lazy public names and ``python -m scanmass``.
EXEMPT = {"scanmass", "scanmass.__main__"}

#: Violations present today, each to be removed by the change that fixes it. Entries are
#: "layer: A -> B" (A imports the later stage B) or "cycle: A, B, ..." (modules of one cycle).
KNOWN_VIOLATIONS: set[str] = set()

PACKAGE_DIR = Path(scanmass.__file__).resolve().parent


def _modules() -> dict[str, Path]:
    """Module name -> source file, for every .py file of the imported scanmass."""
    found = {}
    for path in sorted(PACKAGE_DIR.rglob("*.py")):
        parts = list(path.relative_to(PACKAGE_DIR).with_suffix("").parts)
        if parts[-1] == "__init__":
            parts.pop()
        found[".".join(["scanmass", *parts])] = path
    return found


MODULES = _modules()


def _layer(module: str) -> int | None:
    for rank, stages in enumerate(LAYERS):
        if any(module == s or module.startswith(s + ".") for s in stages):
            return rank
    return None


def _resolve(name: str) -> str | None:
    """The scanmass module that ``import name`` loads, or None outside scanmass."""
    while name and name not in MODULES:
        name = name.rpartition(".")[0]
    return name or None


def _imported(module: str, tree: ast.AST) -> Iterator[tuple[str, int]]:
    """(scanmass module imported, line) for every import statement in ``tree``."""
    package = module if MODULES[module].name == "__init__.py" else module.rpartition(".")[0]
    for node in ast.walk(tree):
        if isinstance(node, ast.Import):
            for alias in node.names:
                yield from ((m, node.lineno) for m in [_resolve(alias.name)] if m)
        elif isinstance(node, ast.ImportFrom):
            base = node.module or ""
            if node.level:  # relative (ruff bans them, but resolve them all the same)
                anchor = package.split(".")[: len(package.split(".")) - node.level + 1]
                base = ".".join([*anchor, base] if base else anchor)
            for alias in node.names:
                if base == "scanmass" and alias.name in scanmass._WHERE:  # a lazy public name
                    target = _resolve(scanmass._WHERE[alias.name])
                else:  # `from pkg import submodule` imports the submodule
                    target = _resolve(f"{base}.{alias.name}") if f"{base}.{alias.name}" in MODULES else _resolve(base)
                if target:
                    yield target, node.lineno
        elif (
            isinstance(node, ast.Call)
            and isinstance(node.func, ast.Attribute)
            and node.func.attr == "import_module"
            and node.args
            and isinstance(node.args[0], ast.Constant)
            and isinstance(node.args[0].value, str)
        ):
            target = _resolve(node.args[0].value)
            if target:
                yield target, node.lineno


def import_graph() -> dict[str, dict[str, int]]:
    """Module -> {imported scanmass module: first line}; self-imports dropped."""
    graph: dict[str, dict[str, int]] = {}
    for module, path in MODULES.items():
        edges: dict[str, int] = {}
        for target, line in _imported(module, ast.parse(path.read_text(encoding="utf-8"), filename=str(path))):
            if target != module:
                edges.setdefault(target, line)
        graph[module] = edges
    return graph


def _cycles(graph: dict[str, dict[str, int]]) -> list[list[str]]:
    """Strongly connected components with more than one module (Tarjan's algorithm)."""
    index: dict[str, int] = {}
    low: dict[str, int] = {}
    stack: list[str] = []
    on_stack: set[str] = set()
    found = []

    def visit(v: str) -> None:
        index[v] = low[v] = len(index)
        stack.append(v)
        on_stack.add(v)
        for w in graph.get(v, {}):
            if w not in index:
                visit(w)
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
                found.append(sorted(component))

    for v in sorted(graph):
        if v not in index:
            visit(v)
    return found


def violations(graph: dict[str, dict[str, int]]) -> dict[str, str]:
    """Violation key -> where it occurs."""
    found = {}
    for module, edges in graph.items():
        if module in EXEMPT:
            continue
        for target, line in edges.items():
            if target in EXEMPT:
                continue
            if _layer(target) > _layer(module):  # type: ignore[operator]  # unknown modules fail their own test
                found[f"layer: {module} -> {target}"] = f"{MODULES[module].relative_to(PACKAGE_DIR.parent)}:{line}"
    inner = {m: {t: n for t, n in e.items() if t not in EXEMPT} for m, e in graph.items() if m not in EXEMPT}
    for component in _cycles(inner):
        found["cycle: " + ", ".join(component)] = " -> ".join(
            f"{a} (line {graph[a][b]})"
            for a, b in zip(component, component[1:] + component[:1], strict=True)
            if b in graph[a]
        )
    return found


def test_every_module_belongs_to_a_stage():
    unknown = sorted(m for m in MODULES if m not in EXEMPT and _layer(m) is None)
    assert not unknown, f"add these modules to LAYERS in tests/test_layout.py (and to DEVELOPERS.md): {unknown}"


def test_no_stage_imports_a_later_one_and_no_cycles():
    found = violations(import_graph())
    new = {k: v for k, v in found.items() if k not in KNOWN_VIOLATIONS}
    assert not new, "imports against the stage order (DESIGN.md, Layout):\n" + "\n".join(
        f"  {k}   at {v}" for k, v in sorted(new.items())
    )


def test_known_violations_still_occur():
    gone = sorted(KNOWN_VIOLATIONS - set(violations(import_graph())))
    assert not gone, f"fixed, so remove from KNOWN_VIOLATIONS in tests/test_layout.py: {gone}"


# --- the checker itself, on small invented graphs ---------------------------------------


def test_cycle_finder_on_small_graphs():
    assert _cycles({"a": {"b": 1}, "b": {"c": 1}, "c": {}}) == []
    assert _cycles({"a": {"b": 1}, "b": {"c": 1}, "c": {"a": 1}, "d": {"a": 1}}) == [["a", "b", "c"]]
    assert sorted(_cycles({"a": {"b": 1}, "b": {"a": 1}, "c": {"d": 1}, "d": {"c": 1}})) == [["a", "b"], ["c", "d"]]


def test_layer_rule_flags_an_upward_import_and_allows_a_downward_one():
    graph = {
        "scanmass.section": {"scanmass.pipeline": 3, "scanmass.errors": 2},
        "scanmass.pipeline": {"scanmass.section": 5},
    }
    found = violations(graph)
    assert "layer: scanmass.section -> scanmass.pipeline" in found
    assert "layer: scanmass.pipeline -> scanmass.section" not in found
    assert "cycle: scanmass.pipeline, scanmass.section" in found


@pytest.mark.parametrize(
    ("source", "expected"),
    [
        ("import scanmass.section", {"scanmass.section"}),
        ("from scanmass.scale import mat", {"scanmass.scale.mat"}),
        ("from scanmass.scale.mat import make_mat", {"scanmass.scale.mat"}),
        ("from scanmass import measure", {_resolve(scanmass._WHERE["measure"])}),
        ("def f():\n    from scanmass.cli.app import app\n", {"scanmass.cli.app"}),
        ("import importlib\nimportlib.import_module('scanmass.pipeline')", {"scanmass.pipeline"}),
        ("from . import rings", {"scanmass.segment.rings"}),
        ("import numpy", set()),
    ],
)
def test_import_reader(source, expected):
    assert {m for m, _ in _imported("scanmass.segment", ast.parse(source))} == expected


def test_tests_import_their_helpers_as_top_level_modules():
    """CI runs the installed package with ``PYTHONSAFEPATH=1 pytest --pyargs``, where ``tests`` is no package: a test
    module importing ``tests._helper`` fails to collect and stops the whole session (stops 31 and 32). The helpers
    are on the path as top-level modules (``from _reallight_truth import ...``)."""
    here = Path(__file__).resolve().parent
    bad = [
        f"{path.name}:{node.lineno}"
        for path in sorted(here.glob("*.py"))
        for node in ast.walk(ast.parse(path.read_text()))
        if (isinstance(node, ast.ImportFrom) and (node.module or "").split(".")[0] == "tests")
        or (isinstance(node, ast.Import) and any(a.name.split(".")[0] == "tests" for a in node.names))
    ]
    assert not bad, f"import the test helpers as top-level modules, not through 'tests.': {bad}"
