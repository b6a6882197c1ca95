"""Read surface meshes: one small reader per format behind a registry keyed by ending.

Each reader returns a :class:`RawSurface` (points in the file's units, triangles, and
named groups when the format has them). :func:`read_surfaces` turns one or several
files into a :class:`SurfaceMesh` in one place: unit conversion, vertex merging and
surface naming:

* Gmsh physical surface groups keep their names (``group<tag>`` when unnamed; the tag
  number also works as a reference); OBJ ``g``/``o`` names, the named ``solid`` blocks of
  an ASCII STL, and a VTK cell-data region array (``region<k>``, or ``k`` as a reference)
  likewise;
* a file without groups read alone: each connected piece is a surface named
  ``c1, c2, ...`` in the order of each piece's lowest triangle index;
* several files at once: a file without groups is one surface named after the file
  (``lead1.stl`` gives ``lead1``), so one file per conductor just works.

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
from ..model import Conductor, Model
from ..units import metres_per

#: Vertices closer than this fraction of the bounding-box diagonal are merged.
MERGE_TOLERANCE = 1e-9

#: Cell-data arrays that name regions in VTK files, in order of preference.
REGION_ARRAYS = ("region", "regions", "group", "groups", "conductor", "surface", "CellEntityIds", "gmsh:physical")


@dataclass
class RawSurface:
    """What a reader found, before conversion.

    points : (n, 3) in file units
    triangles : (m, 3) int
    groups : (m,) int index into ``group_names``, or None when the file has no groups
    group_names : one name per group
    aliases : other references for a group (e.g. its tag number) -> group name
    notes : what was skipped or changed, for the user
    """

    points: np.ndarray
    triangles: np.ndarray
    groups: np.ndarray | None = None
    group_names: list[str] = field(default_factory=list)
    aliases: dict[str, str] = field(default_factory=dict)
    notes: list[str] = field(default_factory=list)


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


# -- helpers shared by the readers -----------------------------------------------------

_CORNERS = {"triangle": 3, "triangle6": 3, "triangle7": 3, "quad": 4, "quad8": 4, "quad9": 4}


def split_polygons(cells: np.ndarray) -> np.ndarray:
    """Fan-split polygons (k, p) with p >= 3 corners into triangles (k*(p-2), 3)."""
    cells = np.asarray(cells)
    p = cells.shape[1]
    fans = [cells[:, [0, i, i + 1]] for i in range(1, p - 1)]
    return np.stack(fans, axis=1).reshape(-1, 3)


def _unreadable(path: Path, kind: str, exc: BaseException) -> InputFileError:
    detail = str(exc).strip().splitlines()[0] if str(exc).strip() else type(exc).__name__
    return InputFileError(f"{path}: not a readable {kind} file ({detail[:200]}); check the export settings")


def _no_triangles(path: Path, found: str) -> MeshError:
    return MeshError(f"{path}: the mesh has no triangles ({found}); export the surfaces as a triangle mesh")


# -- readers ---------------------------------------------------------------------------

def _meshio_blocks(mesh, path: Path, tag_arrays):
    """Triangles per meshio cell block, the per-triangle tag, and ignored cell kinds."""
    tris, tags, ignored = [], [], []
    for b, block in enumerate(mesh.cells):
        data = np.asarray(block.data)
        if block.type in _CORNERS:
            t = split_polygons(data[:, : _CORNERS[block.type]])
        elif block.type.startswith("polygon") and data.ndim == 2 and data.shape[1] >= 3:
            t = split_polygons(data)
        else:
            ignored.append(block.type)
            continue
        tris.append(t)
        if tag_arrays is not None:
            tags.append(np.repeat(np.asarray(tag_arrays[b]).reshape(len(data), -1)[:, 0], len(t) // max(len(data), 1)))
    if not tris:
        raise _no_triangles(path, "found " + (", ".join(sorted(set(ignored))) or "no cells"))
    notes = [f"{path.name}: ignored {', '.join(sorted(set(ignored)))} cells"] if ignored else []
    return np.concatenate(tris), (np.concatenate(tags).astype(np.int64) if tag_arrays is not None else None), notes


def _groups_from_tags(tags: np.ndarray, names_by_tag: dict[int, str], prefix: str):
    """Group index per triangle in first-appearance order, names, and tag aliases."""
    _, first = np.unique(tags, return_index=True)
    ordered = tags[np.sort(first)]
    lookup = {int(tag): k for k, tag in enumerate(ordered)}
    names = [names_by_tag.get(int(tag), f"{prefix}{int(tag)}") for tag in ordered]
    aliases = {str(int(tag)): name for tag, name in zip(ordered, names)}
    return np.array([lookup[int(x)] for x in tags], dtype=np.int64), names, aliases


def _read_with_meshio(path: Path, module: str, kind: str):
    import importlib

    # The format's own reader: meshio.read() prints and calls sys.exit on bad files.
    reader = importlib.import_module(f"meshio.{module}").read
    try:
        return reader(str(path))
    except Exception as exc:  # meshio raises many types; all mean "cannot read this file"
        raise _unreadable(path, kind, exc) from None


def _read_gmsh(path: Path) -> RawSurface:
    mesh = _read_with_meshio(path, "gmsh", "Gmsh")
    physical = mesh.cell_data.get("gmsh:physical")
    triangles, tags, notes = _meshio_blocks(mesh, path, physical)
    raw = RawSurface(np.asarray(mesh.points, float)[:, :3], triangles, notes=notes)
    if tags is not None:
        names = {int(v[0]): name for name, v in mesh.field_data.items() if len(v) > 1 and int(v[1]) == 2}
        raw.groups, raw.group_names, raw.aliases = _groups_from_tags(tags, names, "group")
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
    mesh = _read_with_meshio(path, module, kind)
    name = _region_array(mesh)
    triangles, tags, notes = _meshio_blocks(mesh, path, mesh.cell_data[name] if name else None)
    raw = RawSurface(np.asarray(mesh.points, float)[:, :3], triangles, notes=notes)
    if tags is not None:
        raw.groups, raw.group_names, raw.aliases = _groups_from_tags(tags, {}, "region")
        raw.notes.append(f"{path.name}: regions from cell-data array '{name}'")
    return raw


def _read_trimesh(path: Path) -> RawSurface:
    import trimesh

    try:
        mesh = trimesh.load_mesh(path, process=False)
    except Exception as exc:
        raise _unreadable(path, path.suffix.lstrip(".").upper(), exc) from None
    faces = np.asarray(getattr(mesh, "faces", np.zeros((0, 3))))
    if faces.size == 0:
        raise _no_triangles(path, "no faces found")
    return RawSurface(np.asarray(mesh.vertices, float), faces)


def _read_stl(path: Path) -> RawSurface:
    """STL, binary or ASCII. ASCII files with several named ``solid`` blocks give one
    group per solid. Vertices are per facet here; merging happens later."""
    data = path.read_bytes()
    if len(data) >= 84:
        count = int.from_bytes(data[80:84], "little")
        if len(data) == 84 + 50 * count:
            records = np.frombuffer(data, dtype=np.uint8, offset=84).reshape(count, 50)
            xyz = records[:, 12:48].copy().view("<f4").reshape(count, 3, 3).astype(np.float64)
            return RawSurface(xyz.reshape(-1, 3), np.arange(3 * count, dtype=np.int64).reshape(count, 3))
        if not data.lstrip().startswith(b"solid"):
            raise InputFileError(f"{path}: binary STL declares {count:,} triangles ({84 + 50 * count:,} bytes) but the "
                                 f"file has {len(data):,} bytes; it is truncated or not an STL file")
    try:
        text = data.decode("ascii")
    except UnicodeDecodeError:
        raise InputFileError(f"{path}: neither a binary STL (size does not match its triangle count) nor an ASCII "
                             "STL (not text); export it again") from None
    vertices, solids, names = [], [], []
    for number, line in enumerate(text.splitlines(), start=1):
        parts = line.split()
        if not parts:
            continue
        if parts[0] == "solid":
            names.append(" ".join(parts[1:]) or f"solid{len(names) + 1}")
        elif parts[0] == "vertex":
            try:
                vertices.append([float(x) for x in parts[1:4]])
            except ValueError:
                raise InputFileError(f"{path}: line {number} is not a valid STL vertex: {line.strip()[:60]!r}") from None
            if len(vertices[-1]) != 3:
                raise InputFileError(f"{path}: line {number}: a vertex needs three coordinates")
            solids.append(max(len(names) - 1, 0))
    if len(vertices) % 3:
        raise InputFileError(f"{path}: {len(vertices)} vertices is not a whole number of triangles; the file is "
                             "truncated")
    if not vertices:
        raise _no_triangles(path, "no facets found")
    m = len(vertices) // 3
    raw = RawSurface(np.array(vertices, float), np.arange(3 * m, dtype=np.int64).reshape(m, 3))
    solid_of_triangle = np.array(solids[::3], dtype=np.int64)
    if len(set(names)) > 1 and len(set(names)) == len(names):
        raw.groups, raw.group_names = solid_of_triangle, names
    return raw


def _read_obj(path: Path) -> RawSurface:
    """Wavefront OBJ: ``v`` and ``f`` records (any polygon, ``v/vt/vn`` and negative
    indices), grouped by the latest ``g`` name, else the latest ``o`` name."""
    points, triangles, groups, names = [], [], [], {}
    current = None
    try:
        text = path.read_text(encoding="utf-8", errors="replace")
    except OSError as exc:
        raise InputFileError(f"{path}: cannot be read ({exc.strerror}); check permissions") from None
    for number, line in enumerate(text.splitlines(), start=1):
        parts = line.split()
        if not parts or parts[0].startswith("#"):
            continue
        try:
            if parts[0] == "v":
                points.append([float(x) for x in parts[1:4]])
                if len(points[-1]) != 3:
                    raise ValueError("a vertex needs three coordinates")
            elif parts[0] == "f":
                idx = [int(p.split("/")[0]) for p in parts[1:]]
                if len(idx) < 3:
                    raise ValueError("a face needs at least three vertices")
                idx = [i - 1 if i > 0 else len(points) + i for i in idx]
                group = names.setdefault(current or "", len(names))
                for k in range(1, len(idx) - 1):
                    triangles.append((idx[0], idx[k], idx[k + 1]))
                    groups.append(group)
            elif parts[0] in ("g", "o"):
                label = " ".join(parts[1:]) or None
                if parts[0] == "g" or label is not None:
                    current = label
        except ValueError as exc:
            raise InputFileError(f"{path}: line {number} is not valid OBJ ({exc}); check the export") from None
    if not triangles:
        raise _no_triangles(path, "no faces found")
    raw = RawSurface(np.array(points, float).reshape(-1, 3), np.array(triangles, np.int64))
    if len(names) > 1 or "" not in names:
        ordered = sorted(names, key=names.get)
        raw.groups = np.array(groups, np.int64)
        raw.group_names = [n or "ungrouped" for n in ordered]
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
    MeshFormat("STL", (".stl",), _read_stl),
    MeshFormat("Wavefront OBJ", (".obj",), _read_obj),
    MeshFormat("PLY", (".ply",), _read_trimesh),
    MeshFormat("VTK legacy", (".vtk",), partial(_read_vtk, module="vtk", kind="VTK")),
    MeshFormat("VTK XML", (".vtu",), partial(_read_vtk, module="vtu", kind="VTU")),
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


def check_input_file(path: Path) -> Path:
    """A readable, non-empty regular file, or an InputFileError saying what is wrong."""
    if path.is_dir():
        raise InputFileError(f"{path}: is a folder, not a file; give the mesh or model file inside it")
    if not path.is_file():
        raise InputFileError(f"{path}: file not found; check the path")
    if path.stat().st_size == 0:
        raise InputFileError(f"{path}: the file is empty; export it again")
    return path


def read_raw(path) -> RawSurface:
    """Read one mesh file with the reader its ending selects."""
    path = Path(path)
    fmt = format_for(path)
    check_input_file(path)
    raw = fmt.reader(path)
    raw.points = np.asarray(raw.points, dtype=np.float64).reshape(-1, 3)
    raw.triangles = np.asarray(raw.triangles).reshape(-1, 3)
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
    points, triangles, index, names, aliases, notes = _combine(raws, paths)
    points = points * scale
    source = ", ".join(str(p) for p in paths)
    if len(raws) > 1:  # vertices shared between files
        points, triangles = _merged(points, triangles)
    return SurfaceMesh(points, triangles, index, names, aliases, notes, source, tuple(str(p) for p in paths))


def read_mesh(paths, *, unit: str = "m", check: bool = True) -> Model:
    """Read mesh file(s) into a model where every surface is a conductor of the same name.

    Raises
    ------
    InputFileError for a missing, unreadable or unknown file; MeshError for a file
    without usable triangles or with invalid geometry. Messages start with the file name.
    """
    mesh = read_surfaces(paths, unit=unit)
    conductors = tuple(Conductor(name, (name,)) for name in mesh.surfaces)
    return Model(mesh.vertices, mesh.triangles, mesh.surface_index, mesh.surfaces, conductors,
                 unit=unit, source=mesh.source, notes=mesh.notes, inputs=mesh.paths, check=check)


def read_vtk_xml(path):
    """A VTK XML unstructured grid (.vtu) read with meshio after the same checks as a
    mesh input (exists, not empty); returns the meshio mesh."""
    path = check_input_file(Path(path))
    return _read_with_meshio(path, "vtu", "VTU")
