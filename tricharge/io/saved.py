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



#: Largest report JSON read back (a report of thousands of conductors is far smaller).
MAX_REPORT_BYTES = 64 * 2**20


def _require(data, path: str, kind, where: str):
    """``data[path...]`` of type ``kind``, or InputFileError naming the key."""
    value = data
    for key in path.split("."):
        if not isinstance(value, dict) or key not in value:
            raise InputFileError(f"{where}: not a report saved by 'tricharge report --json' (no '{path}'); save it "
                                 "again")
        value = value[key]
    if not isinstance(value, kind):
        raise InputFileError(f"{where}: '{path}' has the wrong type in this saved report; save it again")
    return value


def _square(data, path: str, size: int, where: str) -> None:
    matrix = np.asarray(_require(data, path, list, where), dtype=object)
    try:
        numbers = np.array(matrix.tolist(), dtype=float)
    except (TypeError, ValueError):
        numbers = None
    if numbers is None or numbers.shape != (size, size) or not np.isfinite(numbers).all():
        raise InputFileError(f"{where}: '{path}' is not a {size} x {size} matrix of finite numbers; save it again")


def read_report_data(path) -> dict:
    """The data of a report saved by ``tricharge report --json``, checked enough that the
    page can be made from it (InputFileError naming the first key that does not fit)."""
    import json

    from .meshes import check_input_file

    path = check_input_file(Path(path))
    where = printable(path)
    if path.stat().st_size > MAX_REPORT_BYTES:
        raise InputFileError(f"{where}: {path.stat().st_size:,} bytes is more than a saved report can be "
                             f"({MAX_REPORT_BYTES:,}); give the JSON that 'tricharge report --json' wrote")
    try:
        data = json.loads(path.read_text(encoding="utf-8"))
    except (UnicodeDecodeError, ValueError, RecursionError) as exc:
        raise InputFileError(f"{where}: not readable JSON ({str(exc)[:80]}); give the file 'tricharge report --json' "
                             "wrote") from None
    if not isinstance(data, dict) or data.get("report_format") != 1:
        raise InputFileError(f"{where}: not a report saved by 'tricharge report --json' (format 1); a solve's or a "
                             "field run's JSON cannot make a report without the model: run 'tricharge report' on it")
    if _require(data, "unit", str, where) not in LENGTH_UNITS:
        raise InputFileError(f"{where}: unit {printable(data['unit'])!r} is unknown; save the report again")
    names = _require(data, "capacitance.conductors", list, where)
    if not names or not all(isinstance(n, str) for n in names):
        raise InputFileError(f"{where}: 'capacitance.conductors' must list the conductor names; save it again")
    for key in ("capacitance.capacitance_matrix", "capacitance.mutual_matrix"):
        _square(data, key, len(names), where)
    for key, kind in (("title", str), ("model.parts", list), ("model.panels", int), ("provenance", dict),
                      ("cautions", bool), ("capacitance.checks", dict), ("capacitance.reference", str),
                      ("capacitance.method", str), ("capacitance.solve_time_s", (int, float))):
        _require(data, key, kind, where)
    if data.get("field_vtu") is not None and (not isinstance(data["field_vtu"], str)
                                              or Path(data["field_vtu"]).name != data["field_vtu"]):
        raise InputFileError(f"{where}: 'field_vtu' must name a file beside the report; save it again")
    return data
