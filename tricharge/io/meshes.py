"""Read surface meshes: one small reader per format behind a registry keyed by ending.

Each reader returns a :class:`RawSurface` (points in the file's units, triangles, and
named groups when the format has them). :func:`read_surfaces` turns one or several
files into a :class:`SurfaceMesh` in one place: unit conversion, vertex merging and
surface naming:

* Gmsh physical surface groups keep their names (``group<tag>`` when unnamed; the tag
  number also works as a reference; groups sharing a name form one surface); OBJ
  ``g``/``o`` names, the named ``solid`` blocks of an ASCII STL, and a VTK cell-data
  region array (``region<k>``, or ``k`` as a reference) likewise;
* a file without groups read alone: each connected piece is a surface named
  ``c1, c2, ...`` in the order of each piece's lowest triangle index;
* several files at once: a file without groups is one surface named after the file
  (``lead1.stl`` gives ``lead1``), so one file per conductor just works;
* CAD files (STEP, IGES, BREP): meshed by gmsh, one surface per solid (:mod:`.cad`).

Before anything is read whole, files are checked against the input limits
(:mod:`.limits`) and formats read by meshio are pre-scanned for counts that cannot fit and
compressed data that expand beyond them (:mod:`.gmshscan`, :mod:`.vtkscan`). Polygons
and quads become triangles that cover them exactly (:mod:`tricharge.polygons`).

meshio and trimesh are imported inside the readers, so importing tricharge stays light.
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import partial
from pathlib import Path
from typing import Callable

import numpy as np

from ..errors import InputFileError, MeshError
from ..mesh import connected_components, merge_vertices
from ..model import Conductor, Model
from ..polygons import PolygonError, triangulate_polygons
from ..units import metres_per
from .cad import CAD_ENDINGS, read_cad
from .cadproject import combined_projection
from .gmshscan import check_gmsh_counts, physical_names
from .limits import check_input_file
from .unitguess import unit_warnings
from .rawsurface import RawSurface, no_triangles, unreadable
from .textmeshes import read_obj, read_ply, read_stl
from .vtkscan import scan_vtk_legacy, scan_vtu

__all__ = ["FORMATS", "MeshFormat", "RawSurface", "SurfaceMesh", "check_input_file", "format_for", "mesh_endings",
           "read_mesh", "read_raw", "read_surfaces", "read_vtk_xml", "split_polygons"]

#: Vertices closer than this fraction of the bounding-box diagonal are merged.
MERGE_TOLERANCE = 1e-9

#: Most surfaces (groups, or connected pieces of a file without groups) a mesh may have.
#: Each conductor costs one solve, and the checks compare parts pairwise: measured,
#: inspecting 300, 1,000 and 3,000 separate triangles takes 0.6, 2.6 and 20 s; 10,000
#: surfaces is far beyond a real model and still finishes (our choice).
MAX_SURFACES = 10_000

#: Cell-data arrays that name regions in VTK files, in order of preference.
REGION_ARRAYS = ("region", "regions", "group", "groups", "conductor", "surface", "CellEntityIds", "gmsh:physical")


@dataclass(frozen=True, eq=False)
class SurfaceMesh:
    """Named triangle surfaces in metres, ready to become a model.

    vertices : (n, 3) metres; triangles : (m, 3); surface_index : (m,) into ``surfaces``
    aliases : extra references (tag numbers, ...) -> surface name
    """

    vertices: np.ndarray
    triangles: np.ndarray
    surface_index: np.ndarray
    surfaces: tuple[str, ...]
    aliases: dict[str, str]
    notes: tuple[str, ...]
    source: str
    paths: tuple[str, ...] = ()
    project: object = None


# -- helpers shared by the readers -----------------------------------------------------

_CORNERS = {"triangle": 3, "triangle6": 3, "triangle7": 3, "quad": 4, "quad8": 4, "quad9": 4}


def split_polygons(cells: np.ndarray, points: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Triangles (t, 3) covering polygons ``cells`` (k, p) exactly, and the polygon of
    each (t,): quads by their inside diagonal, larger polygons by ear clipping (see
    :mod:`tricharge.polygons`). Raises PolygonError for a polygon that cannot be split."""
    return triangulate_polygons(points, cells)


# -- readers ---------------------------------------------------------------------------

def _block_triangles(path: Path, block, points: np.ndarray):
    """Triangles and owning cell of one meshio block, or None for cells without area."""
    data = np.asarray(block.data)
    if block.type in _CORNERS:
        data = data[:, : _CORNERS[block.type]]
    elif not (block.type.startswith("polygon") and data.ndim == 2 and data.shape[1] >= 3):
        return None
    if data.size and (data.min() < 0 or data.max() >= len(points)):
        raise MeshError(f"{path}: {block.type} cells refer to points that do not exist (indices up to {data.max()}, "
                        f"{len(points)} points); the file is truncated or corrupt")
    try:
        return split_polygons(data, points)
    except PolygonError as exc:
        raise MeshError(f"{path}: {block.type} cell {exc.polygon} {exc.reason}; split it into triangles or fix it in "
                        "the exporter") from None


def _meshio_blocks(mesh, path: Path, tag_arrays):
    """Triangles per meshio cell block, the per-triangle tag, and ignored cell kinds."""
    tris, tags, ignored = [], [], []
    points = _points(path, mesh)
    for b, block in enumerate(mesh.cells):
        found = _block_triangles(path, block, points)
        if found is None:
            ignored.append(block.type)
            continue
        tris.append(found[0])
        if tag_arrays is not None:
            values = np.asarray(tag_arrays[b])
            if values.size % max(len(block.data), 1) or values.size < len(block.data):
                raise InputFileError(f"{path}: a cell-data array has {values.size} values for {len(block.data)} "
                                     f"{block.type} cells; the file is inconsistent, export it again")
            tags.append(values.reshape(len(block.data), -1)[:, 0][found[1]])
    if not tris or not sum(len(t) for t in tris):
        raise no_triangles(path, "found " + (", ".join(sorted(set(ignored))) or "no cells"))
    notes = [f"{path.name}: ignored {', '.join(sorted(set(ignored)))} cells"] if ignored else []
    return np.concatenate(tris), (np.concatenate(tags).astype(np.int64) if tag_arrays is not None else None), notes


def _groups_from_tags(tags: np.ndarray, names_by_tag: dict[int, str], prefix: str):
    """Group index per triangle in first-appearance order, names, tag aliases, and the
    tags merged because they share a name ({name: [tags]}).

    Tags with the same name form one group (its tags all stay aliases of it): a name is
    how a user refers to a surface, so two groups named alike mean one surface. Unnamed
    tags get ``<prefix><tag>`` and are never merged.
    """
    unique, first = np.unique(tags, return_index=True)
    order = np.argsort(first)  # the unique tags in first-appearance order
    ordered = [int(tag) for tag in unique[order]]
    keys = [("name", names_by_tag[tag]) if tag in names_by_tag else ("tag", tag) for tag in ordered]
    group_of_key = {}
    for key in keys:
        group_of_key.setdefault(key, len(group_of_key))
    names = [value if kind == "name" else f"{prefix}{value}" for kind, value in group_of_key]
    group_of_unique = np.empty(len(unique), dtype=np.int64)
    group_of_unique[order] = [group_of_key[key] for key in keys]
    aliases = {str(tag): names[group_of_key[key]] for tag, key in zip(ordered, keys)}
    merged = {}
    for tag, key in zip(ordered, keys):
        merged.setdefault(names[group_of_key[key]], []).append(tag)
    merged = {name: found for name, found in merged.items() if len(found) > 1}
    return group_of_unique[np.searchsorted(unique, tags)], names, aliases, merged


def _points(path: Path, mesh) -> np.ndarray:
    """(n, 3) float64 points of a meshio mesh (2D points get z = 0)."""
    try:
        points = np.asarray(mesh.points, dtype=np.float64)
    except (TypeError, ValueError) as exc:
        raise unreadable(path, path.suffix.lstrip(".").upper(), exc) from None
    if points.ndim != 2 or not 1 <= points.shape[1]:
        raise InputFileError(f"{path}: the points are not a table of coordinates (shape {points.shape}); export it "
                             "again")
    return np.pad(points[:, :3], ((0, 0), (0, max(0, 3 - points.shape[1]))))


def _read_with_meshio(path: Path, module: str, kind: str):
    import importlib

    # The format's own reader: meshio.read() prints and calls sys.exit on bad files.
    reader = importlib.import_module(f"meshio.{module}").read
    try:
        return reader(str(path))
    except Exception as exc:  # meshio raises many types; all mean "cannot read this file"
        raise unreadable(path, kind, exc) from None


def _surface_names(path: Path) -> tuple[dict[int, str], dict[str, str], list[str]]:
    """Names of the physical surfaces (dimension 2) by tag, read from $PhysicalNames
    ourselves; other names given to a tag twice become aliases; notes on those."""
    names, extra, notes = {}, {}, []
    for dim, tag, name in physical_names(path):
        if dim != 2:
            continue
        if tag in names and names[tag] != name:
            extra[names[tag]] = name
            notes.append(f"{path.name}: physical surface {tag} is named both '{names[tag]}' and '{name}'; it is "
                         f"'{name}', and '{names[tag]}' refers to it too")
        names[tag] = name
    return names, extra, notes


def _read_gmsh(path: Path) -> RawSurface:
    check_gmsh_counts(path)
    names, extra, name_notes = _surface_names(path)
    mesh = _read_with_meshio(path, "gmsh", "Gmsh")
    physical = mesh.cell_data.get("gmsh:physical")
    triangles, tags, notes = _meshio_blocks(mesh, path, physical)
    raw = RawSurface(_points(path, mesh), triangles, notes=notes + name_notes)
    if tags is not None:
        raw.groups, raw.group_names, raw.aliases, merged = _groups_from_tags(tags, names, "group")
        raw.aliases.update({alias: target for alias, target in extra.items() if target in raw.group_names})
        raw.notes += [f"{path.name}: physical surfaces {', '.join(map(str, found))} share the name '{name}' and "
                      "form one surface" for name, found in merged.items()]
    return raw


def _region_array(mesh):
    """Name of the cell-data array that labels regions, or None."""
    arrays = {k: v for k, v in mesh.cell_data.items()
              if all(np.issubdtype(np.asarray(a).dtype, np.integer) for a in v)}
    for name in REGION_ARRAYS:
        if name in arrays:
            return name
    return next(iter(arrays)) if len(arrays) == 1 else None


def _read_vtk(path: Path, module: str, kind: str) -> RawSurface:
    if module == "vtu" and scan_vtu(path)[1] == 0:
        raise no_triangles(path, "its pieces declare 0 cells")
    if module == "vtk":
        scan_vtk_legacy(path)
    mesh = _read_with_meshio(path, module, kind)
    name = _region_array(mesh)
    triangles, tags, notes = _meshio_blocks(mesh, path, mesh.cell_data[name] if name else None)
    raw = RawSurface(_points(path, mesh), triangles, notes=notes)
    if tags is not None:
        raw.groups, raw.group_names, raw.aliases, _ = _groups_from_tags(tags, {}, "region")
        raw.notes.append(f"{path.name}: regions from cell-data array '{name}'")
    return raw


@dataclass(frozen=True)
class MeshFormat:
    """A registered format: display name, file endings, reader."""

    name: str
    endings: tuple[str, ...]
    reader: Callable[[Path], RawSurface]


#: Registry: add a format by appending one record.
FORMATS: list[MeshFormat] = [
    MeshFormat("Gmsh", (".msh",), _read_gmsh),
    MeshFormat("STL", (".stl",), read_stl),
    MeshFormat("Wavefront OBJ", (".obj",), read_obj),
    MeshFormat("PLY", (".ply",), read_ply),
    MeshFormat("VTK legacy", (".vtk",), partial(_read_vtk, module="vtk", kind="VTK")),
    MeshFormat("VTK XML", (".vtu",), partial(_read_vtk, module="vtu", kind="VTU")),
    MeshFormat("CAD (STEP, IGES, BREP; meshed by gmsh)", CAD_ENDINGS, read_cad),
]


def mesh_endings() -> list[str]:
    return [e for f in FORMATS for e in f.endings]


def format_for(path: Path) -> MeshFormat:
    ending = path.suffix.lower()
    for fmt in FORMATS:
        if ending in fmt.endings:
            return fmt
    raise InputFileError(f"{path}: unknown mesh format {ending or '(no ending)'!r}; tricharge reads "
                         f"{', '.join(mesh_endings())} and model files (.toml)")


def read_raw(path) -> RawSurface:
    """Read one mesh file with the reader its ending selects."""
    path = Path(path)
    fmt = format_for(path)
    check_input_file(path)
    raw = fmt.reader(path)
    raw.points = np.asarray(raw.points, dtype=np.float64).reshape(-1, 3)
    raw.triangles = np.asarray(raw.triangles).reshape(-1, 3)
    if not len(raw.triangles):  # every reader says why; this catches what none foresaw
        raise no_triangles(path, f"{len(raw.points)} points but no faces")
    if not np.issubdtype(raw.triangles.dtype, np.integer):
        raise MeshError(f"{path}: triangle indices are not integers")
    if raw.triangles.size and (raw.triangles.min() < 0 or raw.triangles.max() >= len(raw.points)):
        raise MeshError(f"{path}: triangles refer to vertices that do not exist (indices up to "
                        f"{raw.triangles.max()}, {len(raw.points)} vertices); the file is truncated or corrupt")
    raw.points, raw.triangles = _merged(raw.points, raw.triangles)
    return raw


def _merged(points: np.ndarray, triangles: np.ndarray):
    """Merge duplicate vertices (tolerance relative to the size); unchanged if coordinates are not finite."""
    used = points[np.unique(triangles)] if triangles.size else points[:0]
    if used.size and np.isfinite(used).all():
        with np.errstate(over="ignore"):
            diagonal = float(np.linalg.norm(np.ptp(used, axis=0)))
        if 0 < diagonal < np.inf:
            return merge_vertices(points, triangles, MERGE_TOLERANCE * diagonal)
    return points, np.asarray(triangles, np.int64)


def _combine(raws: list[RawSurface], paths: list[Path]):
    """Concatenate files; returns points, triangles, surface index, names, aliases, notes."""
    points, triangles, index, names, aliases, notes, offset = [], [], [], [], {}, [], 0
    for raw, path in zip(raws, paths):
        if raw.groups is not None:
            local, local_names = raw.groups, raw.group_names
        elif len(raws) == 1:
            local = connected_components(raw.triangles)
            local_names = [f"c{k + 1}" for k in range(int(local.max()) + 1)]
        else:
            local, local_names = np.zeros(len(raw.triangles), np.int64), [path.stem]
        clash = sorted(set(local_names) & set(names))
        if clash:
            raise MeshError(f"{path}: surface names {', '.join(clash)} also occur in an earlier file; rename the "
                            "groups or files so every surface has its own name")
        index.append(local + len(names))
        names.extend(local_names)
        for alias, target in raw.aliases.items():
            aliases.setdefault(alias if len(raws) == 1 else f"{path.stem}:{alias}", target)
        points.append(raw.points)
        triangles.append(np.asarray(raw.triangles, np.int64) + offset)
        offset += len(raw.points)
        notes.extend(raw.notes)
    return np.vstack(points), np.vstack(triangles), np.concatenate(index), tuple(names), aliases, tuple(notes)


def read_surfaces(paths, *, unit: str = "m") -> SurfaceMesh:
    """Read one or several mesh files into named surfaces in metres.

    Parameters
    ----------
    paths : a file name or a list of them
    unit : length unit of the coordinates in the files: m, cm, mm, um, in or mil
    """
    paths = [Path(p) for p in ([paths] if isinstance(paths, (str, Path)) else paths)]
    if not paths:
        raise InputFileError("no mesh file given; name at least one")
    scale = metres_per(unit)
    raws = [read_raw(p) for p in paths]
    for raw in raws:
        raw.points = raw.points * (1.0 if raw.in_metres else scale)
    points, triangles, index, names, aliases, notes = _combine(raws, paths)
    if len(names) > MAX_SURFACES:
        raise MeshError(f"{', '.join(str(p) for p in paths)}: the mesh has {len(names):,} surfaces (named groups, or "
                        f"separate pieces when there are no groups), more than the {MAX_SURFACES:,} tricharge handles; "
                        "join the pieces of each conductor into one named group (Gmsh physical group, OBJ g)")
    source = ", ".join(str(p) for p in paths)
    if len(raws) > 1:  # vertices shared between files
        points, triangles = _merged(points, triangles)
    return SurfaceMesh(points, triangles, index, names, aliases, notes, source, tuple(str(p) for p in paths),
                       combined_projection(raws, scale, points))


def read_mesh(paths, *, unit: str | None = None, check: bool = True, precheck=None) -> Model:
    """Read mesh file(s) into a model where every surface is a conductor of the same name.

    ``unit`` None reads metres and warns (``Model.warnings``) when the model is so large
    that the coordinates are probably millimetres. ``precheck(n_panels)`` runs once the
    triangles are read, before the geometry checks (which take a while on a huge mesh).

    Raises
    ------
    InputFileError for a missing, unreadable or unknown file; MeshError for a file
    without usable triangles or with invalid geometry. Messages start with the file name.
    """
    mesh = read_surfaces(paths, unit=unit or "m")
    if precheck is not None:
        precheck(len(mesh.triangles))
    conductors = tuple(Conductor(name, (name,)) for name in mesh.surfaces)
    unit = unit or getattr(mesh.project, "unit", None)  # CAD files that carry a unit are shown in mm
    warnings = () if unit else unit_warnings(mesh.source, mesh.vertices, mesh.triangles, "add --unit mm")
    return Model(mesh.vertices, mesh.triangles, mesh.surface_index, mesh.surfaces, conductors,
                 unit=unit or "m", source=mesh.source, notes=mesh.notes, warnings=warnings, inputs=mesh.paths,
                 project=mesh.project, check=check)


def read_vtk_xml(path):
    """A VTK XML unstructured grid (.vtu) read with meshio after the same checks as a
    mesh input (exists, not empty, within the size limits, not hostile: see
    :func:`~tricharge.io.vtkscan.scan_vtu`); returns the meshio mesh."""
    path = check_input_file(Path(path))
    scan_vtu(path)
    return _read_with_meshio(path, "vtu", "VTU")
