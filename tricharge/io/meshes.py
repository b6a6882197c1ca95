"""Read surface meshes into a :class:`~tricharge.model.Model`.

One small reader per format behind a registry keyed by file ending. Each reader
returns a :class:`RawSurface` (points in file units, triangles, optional named groups);
:func:`read_mesh` turns that into a model in one place: unit conversion, vertex
merging, and the conductor assignment:

* Gmsh physical groups of dimension 2, when present, become conductors named after
  the group (``group<tag>`` when the group has no name);
* otherwise each connected component is a conductor named ``c1, c2, ...`` in the order
  of each component's lowest triangle index.

meshio and trimesh are imported inside the readers, so importing tricharge stays light.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from functools import partial
from pathlib import Path
from typing import Callable

import numpy as np

from ..errors import InputFileError, MeshError
from ..mesh import connected_components, merge_vertices
from ..model import Model
from ..units import metres_per

#: Vertices closer than this fraction of the bounding-box diagonal are merged.
MERGE_TOLERANCE = 1e-9


@dataclass
class RawSurface:
    """What a reader found, before conversion: points (n, 3) in file units,
    triangles (m, 3), and per-triangle group tags with their names (or none)."""

    points: np.ndarray
    triangles: np.ndarray
    group_tags: np.ndarray | None = None
    group_names: dict[int, str] = field(default_factory=dict)
    notes: list[str] = field(default_factory=list)


def _split_polygons(kind: str, cells: np.ndarray) -> np.ndarray | None:
    """Triangles from a meshio cell block: triangles as they are, quads split in two."""
    if kind == "triangle":
        return cells
    if kind == "quad":
        return np.concatenate([cells[:, [0, 1, 2]], cells[:, [0, 2, 3]]]).reshape(2, -1, 3).transpose(1, 0, 2).reshape(-1, 3)
    return None


def _unreadable(path: Path, kind: str, exc: BaseException) -> InputFileError:
    detail = str(exc) or type(exc).__name__
    return InputFileError(f"{path}: not a readable {kind} file ({detail}); check the export settings")


def _read_meshio(path: Path, module: str, kind: str) -> RawSurface:
    import importlib

    # The format's own reader: meshio.read() prints and calls sys.exit on bad files.
    reader = importlib.import_module(f"meshio.{module}").read
    try:
        mesh = reader(str(path))
    except Exception as exc:  # meshio raises many types; all mean "cannot read this file"
        raise _unreadable(path, kind, exc) from None
    tris, tags, ignored = [], [], []
    physical = mesh.cell_data.get("gmsh:physical")
    for b, block in enumerate(mesh.cells):
        t = _split_polygons(block.type, np.asarray(block.data))
        if t is None:
            ignored.append(block.type)
            continue
        tris.append(t)
        if physical is not None:
            per_cell = np.asarray(physical[b])
            tags.append(np.repeat(per_cell, len(t) // len(block.data)))
    notes = [f"ignored {', '.join(sorted(set(ignored)))} cells"] if ignored else []
    if not tris:
        raise MeshError(f"{path}: the mesh has no triangles (found {', '.join(sorted(set(ignored))) or 'no cells'});"
                        " export the conductor surfaces as triangles")
    names = {int(tag): name for name, (tag, dim) in ((n, v[:2]) for n, v in mesh.field_data.items()) if int(dim) == 2}
    return RawSurface(np.asarray(mesh.points, float)[:, :3], np.concatenate(tris),
                      np.concatenate(tags) if physical is not None else None, names, notes)


def _read_trimesh(path: Path) -> RawSurface:
    import trimesh

    try:
        mesh = trimesh.load_mesh(path, process=False)
    except Exception as exc:
        raise _unreadable(path, path.suffix.lstrip(".").upper(), exc) from None
    faces = np.asarray(getattr(mesh, "faces", np.zeros((0, 3))))
    if faces.size == 0:
        raise MeshError(f"{path}: the mesh has no triangles; export the conductor surfaces as triangles")
    return RawSurface(np.asarray(mesh.vertices, float), faces)


@dataclass(frozen=True)
class MeshFormat:
    name: str
    endings: tuple[str, ...]
    reader: Callable[[Path], RawSurface]


#: Registry: add a format by appending one record.
FORMATS: list[MeshFormat] = [
    MeshFormat("Gmsh", (".msh",), partial(_read_meshio, module="gmsh", kind="Gmsh")),
    MeshFormat("STL", (".stl",), _read_trimesh),
    MeshFormat("Wavefront OBJ", (".obj",), _read_trimesh),
    MeshFormat("PLY", (".ply",), _read_trimesh),
    MeshFormat("VTK legacy", (".vtk",), partial(_read_meshio, module="vtk", kind="VTK")),
    MeshFormat("VTK XML", (".vtu",), partial(_read_meshio, module="vtu", kind="VTU")),
]


def format_for(path: Path) -> MeshFormat:
    ending = path.suffix.lower()
    for fmt in FORMATS:
        if ending in fmt.endings:
            return fmt
    known = ", ".join(e for f in FORMATS for e in f.endings)
    raise InputFileError(f"{path}: unknown mesh format {ending or '(no ending)'!r}; tricharge reads {known}")


def _group_labels(raw: RawSurface) -> tuple[np.ndarray, tuple[str, ...]]:
    tags = raw.group_tags.astype(np.int64)
    _, first = np.unique(tags, return_index=True)
    ordered = tags[np.sort(first)]
    index = {int(tag): k for k, tag in enumerate(ordered)}
    labels = np.array([index[int(x)] for x in tags], dtype=np.int64) if len(index) > 1 else np.zeros(len(tags), np.int64)
    names = tuple(raw.group_names.get(int(tag), f"group{int(tag)}") for tag in ordered)
    return labels, names


def read_mesh(path, *, unit: str = "m") -> Model:
    """Read a surface mesh file into a model.

    Parameters
    ----------
    path : file name; the ending picks the reader (.msh .stl .obj .ply .vtk .vtu)
    unit : length unit of the file's coordinates: m, cm, mm, um, in or mil

    Raises
    ------
    InputFileError for a missing, unreadable or unknown file; MeshError for a file
    without usable triangles. Messages start with the file name.
    """
    path = Path(path)
    scale = metres_per(unit)
    if not path.is_file():
        raise InputFileError(f"{path}: file not found; check the path")
    raw = format_for(path).reader(path)
    points = raw.points * scale
    finite = np.isfinite(points).all(axis=1)
    diagonal = float(np.linalg.norm(np.ptp(points[finite], axis=0))) if finite.any() else 0.0
    if diagonal > 0 and finite.all():
        points, triangles = merge_vertices(points, raw.triangles, MERGE_TOLERANCE * diagonal)
    else:
        triangles = raw.triangles
    if raw.group_tags is not None:
        labels, names = _group_labels(raw)
    else:
        labels = connected_components(triangles) if len(triangles) else np.zeros(0, np.int64)
        names = tuple(f"c{k + 1}" for k in range(int(labels.max()) + 1 if labels.size else 0))
    return Model(points, triangles, labels, names, unit=unit, source=str(path))
