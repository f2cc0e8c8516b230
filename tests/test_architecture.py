"""The package's layers: data flows one way, the library never imports typer or rich, no import cycles.

Imports are read from the source (module level and inside functions alike), so
an import hidden in a function counts.
"""

import ast
import dataclasses
import importlib
import pkgutil
from pathlib import Path

import pytest

import termination
import termination.structures

# Layer of each top-level part, bottom first; a module may import its own layer and those listed for it.
BOTTOM = {
    "termination.errors",
    "termination.defaults",
    "termination.quantities",
    "termination.units",
    "termination.arrays",
    "termination.outputs",
    "termination.inputs",
    "termination.tabular",
}
# The leaves of the package: constants, type aliases and unit tags that import nothing of ours.
LEAVES = {"termination.defaults", "termination.units", "termination.arrays", "termination.errors"}
ALLOWED = {
    "package": {"bottom"},  # termination/__init__.py re-exports the rest lazily, by name
    "bottom": {"bottom"},
    "algebra": set(),  # imports nothing of the package but its leaves (LEAVES)
    "bulk": {"bottom", "algebra"},
    "structures": {"bottom", "algebra", "bulk"},
    "surface": {"bottom", "algebra", "bulk"},
    "imaging": {"bottom", "algebra"},
    "identification": {"bottom", "algebra", "bulk", "surface", "imaging"},
    "reports": {"bottom", "algebra", "bulk", "structures", "surface", "imaging", "identification"},
    # figures draw the records with matplotlib (imported lazily); they sit above the reports
    "figures": {"bottom", "algebra", "bulk", "structures", "surface", "imaging", "identification", "reports"},
    "top": {"bottom", "algebra", "bulk", "structures", "surface", "imaging", "identification", "reports", "figures"},
    "cli": {
        "bottom",
        "algebra",
        "bulk",
        "structures",
        "surface",
        "imaging",
        "identification",
        "reports",
        "figures",
        "top",
        "package",
    },
}


def layer(module):
    if module in BOTTOM:
        return "bottom"
    if module == "termination":
        return "package"
    if module == "termination.cli":
        return "cli"
    if module == "termination.reports":
        return "reports"
    if module in (
        "termination.serialise",
        "termination.tables",
        "termination.testing",
        "termination.screening",
        "termination.htmlreport",
    ):
        return "top"
    part = module.split(".")[1]
    assert part in ALLOWED, f"{module} is in no layer; add it to the architecture test"
    return part


def _modules():
    found = {}
    for package in (termination, termination.structures):
        for info in pkgutil.walk_packages(package.__path__, prefix=package.__name__ + "."):
            spec = importlib.util.find_spec(info.name)
            found[info.name] = Path(spec.origin)
    found["termination"] = Path(termination.__file__)
    return found


MODULES = _modules()


def imports_of(module, path):
    """Every module name imported anywhere in the file, resolved to absolute names."""
    tree = ast.parse(path.read_text(encoding="utf-8"))
    package = module if path.name == "__init__.py" else module.rpartition(".")[0]
    out = set()
    for node in ast.walk(tree):
        if isinstance(node, ast.Import):
            out.update(alias.name for alias in node.names)
        elif isinstance(node, ast.ImportFrom):
            base = node.module or ""
            if node.level:
                parts = package.split(".")
                base = ".".join(parts[: len(parts) - node.level + 1] + ([base] if base else []))
            for alias in node.names:
                full = f"{base}.{alias.name}"
                out.add(full if full in MODULES else base)
    return out


GRAPH = {m: {i for i in imports_of(m, p) if i in MODULES} for m, p in MODULES.items()}
EXTERNAL = {m: {i.split(".")[0] for i in imports_of(m, p)} for m, p in MODULES.items()}


def test_the_walk_sees_every_layer():
    assert {layer(m) for m in MODULES} >= {
        "algebra",
        "bulk",
        "structures",
        "surface",
        "imaging",
        "identification",
        "reports",
        "figures",
        "top",
        "cli",
        "bottom",
    }


def test_the_library_never_imports_typer_or_rich():
    for module, names in EXTERNAL.items():
        if module != "termination.cli":
            assert not names & {"typer", "rich", "click"}, module


@pytest.mark.parametrize("module", sorted(GRAPH))
def test_imports_follow_the_layers(module):
    mine = layer(module)
    for target in GRAPH[module]:
        if target in LEAVES:
            continue
        theirs = layer(target)
        assert theirs == mine or theirs in ALLOWED[mine], f"{module} ({mine}) imports {target} ({theirs})"


def test_the_leaves_import_nothing_of_the_package():
    for module in LEAVES:
        assert GRAPH[module] == set(), module


def test_imaging_does_not_import_the_surface_layer():
    for module, targets in GRAPH.items():
        if layer(module) == "imaging":
            assert not {layer(t) for t in targets} & {"bulk", "surface", "identification", "structures"}, module


def find_cycle(graph):
    """A cycle of the directed graph as a list of nodes, or None."""
    state, stack = {}, []

    def visit(node):
        state[node] = 1
        stack.append(node)
        for nxt in sorted(graph.get(node, ())):
            if state.get(nxt) == 1:
                return stack[stack.index(nxt) :] + [nxt]
            if nxt not in state:
                found = visit(nxt)
                if found:
                    return found
        state[node] = 2
        stack.pop()
        return None

    for node in sorted(graph):
        if node not in state:
            found = visit(node)
            if found:
                return found
    return None


def test_no_import_cycles():
    assert find_cycle(GRAPH) is None, " -> ".join(find_cycle(GRAPH))


def test_the_cycle_check_can_fail():
    assert find_cycle({"a": {"b"}, "b": {"c"}, "c": {"a"}}) == ["a", "b", "c", "a"]
    assert find_cycle({"a": {"b"}, "b": set()}) is None


def test_no_result_field_is_typed_object():
    for module in MODULES:
        if module == "termination.cli":
            continue
        mod = importlib.import_module(module)
        for obj in vars(mod).values():
            if isinstance(obj, type) and dataclasses.is_dataclass(obj) and obj.__module__ == module:
                for f in dataclasses.fields(obj):
                    assert f.type not in (object, "object"), f"{module}.{obj.__name__}.{f.name}"
