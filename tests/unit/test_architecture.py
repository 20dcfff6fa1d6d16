"""The shape of the package: no import cycles, and imports that only run down the layers.

Every ``import`` in ampmodel is read from the source (module level, inside functions and classes;
only the imports under ``if TYPE_CHECKING:``, which never run, are left out), so that an import hidden
in a function cannot tie two modules together unseen.

Layers, from the bottom (a module may import its own layer and those below it):

    base      units, the version, the progress bar, the safety note, kernels (which import only kernels)
    data      materials, description (the validated run)
    input     config (TOML text -> description)
    files     output (Result, the HDF5 and JSON writers, atomic writes, run folders), plots
    model     media (gain maps, pumps), beam (the beam and the optics between media), the
              diagnostics every path shares
    paths     pulsed, cw, fibre, and simulation (the dispatcher)
    studies   studies (sweeps, spreads, sizing, rerun), bench
    top       the command line, ``python -m ampmodel``, the public API (ampmodel/__init__.py)

The files layer sits below the paths because the writers and plots need only the data (a Result and
its Config), never the code that computed it; the paths in turn never write: the run code (model and
paths) imports nothing of output but the Result's data module, and nothing of plots.
"""
from __future__ import annotations

import ast
from pathlib import Path

import pytest

PACKAGE = Path(__file__).resolve().parents[2] / "ampmodel"

LAYERS = {
    "base": ("ampmodel._version", "ampmodel.units", "ampmodel.progress", "ampmodel.safety", "ampmodel.notices",
             "ampmodel.kernels"),
    "data": ("ampmodel.materials", "ampmodel.description"),
    "input": ("ampmodel.config",),
    "files": ("ampmodel.output", "ampmodel.plots"),
    "model": ("ampmodel.media", "ampmodel.beam", "ampmodel.diagnostics"),
    "paths": ("ampmodel.pulsed", "ampmodel.cw", "ampmodel.fibre", "ampmodel.simulation"),
    "studies": ("ampmodel.studies", "ampmodel.bench"),
    "top": ("ampmodel.cli", "ampmodel.__main__", "ampmodel"),
}
ORDER = list(LAYERS)
RUN_CODE = LAYERS["model"] + LAYERS["paths"]
RESULT_DATA = "ampmodel.output.result"


def module_name(path: Path) -> str:
    parts = list(path.relative_to(PACKAGE.parent).with_suffix("").parts)
    return ".".join(parts[:-1] if parts[-1] == "__init__" else parts)


MODULES = {module_name(p): p for p in sorted(PACKAGE.rglob("*.py"))}


def _type_checking_only(node: ast.AST) -> bool:
    test = getattr(node, "test", None)
    return isinstance(node, ast.If) and (
        (isinstance(test, ast.Name) and test.id == "TYPE_CHECKING") or
        (isinstance(test, ast.Attribute) and test.attr == "TYPE_CHECKING"))


def _imports(tree: ast.AST):
    """Every import statement that can run, at any depth."""
    for node in ast.iter_child_nodes(tree):
        if _type_checking_only(node):
            yield from (n for child in node.orelse for n in _imports_in(child))
            continue
        yield from _imports_in(node)


def _imports_in(node: ast.AST):
    if isinstance(node, (ast.Import, ast.ImportFrom)):
        yield node
    else:
        yield from _imports(node)


def imported_modules(name: str, path: Path) -> set[str]:
    """The ampmodel modules ``name`` imports (a name imported from a package counts as the package's
    own module unless it is a submodule)."""
    out = set()
    package = name if path.name == "__init__.py" else name.rpartition(".")[0]
    for node in _imports(ast.parse(path.read_text(), str(path))):
        if isinstance(node, ast.Import):
            targets = [a.name for a in node.names]
        else:
            base = node.module or ""
            if node.level:
                parent = package.split(".")[:len(package.split(".")) - (node.level - 1)]
                base = ".".join(parent + ([node.module] if node.module else []))
            targets = [f"{base}.{a.name}" if f"{base}.{a.name}" in MODULES else base for a in node.names]
        out.update(t for t in targets if t == "ampmodel" or t.startswith("ampmodel."))
    out.discard(name)
    return out


GRAPH = {name: imported_modules(name, path) for name, path in MODULES.items()}


def layer_of(name: str) -> str:
    """The layer of a module: the longest matching prefix."""
    best, found = -1, None
    for layer, prefixes in LAYERS.items():
        for prefix in prefixes:
            if (name == prefix or name.startswith(prefix + ".")) and len(prefix) > best:
                best, found = len(prefix), layer
    assert found is not None, f"{name} is in no layer: add it to LAYERS in {__file__}"
    return found


def cycles(graph: dict[str, set[str]]) -> list[list[str]]:
    """The strongly connected components with more than one module (Tarjan), each sorted."""
    index, low, on_stack, stack, out = {}, {}, set(), [], []
    counter = [0]

    def visit(v):
        index[v] = low[v] = counter[0]
        counter[0] += 1
        stack.append(v)
        on_stack.add(v)
        for w in graph.get(v, ()):
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
                out.append(sorted(component))

    for v in sorted(graph):
        if v not in index:
            visit(v)
    return out


def test_the_graph_sees_function_level_imports():
    assert "ampmodel.simulation" in GRAPH["ampmodel"]          # imported inside __getattr__ only
    assert len(MODULES) > 60


def test_cycle_finder_finds_a_planted_cycle():
    assert cycles({"a": {"b"}, "b": {"c"}, "c": {"a"}, "d": {"a"}}) == [["a", "b", "c"]]
    assert cycles({"a": {"b"}, "b": set()}) == []


def test_no_import_cycles():
    found = cycles(GRAPH)
    assert not found, "import cycles:\n" + "\n".join(" <-> ".join(c) for c in found)


def test_every_module_has_a_layer():
    for name in MODULES:
        layer_of(name)


def test_imports_run_down_the_layers():
    wrong = [f"{name} ({layer_of(name)}) imports {target} ({layer_of(target)})"
             for name, targets in GRAPH.items() for target in sorted(targets)
             if ORDER.index(layer_of(target)) > ORDER.index(layer_of(name))]
    assert not wrong, "imports that run upward:\n" + "\n".join(wrong)


def test_kernels_import_only_kernels():
    wrong = [f"{name} imports {target}" for name, targets in GRAPH.items() if name.startswith("ampmodel.kernels")
             for target in targets if not target.startswith("ampmodel.kernels")]
    assert not wrong, "\n".join(wrong)


def test_run_code_never_writes_files():
    """The model and the paths return a Result; writing it (output) and plotting it (plots) are for
    the callers."""
    def is_run_code(name):
        return any(name == p or name.startswith(p + ".") for p in RUN_CODE)
    wrong = [f"{name} imports {target}" for name, targets in GRAPH.items() if is_run_code(name)
             for target in targets
             if (target.startswith(("ampmodel.output", "ampmodel.plots")) and target != RESULT_DATA)]
    assert not wrong, "\n".join(wrong)


@pytest.mark.parametrize("package", sorted(n for n, p in MODULES.items() if p.name == "__init__.py"))
def test_every_package_says_what_it_holds(package):
    doc = ast.get_docstring(ast.parse(MODULES[package].read_text()))
    assert doc and len(doc) > 60 and "TODO" not in doc, f"{package}: its __init__.py needs a docstring"


def test_module_sizes():
    """A module past ~500 lines is asking to be split."""
    long = {name: n for name, p in MODULES.items() if (n := len(p.read_text().splitlines())) > 520}
    assert not long, long
