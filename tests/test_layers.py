"""The layering rules of DESIGN.md, checked in a fresh interpreter."""

import subprocess
import sys

HEAVY = ["meshio", "trimesh", "pyvista", "matplotlib", "click"]


def _loaded_after(statement: str) -> list[str]:
    code = f"import sys; {statement}; print(' '.join(m for m in {HEAVY!r} if m in sys.modules))"
    return subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True).stdout.split()


def test_bem_imports_only_numpy_and_scipy():
    assert _loaded_after("import tricharge.bem.capacitance, tricharge.bem.fields, tricharge.bem.solvers") == []


def test_package_import_is_light():
    assert _loaded_after("import tricharge") == []


def test_bem_never_imports_io_viz_or_cli():
    import pathlib

    root = pathlib.Path(__file__).resolve().parents[1] / "tricharge" / "bem"
    for path in root.glob("*.py"):
        text = path.read_text()
        for forbidden in ("from ..io", "from ..viz", "from ..cli", "import meshio", "open(", "print("):
            assert forbidden not in text, f"{path.name} contains {forbidden!r}"
