"""The package's layers: every import points down (or stays in its layer), and no modules import each other in a cycle.

Source of the rule: the project's contributor guide (DEVELOPERS.md, "Layout"); no outside reference values.
The imports are read with ``ast`` from the source, so an import inside a function or under
``TYPE_CHECKING`` counts as much as one at the top of a module. The checker is tested on invented
module sources first, so that it is known to find an upward import and a cycle.
"""

from __future__ import annotations

import ast
from pathlib import Path

import pytest

PACKAGE = Path(__file__).resolve().parents[1] / "roundscore"

#: The layers, bottom to top: a module may import modules of its own layer or of a lower one. Each layer is
#: given by module-name prefixes (a folder, or single top-level modules).
LAYERS: tuple[tuple[str, tuple[str, ...]], ...] = (
    ("foundation", ("roundscore.errors", "roundscore.text", "roundscore.ranges", "roundscore.choices")),
    ("support", ("roundscore.support",)),
    ("stats", ("roundscore.stats",)),
    ("model", ("roundscore.model",)),
    ("evaluation", ("roundscore.evaluation",)),
    ("intake", ("roundscore.intake",)),
    ("outputs", ("roundscore.outputs",)),
    ("history", ("roundscore.history",)),
    ("demo", ("roundscore.demo",)),
    ("pipeline", ("roundscore.pipeline",)),
    ("commands", ("roundscore.commands",)),
    ("entry", ("roundscore.cli", "roundscore.__main__", "roundscore")),
)


def layer_of(module: str, layers=LAYERS) -> int | None:
    """The index of the layer holding ``module`` (the longest matching prefix wins), or None."""
    best: tuple[int, int] | None = None
    for i, (_, prefixes) in enumerate(layers):
        for p in prefixes:
            if module == p or module.startswith(p + "."):
                if best is None or len(p) > best[1]:
                    best = (i, len(p))
    return None if best is None else best[0]


def package_sources(root: Path = PACKAGE) -> dict[str, tuple[str, bool]]:
    """Module name → (source, is a package ``__init__``) for every module of the package."""
    out = {}
    for path in sorted(root.rglob("*.py")):
        parts = list(path.relative_to(root.parent).with_suffix("").parts)
        is_pkg = parts[-1] == "__init__"
        if is_pkg:
            parts = parts[:-1]
        out[".".join(parts)] = (path.read_text(encoding="utf-8"), is_pkg)
    return out


def _resolve(name: str, modules) -> str | None:
    """The module an imported dotted name belongs to: itself, or its longest prefix that is a module."""
    while name and name not in modules:
        name = name.rpartition(".")[0]
    return name or None


def import_graph(sources: dict[str, tuple[str, bool]]) -> dict[str, set[str]]:
    """Module → the package's modules it imports (absolute and relative, anywhere in the module)."""
    graph: dict[str, set[str]] = {}
    for module, (source, is_pkg) in sources.items():
        package = module.split(".") if is_pkg else module.split(".")[:-1]
        deps: set[str] = set()
        for node in ast.walk(ast.parse(source)):
            if isinstance(node, ast.Import):
                for alias in node.names:
                    if alias.name.split(".")[0] == "roundscore":
                        deps.add(_resolve(alias.name, sources))
            elif isinstance(node, ast.ImportFrom):
                if node.level:
                    base_parts = package[: len(package) - node.level + 1]
                    base = ".".join(base_parts + ([node.module] if node.module else []))
                else:
                    base = node.module or ""
                if base.split(".")[0] != "roundscore":
                    continue
                for alias in node.names:  # ``from package import module`` imports that module
                    full = f"{base}.{alias.name}"
                    deps.add(full if full in sources else _resolve(base, sources))
        deps.discard(None)
        deps.discard(module)
        graph[module] = deps
    return graph


def upward_imports(graph: dict[str, set[str]], layers=LAYERS) -> list[str]:
    """Every import of a module from a higher layer, as 'a (layer) imports b (layer)'."""
    names = [n for n, _ in layers]
    found = []
    for module, deps in sorted(graph.items()):
        here = layer_of(module, layers)
        for dep in sorted(deps):
            there = layer_of(dep, layers)
            if here is not None and there is not None and there > here:
                found.append(f"{module} ({names[here]}) imports {dep} ({names[there]})")
    return found


def unplaced(graph: dict[str, set[str]], layers=LAYERS) -> list[str]:
    """Modules that belong to no layer (a new top-level module must be given one)."""
    return sorted(m for m in graph if layer_of(m, layers) is None)


def cycles(graph: dict[str, set[str]]) -> list[list[str]]:
    """One cycle (a → … → a) for every group of modules that import each other (Tarjan's strongly connected
    components, iteratively)."""
    index: dict[str, int] = {}
    low: dict[str, int] = {}
    stack: list[str] = []
    on_stack: set[str] = set()
    groups: list[list[str]] = []
    counter = 0
    for start in sorted(graph):
        if start in index:
            continue
        work = [(start, iter(sorted(graph.get(start, ()))))]
        index[start] = low[start] = counter
        counter += 1
        stack.append(start)
        on_stack.add(start)
        while work:
            node, children = work[-1]
            for child in children:
                if child not in graph:
                    continue
                if child not in index:
                    index[child] = low[child] = counter
                    counter += 1
                    stack.append(child)
                    on_stack.add(child)
                    work.append((child, iter(sorted(graph[child]))))
                    break
                if child in on_stack:
                    low[node] = min(low[node], index[child])
            else:
                work.pop()
                if work:
                    low[work[-1][0]] = min(low[work[-1][0]], low[node])
                if low[node] == index[node]:
                    group = []
                    while True:
                        m = stack.pop()
                        on_stack.discard(m)
                        group.append(m)
                        if m == node:
                            break
                    if len(group) > 1:
                        groups.append(sorted(group))
    return [_cycle_in(sorted(g), graph) for g in groups]


def _cycle_in(group: list[str], graph: dict[str, set[str]]) -> list[str]:
    """A shortest path from the group's first module back to itself, inside the group."""
    members, first = set(group), group[0]
    paths = {first: [first]}
    queue = [first]
    while queue:
        node = queue.pop(0)
        for child in sorted(graph[node] & members):
            if child == first:
                return paths[node] + [first]
            if child not in paths:
                paths[child] = paths[node] + [child]
                queue.append(child)
    return group  # not reached: a strongly connected group always closes


# --------------------------------------------------------------------------- the checker itself

FAKE_LAYERS = (("low", ("roundscore.low",)), ("high", ("roundscore.high",)))


def test_checker_finds_an_upward_import_anywhere_in_a_module():
    sources = {
        "roundscore.low": ("", True),
        "roundscore.low.a": ("def f():\n    from roundscore.high.b import thing\n", False),  # inside a function
        "roundscore.low.c": ("from typing import TYPE_CHECKING\nif TYPE_CHECKING:\n    import roundscore.high.b\n",
                             False),
        "roundscore.high": ("", True),
        "roundscore.high.b": ("from roundscore.low import a\nfrom ..low.c import x\n", False),  # down: fine
    }
    graph = import_graph(sources)
    assert graph["roundscore.high.b"] == {"roundscore.low.a", "roundscore.low.c"}
    assert upward_imports(graph, FAKE_LAYERS) == [
        "roundscore.low.a (low) imports roundscore.high.b (high)",
        "roundscore.low.c (low) imports roundscore.high.b (high)",
    ]


def test_checker_finds_a_cycle_and_an_unplaced_module():
    sources = {
        "roundscore.low": ("", True),
        "roundscore.low.a": ("from . import b\n", False),  # relative
        "roundscore.low.b": ("from roundscore.low.c import y\n", False),
        "roundscore.low.c": ("def g():\n    import roundscore.low.a as a\n", False),
        "roundscore.low.d": ("from roundscore.low import a, b\n", False),  # imports the cycle, is not in it
        "roundscore.elsewhere": ("", False),
    }
    graph = import_graph(sources)
    assert cycles(graph) == [["roundscore.low.a", "roundscore.low.b", "roundscore.low.c", "roundscore.low.a"]]
    assert unplaced(graph, FAKE_LAYERS) == ["roundscore.elsewhere"]
    del sources["roundscore.low.c"]
    assert cycles(import_graph(sources)) == []


def test_layer_of_takes_the_longest_prefix():
    assert layer_of("roundscore.cli") == len(LAYERS) - 1
    assert LAYERS[layer_of("roundscore.model.round")][0] == "model"
    assert LAYERS[layer_of("roundscore.errors")][0] == "foundation"
    assert layer_of("roundscorex") is None


# --------------------------------------------------------------------------- the package


@pytest.fixture(scope="module")
def graph() -> dict[str, set[str]]:
    return import_graph(package_sources())


def test_every_module_is_in_a_layer(graph):
    assert len(graph) > 40  # the whole package was read
    assert unplaced(graph) == []


def test_imports_point_down(graph):
    assert upward_imports(graph) == []


def test_no_import_cycle(graph):
    assert cycles(graph) == []


def test_subpackages_import_nothing_on_import():
    # A folder's __init__ holds its docstring only, so importing one module of a layer never drags in the
    # rest of it (the graph above then tells the whole truth).
    for module, (source, is_pkg) in package_sources().items():
        if is_pkg and module != "roundscore":
            body = ast.parse(source).body
            assert all(isinstance(n, ast.Expr) and isinstance(n.value, ast.Constant) for n in body), module


def test_the_evaluation_reads_no_file(graph):
    # The evaluation gets every input from intake: it imports no reader (and is below intake, which the
    # layer check enforces); this names the rule the layers exist for.
    intake = [d for m, deps in graph.items() if m.startswith("roundscore.evaluation") for d in deps
              if d.startswith("roundscore.intake")]
    assert intake == []
    for module, (source, _) in package_sources().items():
        if module.startswith("roundscore.evaluation"):
            tree = ast.parse(source)
            called = {n.func.id for n in ast.walk(tree) if isinstance(n, ast.Call) and isinstance(n.func, ast.Name)}
            attrs = {n.attr for n in ast.walk(tree) if isinstance(n, ast.Attribute)}
            assert "open" not in called and not attrs & {"read_text", "read_bytes", "open"}, module
