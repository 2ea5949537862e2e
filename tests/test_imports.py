"""Imports point one way: no circle among rootvar's modules, no private name taken across them."""

import ast
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]
SOURCES = {"core": "rootvar.core", "addin": "rootvar.addin"}


def _modules():
    """Dotted name -> (path, is_package) of every module of the two packages."""
    found = {}
    for folder, package in SOURCES.items():
        for path in sorted((ROOT / folder).rglob("*.py")):
            parts = path.relative_to(ROOT / folder).with_suffix("").parts
            is_package = parts[-1] == "__init__"
            name = ".".join([package, *(parts[:-1] if is_package else parts)])
            found[name] = (path, is_package)
    return found


MODULES = _modules()


#: Files outside the two packages that may still not take a private name from them.
USERS = sorted(p for folder in ("tests", "benchmarks") for p in (ROOT / folder).rglob("*.py"))


def _imports(name):
    """(imported module, imported names, line) for every import statement of a module or file."""
    path, is_package = MODULES[name] if name in MODULES else (name, False)
    tree = ast.parse(path.read_text(encoding="utf-8"))
    here = name if is_package else str(name).rpartition(".")[0]
    for node in ast.walk(tree):
        if isinstance(node, ast.Import):
            for alias in node.names:
                yield alias.name, (), node.lineno
        elif isinstance(node, ast.ImportFrom):
            base = node.module or ""
            if node.level:
                anchor = here.split(".")
                anchor = anchor[: len(anchor) - node.level + 1]
                base = ".".join([*anchor, base]) if base else ".".join(anchor)
            yield base, tuple(a.name for a in node.names), node.lineno


def _path(name):
    """The file of a module name, or the file itself for a test or benchmark."""
    return MODULES[name][0] if name in MODULES else name


def _edges():
    """Module -> the rootvar modules it imports (a ``from pkg import module`` names the module)."""
    graph = {name: set() for name in MODULES}
    for name in MODULES:
        for target, names, _ in _imports(name):
            if target in MODULES and target != name:
                graph[name].add(target)
            for item in names:
                if f"{target}.{item}" in MODULES:
                    graph[name].add(f"{target}.{item}")
    return graph


def _cycle(graph):
    state, stack = {}, []

    def visit(node):
        state[node] = "open"
        stack.append(node)
        for nxt in sorted(graph[node]):
            if state.get(nxt) == "open":
                return stack[stack.index(nxt) :] + [nxt]
            if nxt not in state and (found := visit(nxt)):
                return found
        stack.pop()
        state[node] = "done"
        return None

    for node in sorted(graph):
        if node not in state and (found := visit(node)):
            return found
    return None


def test_no_module_imports_itself_through_a_circle():
    graph = _edges()
    # A package's __init__ importing its own modules is not a circle of the code; leave it out
    # of the walk only where it is the lazy public map of rootvar.core.
    graph["rootvar.core"] = set()
    assert _cycle(graph) is None, " -> ".join(_cycle(graph))


def test_no_private_name_is_imported_from_another_module():
    taken = []
    for name in [*MODULES, *USERS]:
        for target, names, line in _imports(name):
            if not target.startswith("rootvar"):
                continue
            for item in names:
                if item.startswith("_") and not item.startswith("__"):
                    taken.append(f"{_path(name).relative_to(ROOT)}:{line} {target}.{item}")
    assert taken == [], "\n".join(taken)


def test_no_private_attribute_is_read_off_another_rootvar_module():
    taken = []
    for name in [*MODULES, *USERS]:
        path = _path(name)
        tree = ast.parse(path.read_text(encoding="utf-8"))
        bound = {}
        for target, names, _ in _imports(name):
            for item in names:
                if f"{target}.{item}" in MODULES:
                    bound[item] = f"{target}.{item}"
        for node in ast.walk(tree):
            if isinstance(node, ast.ImportFrom):
                for alias in node.names:
                    if alias.asname and alias.name in bound:
                        bound[alias.asname] = bound[alias.name]
            elif isinstance(node, ast.Import):
                for alias in node.names:
                    if alias.asname and alias.name in MODULES:
                        bound[alias.asname] = alias.name
        for node in ast.walk(tree):
            if (
                isinstance(node, ast.Attribute)
                and isinstance(node.value, ast.Name)
                and node.value.id in bound
                and node.attr.startswith("_")
                and not node.attr.startswith("__")
            ):
                taken.append(f"{path.relative_to(ROOT)}:{node.lineno} {node.value.id}.{node.attr}")
    assert taken == [], "\n".join(taken)


@pytest.mark.parametrize("layer", ["rootvar.core"])
def test_the_core_never_names_the_spreadsheet_layer(layer):
    for name in MODULES:
        if not name.startswith(layer):
            continue
        for target, _, line in _imports(name):
            top = target.split(".")[0]
            assert top not in {"xlwings", "openpyxl"} and not target.startswith("rootvar.addin"), (
                f"{name}:{line} imports {target}"
            )


def test_every_package_folder_is_listed_for_installation():
    # pyproject.toml lists the packages by name; a folder missing there installs in
    # editable mode (the tests' own) but is left out of a wheel
    import tomllib

    listed = set(
        tomllib.loads((ROOT / "pyproject.toml").read_text())["tool"]["setuptools"]["packages"]
    )
    folders = {name for name, (_, is_package) in MODULES.items() if is_package}
    assert folders - listed == set()
