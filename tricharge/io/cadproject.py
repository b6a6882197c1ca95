"""New vertices of a refined CAD mesh moved onto the CAD surfaces.

A refinement study splits edges and hands their midpoints to ``project(midpoints (k, 3),
ends (k, 2, 3)) -> (k, 3)`` (metres, see :mod:`tricharge.bem.refinement`). The meshes
gmsh makes of CAD faces tell, for every vertex, which faces it lies on, and for every
edge along a CAD curve (an edge of two faces, or a seam), which curve. So:

* the midpoint of an edge along a curve goes onto that curve (a rim stays round);
* the midpoint of any other edge goes onto the face both its ends lie on; where the ends
  share two faces (or are unknown), onto the face nearest the midpoint among those both
  ends lie on (within a tolerance).

New vertices inherit: the two halves of an edge along a curve are along it, and a
midpoint lies on the face it was projected onto. Vertices are recognised by their exact
coordinates in metres, which refinement copies unchanged.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from .cadsession import reopen


@dataclass
class CadFaces:
    """What one CAD file's meshing left for projection (gmsh units; ``scale`` is applied
    by :class:`CadProjection`)."""

    model: str
    faces: tuple
    path: str
    seconds: float
    names: list
    bodies: tuple
    scale: float | None = None          # metres per gmsh unit; None: the unit the files are read in
    nodes: np.ndarray = None            # (n, 3) gmsh units
    node_faces: dict = field(default_factory=dict)   # node index -> frozenset of faces
    curve_edges: dict = field(default_factory=dict)  # (i, j), i < j -> curve
    curve_faces: dict = field(default_factory=dict)  # curve -> frozenset of faces
    groups: dict = field(default_factory=dict)       # surface name -> (owner, other or None)


def _key(point) -> bytes:
    return np.asarray(point, np.float64).tobytes()


class CadProjection:
    """The ``project`` of the CAD files of one model (see the module docstring);
    ``groups`` and ``meshing_seconds`` describe the meshing for the model file and the
    terminal."""

    def __init__(self, cads: list, scales: list, size: float):
        self.cads, self.scales = cads, scales
        self.tolerance = 1e-6 * size
        self.groups = {k: v for cad in cads for k, v in cad.groups.items()}
        self.bodies = frozenset(b for cad in cads for b in cad.bodies)
        self.solids = tuple(n for cad in cads for n in cad.names)
        self.meshing_seconds = float(sum(cad.seconds for cad in cads))
        #: the unit to show the model in when none is given: mm when every file carries its unit
        self.unit = "mm" if all(cad.scale is not None for cad in cads) else None
        self.vertex, self.edge = {}, {}  # key -> (file, frozenset faces); (key, key) -> (file, curve)
        for f, (cad, scale) in enumerate(zip(cads, scales)):
            keys = [_key(p) for p in cad.nodes * scale]
            for i, faces in cad.node_faces.items():
                self.vertex[keys[i]] = (f, faces)
            for (i, j), curve in cad.curve_edges.items():
                self.edge[(keys[i], keys[j])] = self.edge[(keys[j], keys[i])] = (f, curve)

    def __call__(self, midpoints, ends):
        midpoints = np.asarray(midpoints, np.float64)
        ends = np.asarray(ends, np.float64)
        out = midpoints.copy()
        targets = {}  # (file, dim, tag) -> [edge numbers]
        for k in range(len(midpoints)):
            ka, kb = _key(ends[k, 0]), _key(ends[k, 1])
            along = self.edge.get((ka, kb))
            if along is not None:
                targets.setdefault((along[0], 1, along[1]), []).append(k)
                continue
            va, vb = self.vertex.get(ka), self.vertex.get(kb)
            common = va[1] & vb[1] if va is not None and vb is not None and va[0] == vb[0] else frozenset()
            if len(common) == 1:
                targets.setdefault((va[0], 2, next(iter(common))), []).append(k)
            else:
                targets.setdefault(("search", va[0] if va else None, common), []).append(k)
        for target, rows in targets.items():
            rows = np.asarray(rows)
            if target[0] == "search":
                self._search(rows, target[1], target[2], midpoints, ends, out)
                continue
            f, dim, tag = target
            gmsh = reopen(self.cads[f])
            out[rows] = _closest(gmsh, dim, tag, midpoints[rows] / self.scales[f]) * self.scales[f]
            self._remember(rows, ends, out, f, dim, tag)
        return out

    def _remember(self, rows, ends, out, f, dim, tag):
        cad = self.cads[f]
        faces = cad.curve_faces.get(tag, frozenset()) if dim == 1 else frozenset((tag,))
        for k in rows:
            km = _key(out[k])
            self.vertex[km] = (f, faces)
            if dim == 1:
                for end in (_key(ends[k, 0]), _key(ends[k, 1])):
                    self.edge[(end, km)] = self.edge[(km, end)] = (f, tag)

    def _search(self, rows, f, common, midpoints, ends, out):
        """Onto the face nearest the midpoint among those both ends lie on (the faces
        both ends are known to share, else every face of every file)."""
        best = np.full(len(rows), np.inf)
        choice = [None] * len(rows)
        files = [f] if f is not None and common else range(len(self.cads))
        for g in files:
            cad, scale = self.cads[g], self.scales[g]
            gmsh = reopen(cad)
            for face in (sorted(common) if common else cad.faces):
                on = [_closest(gmsh, 2, face, p / scale) * scale for p in (ends[rows, 0], ends[rows, 1], midpoints[rows])]
                ok = np.maximum(np.linalg.norm(on[0] - ends[rows, 0], axis=1),
                                np.linalg.norm(on[1] - ends[rows, 1], axis=1)) < self.tolerance
                gap = np.linalg.norm(on[2] - midpoints[rows], axis=1)
                better = ok & (gap < best)
                best[better], out[rows[better]] = gap[better], on[2][better]
                for k in np.flatnonzero(better):
                    choice[k] = (g, face)
        for k, picked in zip(rows, choice):
            if picked is not None:
                self.vertex[_key(out[k])] = (picked[0], frozenset((picked[1],)))


def _closest(gmsh, dim: int, tag: int, points: np.ndarray) -> np.ndarray:
    """The closest points on entity (dim, tag) to ``points`` (n, 3); the points themselves
    where gmsh cannot project (a degenerate curve)."""
    if not len(points):
        return points.copy()
    try:
        found, _ = gmsh.model.getClosestPoint(dim, int(tag), np.ascontiguousarray(points).ravel().tolist())
    except Exception:  # gmsh raises plain Exception
        return points.copy()
    found = np.asarray(found, np.float64).reshape(-1, 3)
    return found if found.shape == points.shape and np.isfinite(found).all() else points.copy()


def combined_projection(raws, scale: float, points: np.ndarray):
    """The projection for the files ``raws`` (RawSurface) read together, or None when
    none is CAD; ``scale`` is metres per unit of the files that do not carry a unit,
    ``points`` (n, 3) metres all vertices (their size sets the tolerance)."""
    cads = [(raw.cad, raw.cad.scale or scale) for raw in raws if raw.cad is not None]
    if not cads:
        return None
    size = float(np.linalg.norm(np.ptp(points, axis=0))) if len(points) else 1.0
    return CadProjection([c for c, _ in cads], [s for _, s in cads], size)
