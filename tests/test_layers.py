"""The house rules of docs/design.md, checked on the code itself: imports flow one way,
``tricharge.bem`` loads no file readers, pictures or commands, no module reaches into
another's private names, no import cycle, one module talks to fmm3dpy, and modules and
functions stay small enough to read."""

import ast
import subprocess
import sys
from pathlib import Path

import pytest

PACKAGE = Path(__file__).resolve().parents[1] / "tricharge"
HEAVY = ["meshio", "trimesh", "pyvista", "matplotlib", "click"]
OUTER = ["tricharge.io", "tricharge.viz", "tricharge.cli", "tricharge.pipeline", "tricharge.model",
         "tricharge.survey"]
BEM = sorted(f"tricharge.bem.{p.stem}" for p in (PACKAGE / "bem").glob("*.py") if p.stem != "__init__")

#: Limits of docs/design.md ("Size and names").
MAX_MODULE_LINES = 400
MAX_FUNCTION_LINES = 80


def _loaded_after(statement: str, watched) -> list[str]:
    code = (f"import sys; {statement}; "
            f"print(' '.join(m for m in {list(watched)!r} if any(k == m or k.startswith(m + '.') for k in sys.modules)))")
    return subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True).stdout.split()


def test_bem_loads_only_numerics():
    """numpy, scipy, fmm3dpy and numba; none of the file, picture or command layers."""
    assert _loaded_after("import " + ", ".join(BEM), HEAVY + OUTER) == []


def test_package_import_is_light():
    assert _loaded_after("import tricharge", HEAVY + OUTER + ["tricharge.bem", "numba", "scipy"]) == []


def test_public_names_load_on_use():
    code = "import tricharge; tricharge.solve; tricharge.load; tricharge.Model; tricharge.Result"
    assert _loaded_after(code, ["tricharge.pipeline", "tricharge.io.modelfile"]) == ["tricharge.pipeline",
                                                                                     "tricharge.io.modelfile"]


def _modules():
    for path in sorted(PACKAGE.rglob("*.py")):
        name = ".".join(path.relative_to(PACKAGE.parent).with_suffix("").parts).removesuffix(".__init__")
        yield name, path, ast.parse(path.read_text())


def _imports(name: str, path: Path, tree) -> set[str]:
    """Every tricharge module ``name`` imports, at any depth (function-level imports too)."""
    package = name if path.stem == "__init__" else name.rsplit(".", 1)[0]
    found = set()
    for node in ast.walk(tree):
        if isinstance(node, ast.Import):
            found |= {a.name for a in node.names if a.name.startswith("tricharge")}
        elif isinstance(node, ast.ImportFrom):
            base = package.split(".")[: len(package.split(".")) - (node.level - 1)] if node.level else []
            module = ".".join(base + ([node.module] if node.module else []))
            if module.startswith("tricharge"):
                found.add(module)
                found |= {f"{module}.{a.name}" for a in node.names}
    return found


def test_no_import_cycles():
    modules = {name: (path, tree) for name, path, tree in _modules()}
    graph = {name: {m for m in _imports(name, *modules[name]) if m in modules and m != name} for name in modules}
    graph = {k: {m for m in v if not k.startswith(m + ".")} for k, v in graph.items()}  # a package's own face
    state = {}

    def visit(node, trail):
        state[node] = "open"
        for nxt in graph[node]:
            if state.get(nxt) == "open":
                pytest.fail("import cycle: " + " -> ".join(trail[trail.index(nxt):] + [nxt]))
            if nxt not in state:
                visit(nxt, trail + [nxt])
        state[node] = "done"

    for name in graph:
        if name not in state:
            visit(name, [name])


def test_no_private_name_crosses_a_module():
    offences = []
    for name, path, tree in _modules():
        for node in ast.walk(tree):
            if isinstance(node, ast.ImportFrom) and (node.level or (node.module or "").startswith("tricharge")):
                offences += [f"{name} imports {node.module}.{a.name}" for a in node.names
                             if a.name.startswith("_") and not a.name.startswith("__")]
    assert offences == []


def test_only_the_fmm_module_talks_to_fmm3dpy():
    users = [name for name, path, tree in _modules() if "fmm3dpy" in {
        a.name.split(".")[0] for node in ast.walk(tree) if isinstance(node, ast.Import) for a in node.names}
        | {(node.module or "").split(".")[0] for node in ast.walk(tree) if isinstance(node, ast.ImportFrom)}]
    assert users == ["tricharge.bem.fmm"]


def test_bem_never_imports_outer_layers_opens_files_or_prints():
    for path in (PACKAGE / "bem").glob("*.py"):
        text = path.read_text()
        for forbidden in ("from ..io", "from ..viz", "from ..cli", "from ..pipeline", "from ..model", "import meshio",
                          "open(", "print("):
            assert forbidden not in text, f"{path.name} contains {forbidden!r}"


def test_modules_and_functions_stay_small():
    long_modules = [f"{name}: {len(path.read_text().splitlines())} lines" for name, path, _ in _modules()
                    if len(path.read_text().splitlines()) > MAX_MODULE_LINES]
    long_functions = [f"{name}.{node.name}: {node.end_lineno - node.lineno + 1} lines"
                      for name, _, tree in _modules() for node in ast.walk(tree)
                      if isinstance(node, (ast.FunctionDef, ast.AsyncFunctionDef))
                      and node.end_lineno - node.lineno + 1 > MAX_FUNCTION_LINES]
    assert long_modules == [] and long_functions == []
