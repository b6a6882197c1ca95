"""Reading back a field solution saved by ``tricharge field --vtu`` (for ``tricharge view``).

The file is a user's file like any other: it is size-checked before meshio reads it, and
its cells, arrays and numbers are checked before anything is drawn, with one clear error
for whatever does not fit.
"""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path

import numpy as np

from ..errors import InputFileError
from ..names import printable
from ..units import LENGTH_UNITS

#: The arrays a saved field solution must have (see :mod:`.outputs`).
REQUIRED = ("E_magnitude_V_per_m", "sigma_free_C_per_m2")


@dataclass(frozen=True)
class SavedField:
    """A saved field solution. vertices (n, 3) metres; triangles (m, 3); arrays: name ->
    (m,) per-panel values in the units their names say; unit: the length unit the
    solution was made in ("m" when the file does not say)."""

    vertices: np.ndarray
    triangles: np.ndarray
    arrays: dict
    unit: str
    source: str


def _unit(field_data: dict) -> str:
    scale = np.asarray(field_data.get("metres_per_unit", [1.0]), dtype=float).ravel()
    for name, metres in LENGTH_UNITS.items():
        if scale.size == 1 and np.isclose(scale[0], metres, rtol=1e-9):
            return name
    return "m"


def read_saved_field(path) -> SavedField | None:
    """The saved field solution in ``path`` (.vtu), or None when the file holds no field
    solution (a plain mesh). Raises InputFileError for a file that claims to be one but
    is malformed."""
    from .meshes import read_vtk_xml

    path = Path(path)
    shown = printable(path)
    mesh = read_vtk_xml(path)
    if not all(name in mesh.cell_data for name in REQUIRED):
        return None
    blocks = [b for b in mesh.cells if b.type == "triangle"]
    if len(blocks) != 1 or len(mesh.cells) != 1:
        raise InputFileError(f"{shown}: a saved field solution has one block of triangles, this file has "
                             f"{', '.join(b.type for b in mesh.cells) or 'no cells'}; save it again with field --vtu")
    triangles = np.asarray(blocks[0].data)
    vertices = np.asarray(mesh.points, dtype=float)
    if vertices.ndim != 2 or vertices.shape[1] < 3 or not np.isfinite(vertices).all():
        raise InputFileError(f"{shown}: the points are not finite 3D coordinates; save it again with field --vtu")
    vertices = vertices[:, :3]
    if (triangles.size == 0 or not np.issubdtype(triangles.dtype, np.integer) or triangles.min() < 0
            or triangles.max() >= len(vertices)):
        raise InputFileError(f"{shown}: the triangles refer to points that do not exist; save it again with "
                             "field --vtu")
    arrays = {}
    for name, blocks_data in mesh.cell_data.items():
        values = np.asarray(blocks_data[0])
        if values.shape[:1] != (len(triangles),):
            raise InputFileError(f"{shown}: array {printable(name)} has {values.shape[:1]} values for "
                                 f"{len(triangles)} triangles; save it again with field --vtu")
        if np.issubdtype(values.dtype, np.number):
            arrays[name] = values.astype(float)
    return SavedField(vertices, triangles.astype(np.int64), arrays, _unit(mesh.field_data), str(path))

