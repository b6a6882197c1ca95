"""Our own readers of the simple formats, STL (binary and ASCII) and Wavefront OBJ, and
the PLY reader (parsed by trimesh, polygons split here).

Files are read as bytes (never more than the input limit); names inside them (``solid``,
``g``, ``o``) are decoded as UTF-8 with undecodable bytes replaced, and otherwise kept
as they are. Coordinates are collected in compact arrays, so memory stays a small
multiple of the file size.
"""

from __future__ import annotations

import io
from array import array
from pathlib import Path

import numpy as np

from ..errors import InputFileError, MeshError
from ..polygons import PolygonError, triangulate_polygons
from .limits import read_limited
from .rawsurface import RawSurface, no_triangles, unreadable


def _lines(data: bytes):
    """(number, line) pairs of text bytes, lazily; a lone CR also ends a line."""
    if b"\n" not in data and b"\r" in data:
        data = data.replace(b"\r", b"\n")
    return enumerate(io.BytesIO(data), start=1)


def _name(parts: list[bytes]) -> str:
    return b" ".join(parts).decode("utf-8", errors="replace")


def read_stl(path: Path) -> RawSurface:
    """STL, binary or ASCII. ASCII files with several named ``solid`` blocks give one
    group per solid. Vertices are per facet here; merging happens later."""
    data = read_limited(path)
    if len(data) >= 84:
        count = int.from_bytes(data[80:84], "little")
        if len(data) == 84 + 50 * count:
            if count == 0:
                raise no_triangles(path, "a binary STL that declares 0 triangles")
            records = np.frombuffer(data, dtype=np.uint8, offset=84).reshape(count, 50)
            xyz = records[:, 12:48].copy().view("<f4").reshape(count, 3, 3).astype(np.float64)
            return RawSurface(xyz.reshape(-1, 3), np.arange(3 * count, dtype=np.int64).reshape(count, 3))
        if not data.lstrip().startswith(b"solid"):
            raise InputFileError(f"{path}: binary STL declares {count:,} triangles ({84 + 50 * count:,} bytes) but the "
                                 f"file has {len(data):,} bytes; it is truncated or not an STL file")
    if b"\0" in data:
        raise InputFileError(f"{path}: neither a binary STL (size does not match its triangle count) nor an ASCII "
                             "STL (not text); export it again")
    return _ascii_stl(path, data)


def _ascii_stl(path: Path, data: bytes) -> RawSurface:
    coordinates, solids, names = array("d"), array("q"), []
    for number, line in _lines(data):
        parts = line.split()
        if not parts:
            continue
        if parts[0] == b"solid":
            names.append(_name(parts[1:]) or f"solid{len(names) + 1}")
        elif parts[0] == b"vertex":
            if len(parts) != 4:
                raise InputFileError(f"{path}: line {number}: a vertex needs three coordinates")
            try:
                coordinates.extend(float(x) for x in parts[1:])
            except ValueError:
                shown = _name(parts)[:60]
                raise InputFileError(f"{path}: line {number} is not a valid STL vertex: {shown!r}") from None
            solids.append(max(len(names) - 1, 0))
    n = len(solids)
    if n % 3:
        raise InputFileError(f"{path}: {n} vertices is not a whole number of triangles; the file is truncated")
    if not n:
        raise no_triangles(path, "no facets found")
    raw = RawSurface(np.frombuffer(coordinates, dtype=np.float64).reshape(-1, 3).copy(),
                     np.arange(n, dtype=np.int64).reshape(-1, 3))
    if len(set(names)) > 1 and len(set(names)) == len(names):
        raw.groups, raw.group_names = np.frombuffer(solids, dtype=np.int64)[::3].copy(), names
    return raw


class _Faces:
    """Faces of an OBJ file as they are read: corner indices (0-based), the file line
    and the group of every face."""

    def __init__(self):
        self.corners, self.sizes, self.lines, self.groups = array("q"), array("q"), array("q"), array("q")

    def add(self, path: Path, number: int, tokens: list[bytes], n_points: int, group: int) -> None:
        idx = [int(t.split(b"/")[0]) for t in tokens]  # ValueError for text: the caller reports it
        if len(idx) < 3:
            raise ValueError("a face needs at least three vertices")
        for i in idx:
            if i == 0:
                raise MeshError(f"{path}: line {number}: face index 0 does not exist (OBJ numbers vertices from 1, "
                                "and -1 is the latest); fix the export")
            if i < 0 and n_points + i < 0:
                raise MeshError(f"{path}: line {number}: face index {i} reaches before the first vertex (only "
                                f"{n_points} vertices so far); fix the export")
            if i > 2**62:
                raise MeshError(f"{path}: line {number}: face index {i} is beyond any vertex; fix the export")
        self.corners.extend(i - 1 if i > 0 else n_points + i for i in idx)
        self.sizes.append(len(idx))
        self.lines.append(number)
        self.groups.append(group)


def read_obj(path: Path) -> RawSurface:
    """Wavefront OBJ: ``v`` and ``f`` records (any polygon, ``v/vt/vn`` and negative
    indices), grouped by the latest ``g`` name, else the latest ``o`` name. Polygons are
    split into triangles that cover them exactly (:mod:`tricharge.polygons`)."""
    coordinates, faces, names, current = array("d"), _Faces(), {}, None
    for number, line in _lines(read_limited(path)):
        parts = line.split()
        if not parts or parts[0].startswith(b"#"):
            continue
        try:
            if parts[0] == b"v":
                if len(parts) < 4:
                    raise ValueError("a vertex needs three coordinates")
                coordinates.extend(float(x) for x in parts[1:4])
            elif parts[0] == b"f":
                faces.add(path, number, parts[1:], len(coordinates) // 3, names.setdefault(current or "", len(names)))
            elif parts[0] in (b"g", b"o"):
                label = _name(parts[1:]) or None
                if parts[0] == b"g" or label is not None:
                    current = label
        except MeshError:
            raise
        except ValueError as exc:
            raise InputFileError(f"{path}: line {number} is not valid OBJ ({exc}); check the export") from None
    if not len(faces.sizes):
        raise no_triangles(path, "no faces found")
    points = np.frombuffer(coordinates, dtype=np.float64).reshape(-1, 3).copy()
    lines = np.frombuffer(faces.lines, dtype=np.int64)
    triangles, owner = triangulate_faces(path, points, np.frombuffer(faces.corners, dtype=np.int64),
                                         np.frombuffer(faces.sizes, dtype=np.int64), lambda k: f"line {lines[k]}")
    raw = RawSurface(points, triangles)
    if len(names) > 1 or "" not in names:
        ordered = sorted(names, key=names.get)
        raw.groups = np.frombuffer(faces.groups, dtype=np.int64)[owner]
        raw.group_names = [n or "ungrouped" for n in ordered]
    return raw


def triangulate_faces(path: Path, points: np.ndarray, corners: np.ndarray, sizes: np.ndarray, where):
    """Triangles (t, 3) of faces with any number of corners, in face order, and the face
    of each (t,). ``corners`` are all faces' corner indices one after another (0-based),
    ``sizes`` (f,) the corners of each face; ``where(k)`` names face k in messages
    ("line 12"). Raises MeshError naming the file and the face."""
    starts = np.concatenate([[0], np.cumsum(sizes)[:-1]]).astype(np.int64)
    bad = (corners < 0) | (corners >= len(points))
    if bad.any():
        first = int(np.flatnonzero(bad)[0])
        face = int(np.searchsorted(starts, first, side="right") - 1)
        raise MeshError(f"{path}: {where(face)}: face refers to vertex {corners[first] + 1}, but the file has "
                        f"{len(points)} vertices; the file is truncated or corrupt")
    pieces, owners = [], []
    for p in np.unique(sizes):
        members = np.flatnonzero(sizes == p)
        cells = corners[starts[members][:, None] + np.arange(p)]
        try:
            triangles, owner = triangulate_polygons(points, cells)
        except PolygonError as exc:
            raise MeshError(f"{path}: {where(members[exc.polygon])}: the face with {p} corners {exc.reason}; "
                            "split it into triangles or fix it in the exporter") from None
        pieces.append(triangles)
        owners.append(members[owner])
    owner = np.concatenate(owners)
    order = np.argsort(owner, kind="stable")
    return np.concatenate(pieces)[order], owner[order]


def _ply_faces(mesh) -> list | None:
    """The faces of a PLY file as trimesh read them, before it fan-split polygons (its
    raw element data); None when every face is a triangle or the data are unusual."""
    data = mesh.metadata.get("_ply_raw", {}).get("face", {}).get("data")
    if isinstance(data, dict):
        data = next((data[k] for k in ("vertex_indices", "vertex_index") if k in data), None)
    elif isinstance(data, np.ndarray) and data.dtype.names:
        name = next((k for k in data.dtype.names if k in ("vertex_indices", "vertex_index")), data.dtype.names[0])
        data = data[name]["f1"] if data[name].dtype.names else data[name]
    if data is None or (isinstance(data, np.ndarray) and data.ndim == 2 and data.shape[1] == 3):
        return None
    faces = [np.asarray(face, dtype=np.int64).ravel() for face in data]
    return None if all(len(face) == 3 for face in faces) else faces


def read_ply(path: Path) -> RawSurface:
    """PLY (ASCII or binary) read by trimesh; polygons are split by
    :mod:`tricharge.polygons` rather than trimesh's fan."""
    import trimesh

    try:
        mesh = trimesh.load_mesh(path, process=False)
    except Exception as exc:  # trimesh raises many types; all mean "cannot read this file"
        raise unreadable(path, "PLY", exc) from None
    faces = np.asarray(getattr(mesh, "faces", np.zeros((0, 3))))
    if faces.size == 0:
        raise no_triangles(path, "no faces found")
    points = np.asarray(mesh.vertices, dtype=np.float64)
    polygons = _ply_faces(mesh)
    if polygons is None:
        return RawSurface(points, faces)
    sizes = np.array([len(face) for face in polygons], dtype=np.int64)
    if sizes.min() < 3:
        raise MeshError(f"{path}: face {int(np.argmin(sizes))} has {sizes.min()} corners; a face needs three")
    triangles, _ = triangulate_faces(path, points, np.concatenate(polygons), sizes, lambda k: f"face {k}")
    return RawSurface(points, triangles)
