"""The codebase's layering rules, read from the source (issue #12).

- no import cycle among cubeloupe's modules, counting imports inside functions;
- the core analysis modules import neither the delivery check nor the commands;
- nothing in analysis/ imports the widgets, ipywidgets, bqplot or traitlets;
- widgets import analysis names only from `cubeloupe.analysis` (or a public
  subpackage's namespace), never from a module inside it;
- no private name (``_x``) is imported from another module;
- modules stay small enough to read (generated data and generators aside).
"""

import ast
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]
PACKAGES = {"analysis": "cubeloupe.analysis", "widgets": "cubeloupe.widgets"}
# Layers above the core: the core must not import them.
UPPER_LAYERS = ("cubeloupe.analysis.check", "cubeloupe.analysis.commands")
# Public subpackage namespaces widgets may import from.
PUBLIC_NAMESPACES = {"cubeloupe.analysis", "cubeloupe.analysis.check"}
MAX_LINES = 700
LONG_ON_PURPOSE = {"analysis/data/make_transitions.py"}  # a data generator: one table of published values


def _modules():
    found = {}
    for folder, package in PACKAGES.items():
        for path in sorted((ROOT / folder).rglob("*.py")):
            parts = path.relative_to(ROOT / folder).with_suffix("").parts
            if parts[-1] == "__init__":
                parts = parts[:-1]
            found[".".join((package, *parts))] = path
    return found


MODULES = _modules()


def _is_package(name):
    return MODULES[name].name == "__init__.py"


def _imports(name):
    """(imported module, imported names, line) for every import statement in module ``name``."""
    path = MODULES[name]
    tree = ast.parse(path.read_text(), filename=str(path))
    base = name if _is_package(name) else name.rsplit(".", 1)[0]
    out = []
    for node in ast.walk(tree):
        if isinstance(node, ast.Import):
            for alias in node.names:
                out.append((alias.name, [], node.lineno))
        elif isinstance(node, ast.ImportFrom):
            if node.level:
                anchor = base.split(".")
                anchor = anchor[:len(anchor) - (node.level - 1)]
                target = ".".join(anchor + ([node.module] if node.module else []))
            else:
                target = node.module
            out.append((target, [a.name for a in node.names], node.lineno))
    return out


def _project_targets(target, names):
    """The project modules an import statement loads (a module, or its submodules named in ``names``)."""
    hits = set()
    if target in MODULES:
        hits.add(target)
    for n in names:
        if f"{target}.{n}" in MODULES:
            hits.add(f"{target}.{n}")
    return hits


def _graph():
    graph = {}
    for name in MODULES:
        edges = set()
        for target, names, _ in _imports(name):
            edges |= _project_targets(target, names)
        # A package's __init__ re-exporting its own modules is the namespace, not a dependency cycle.
        graph[name] = {t for t in edges if t != name and not (_is_package(t) and name.startswith(t + "."))}
    return graph


def test_no_import_cycles():
    graph = _graph()
    state, stack, cycles = {}, [], []

    def visit(node):
        state[node] = "open"
        stack.append(node)
        for nxt in graph[node]:
            if _is_package(nxt) and node.startswith(nxt):
                continue
            if state.get(nxt) == "open":
                cycles.append(stack[stack.index(nxt):] + [nxt])
            elif nxt not in state:
                visit(nxt)
        stack.pop()
        state[node] = "done"

    for node in graph:
        if _is_package(node):
            continue  # namespaces import everything below them by design
        if node not in state:
            visit(node)
    assert not cycles, "import cycles: " + "; ".join(" -> ".join(c) for c in cycles)


def _core_modules():
    return [n for n in MODULES if n.startswith("cubeloupe.analysis")
            and not any(n == layer or n.startswith(layer + ".") for layer in UPPER_LAYERS)
            and n != "cubeloupe.analysis"]


@pytest.mark.parametrize("name", _core_modules())
def test_core_imports_neither_the_check_nor_the_commands_nor_the_widgets(name):
    for target, names, line in _imports(name):
        loaded = {target} | {f"{target}.{n}" for n in names}
        for module in loaded:
            assert not any(module == layer or module.startswith(layer + ".") for layer in UPPER_LAYERS), \
                f"{name} line {line} imports {module}, a layer above the core"
            assert module.split(".")[0] not in {"ipywidgets", "bqplot", "traitlets", "bqplot_image_gl"}, \
                f"{name} line {line} imports {module}"
            assert not module.startswith("cubeloupe.widgets"), f"{name} line {line} imports the widgets"


@pytest.mark.parametrize("name", [n for n in MODULES if n.startswith("cubeloupe.widgets")])
def test_widgets_use_only_the_public_analysis_namespace(name):
    for target, names, line in _imports(name):
        if target and target.startswith("cubeloupe.analysis"):
            assert target in PUBLIC_NAMESPACES, f"{name} line {line} imports from {target}; use cubeloupe.analysis"
            private = [n for n in names if n.startswith("_")]
            assert not private, f"{name} line {line} imports private names {private}"


@pytest.mark.parametrize("name", list(MODULES))
def test_no_private_name_crosses_a_module(name):
    for target, names, line in _imports(name):
        if not target or not target.startswith("cubeloupe"):
            continue
        for n in names:
            if n.startswith("_") and not n.startswith("__") and f"{target}.{n}" not in MODULES:
                pytest.fail(f"{name} line {line} imports the private name {n} from {target}")


@pytest.mark.parametrize("name", list(MODULES))
def test_modules_stay_readable(name):
    path = MODULES[name]
    if str(path.relative_to(ROOT)) in LONG_ON_PURPOSE:
        return
    n_lines = len(path.read_text().splitlines())
    assert n_lines <= MAX_LINES, f"{path.relative_to(ROOT)} has {n_lines} lines; split it by concept"
