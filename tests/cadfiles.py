"""CAD files for the tests, written by the tests themselves with gmsh's OpenCASCADE
kernel (no downloaded files). gmsh writes STEP in millimetres."""

from __future__ import annotations

import importlib.util
import os
import re
from pathlib import Path

import pytest


def gmsh_or_skip():
    """The gmsh module; skip when the cad extra is missing, fail instead where CI says it
    must be there (TRICHARGE_REQUIRE_GMSH set)."""
    if importlib.util.find_spec("gmsh") is None and os.environ.get("TRICHARGE_REQUIRE_GMSH"):
        pytest.fail("gmsh is required here (TRICHARGE_REQUIRE_GMSH is set) but the cad extra is not installed")
    return pytest.importorskip("gmsh", reason="the cad extra (gmsh) is not installed")


def write_step(path: Path, build, names=()) -> Path:
    """``build(occ)`` adds solids; ``names`` replace gmsh's default product names in
    solid order, as a CAD program's part names would appear in the file."""
    gmsh = gmsh_or_skip()
    from tricharge.io.cadsession import gmsh_session, quiet_output

    gmsh_session()
    gmsh.option.setString("Geometry.OCCTargetUnit", "MM")  # OpenCASCADE's default: write millimetres
    gmsh.model.add(f"writer-{path.name}")
    build(gmsh.model.occ)
    gmsh.model.occ.synchronize()
    with quiet_output():
        gmsh.write(str(path))
    gmsh.model.remove()
    if names:  # gmsh writes no names of its own: put them where a CAD program would
        text = path.read_text()
        for k, name in enumerate(names, start=1):
            pattern = r"\d+" if len(names) == 1 else rf"\d+\.{k}"
            text = re.sub(rf"'Open CASCADE STEP translator [0-9.]+ {pattern}'", f"'{name}'", text)
        path.write_text(text)
    return path
