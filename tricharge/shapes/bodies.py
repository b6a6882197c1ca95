"""Closed and flat bodies from arrays: spheres, boxes and cubes (optionally edge-graded),
plates, disks, and several bodies combined into one mesh with labels."""

from __future__ import annotations

import numpy as np

from ..mesh import merge_vertices


def _icosahedron():
    p = (1.0 + np.sqrt(5.0)) / 2.0
    v = np.array([[-1, p, 0], [1, p, 0], [-1, -p, 0], [1, -p, 0], [0, -1, p], [0, 1, p],
                  [0, -1, -p], [0, 1, -p], [p, 0, -1], [p, 0, 1], [-p, 0, -1], [-p, 0, 1]], float)
    f = np.array([[0, 11, 5], [0, 5, 1], [0, 1, 7], [0, 7, 10], [0, 10, 11], [1, 5, 9], [5, 11, 4],
                  [11, 10, 2], [10, 7, 6], [7, 1, 8], [3, 9, 4], [3, 4, 2], [3, 2, 6], [3, 6, 8],
                  [3, 8, 9], [4, 9, 5], [2, 4, 11], [6, 2, 10], [8, 6, 7], [9, 8, 1]])
    return v / np.linalg.norm(v, axis=1, keepdims=True), f


def _subdivide_triangle(a, b, c, n):
    """Split triangle abc into n*n triangles; returns (points, triangles) local to it."""
    index = {}
    points = []
    for i in range(n + 1):
        for j in range(n + 1 - i):
            index[i, j] = len(points)
            points.append(a + (b - a) * (i / n) + (c - a) * (j / n))
    tris = []
    for i in range(n):
        for j in range(n - i):
            tris.append((index[i, j], index[i + 1, j], index[i, j + 1]))
            if j < n - i - 1:
                tris.append((index[i + 1, j], index[i + 1, j + 1], index[i, j + 1]))
    return np.array(points), np.array(tris)


def _join(parts, tolerance):
    verts, tris, offset = [], [], 0
    for v, t in parts:
        verts.append(v)
        tris.append(t + offset)
        offset += len(v)
    return merge_vertices(np.vstack(verts), np.vstack(tris), tolerance)


def sphere(radius: float = 1.0, frequency: int = 8, center=(0.0, 0.0, 0.0)):
    """Geodesic sphere: an icosahedron with each face split into ``frequency**2`` triangles.

    Panel count is ``20 * frequency**2`` (1280 at 8, 5120 at 16). Vertices lie on the sphere.
    """
    v0, f0 = _icosahedron()
    parts = [_subdivide_triangle(*v0[face], frequency) for face in f0]
    v, t = _join(parts, 1e-9)
    v = v / np.linalg.norm(v, axis=1, keepdims=True)
    return v * radius + np.asarray(center, float), t


def _spacing(n: int, graded: bool) -> np.ndarray:
    """n+1 nodes on [0, 1]; graded puts them closer near both ends (cosine law)."""
    s = np.linspace(0.0, 1.0, n + 1)
    return 0.5 * (1.0 - np.cos(np.pi * s)) if graded else s


def grid_face(origin, e1, e2, n1, n2, graded):
    """Triangulated rectangle origin + s*e1 + t*e2; normal e1 x e2."""
    s, t = _spacing(n1, graded), _spacing(n2, graded)
    ss, tt = np.meshgrid(s, t, indexing="ij")
    points = origin + ss.reshape(-1, 1) * e1 + tt.reshape(-1, 1) * e2
    k = np.arange((n1 + 1) * (n2 + 1)).reshape(n1 + 1, n2 + 1)
    a, b, c, d = k[:-1, :-1].ravel(), k[1:, :-1].ravel(), k[1:, 1:].ravel(), k[:-1, 1:].ravel()
    tris = np.concatenate([np.stack([a, b, c], 1), np.stack([a, c, d], 1)])
    return points, tris


def box(size=(1.0, 1.0, 1.0), divisions=(8, 8, 8), center=(0.0, 0.0, 0.0), graded: bool = False):
    """Closed rectangular box with a structured grid on each face.

    Parameters
    ----------
    size : (3,) edge lengths, metres
    divisions : (3,) intervals along x, y, z; panels = 4*(nx*ny + ny*nz + nz*nx)
    graded : refine towards edges and corners (cosine spacing), where charge crowds
    """
    lx, ly, lz = map(float, size)
    nx, ny, nz = map(int, divisions)
    lo = np.asarray(center, float) - 0.5 * np.array([lx, ly, lz])
    ex, ey, ez = np.diag([lx, ly, lz])
    faces = [
        (lo, ey, ex, ny, nx),                 # z = lo, normal -z
        (lo + ez, ex, ey, nx, ny),            # z = hi, normal +z
        (lo, ex, ez, nx, nz),                 # y = lo, normal -y
        (lo + ey, ez, ex, nz, nx),            # y = hi, normal +y
        (lo, ez, ey, nz, ny),                 # x = lo, normal -x
        (lo + ex, ey, ez, ny, nz),            # x = hi, normal +x
    ]
    parts = [grid_face(o, a, b, n1, n2, graded) for o, a, b, n1, n2 in faces]
    return _join(parts, 1e-9 * max(lx, ly, lz))


def cube(side: float = 1.0, divisions: int = 8, graded: bool = False, center=(0.0, 0.0, 0.0)):
    """Cube of edge ``side`` with ``divisions`` intervals per edge (12*divisions**2 panels)."""
    return box((side,) * 3, (divisions,) * 3, center=center, graded=graded)


def plate(size=(1.0, 1.0), divisions=(8, 8), center=(0.0, 0.0, 0.0), graded: bool = False):
    """Zero-thickness rectangular plate in the plane z = center[2], normal +z."""
    lx, ly = map(float, size)
    origin = np.asarray(center, float) - np.array([lx / 2, ly / 2, 0.0])
    v, t = grid_face(origin, np.array([lx, 0, 0.0]), np.array([0, ly, 0.0]), *divisions, graded)
    return v, t.astype(np.int64)


def disk(radius: float = 1.0, rings: int = 10, center=(0.0, 0.0, 0.0)):
    """Zero-thickness circular disk in the plane z = center[2], normal +z.

    Ring k (k = 1..rings) carries 6k vertices at radius k/rings of the disk's, so panels
    are near-equilateral and number ``6 * rings**2``.
    """
    points = [np.zeros(2)]
    for k in range(1, rings + 1):
        angle = 2.0 * np.pi * np.arange(6 * k) / (6 * k)
        points.extend(np.stack([np.cos(angle), np.sin(angle)], 1) * (k / rings))
    points = np.array(points)
    from scipy.spatial import Delaunay

    t = Delaunay(points).simplices.astype(np.int64)
    a, b, c = (points[t[:, i]] for i in range(3))
    flip = (b[:, 0] - a[:, 0]) * (c[:, 1] - a[:, 1]) - (b[:, 1] - a[:, 1]) * (c[:, 0] - a[:, 0]) < 0
    t[flip] = t[flip][:, [0, 2, 1]]
    v = np.column_stack([points * radius, np.zeros(len(points))]) + np.asarray(center, float)
    return v, t


def combine(*meshes):
    """Concatenate meshes; returns ``(vertices, triangles, labels)`` with labels 0, 1, ... per input."""
    verts, tris, labels, offset = [], [], [], 0
    for k, (v, t) in enumerate(meshes):
        verts.append(np.asarray(v, float))
        tris.append(np.asarray(t, np.int64) + offset)
        labels.append(np.full(len(t), k, dtype=np.int64))
        offset += len(v)
    return np.vstack(verts), np.vstack(tris), np.concatenate(labels)
