"""Triangle-surface utilities shared by every layer: validation, vertex merging, components.

Only numpy and scipy; no files, no solver. Arrays follow the package convention:
vertices (n, 3) float64 metres, triangles (m, 3) int64.
"""

from __future__ import annotations

import numpy as np

from scipy.sparse import coo_matrix
from scipy.sparse.csgraph import connected_components as _components
from scipy.spatial import cKDTree

from .errors import MeshError

#: A triangle is degenerate when its area is below this fraction of the area of an
#: equilateral triangle with the same longest edge (common practice, no source).
DEGENERATE_AREA_FRACTION = 1e-10


def validate_surface(vertices, triangles, *, source: str = "mesh") -> tuple[np.ndarray, np.ndarray]:
    """Check a triangle surface and return it as contiguous float64/int64 arrays.

    Parameters
    ----------
    vertices : array_like (n, 3), metres
    triangles : array_like (m, 3), integer vertex indices
    source : name of the input, used in error messages (a file name, say)

    Raises
    ------
    MeshError
        For an empty mesh, wrong shapes, out-of-range indices, non-finite coordinates
        or degenerate (zero-area) triangles. The message names ``source``, the count
        and the first offending triangle.
    """
    v = np.ascontiguousarray(vertices, dtype=np.float64)
    t = np.asarray(triangles)
    if v.ndim != 2 or v.shape[1] != 3:
        raise MeshError(f"{source}: vertices must have shape (n, 3), got {v.shape}")
    if t.size == 0:
        raise MeshError(f"{source}: the mesh has no triangles; export the conductor surfaces as a triangle mesh")
    if t.ndim != 2 or t.shape[1] != 3:
        raise MeshError(f"{source}: triangles must have shape (m, 3), got {t.shape}")
    if not np.issubdtype(t.dtype, np.integer):
        raise MeshError(f"{source}: triangle indices must be integers, got {t.dtype}")
    t = np.ascontiguousarray(t, dtype=np.int64)
    if t.min() < 0 or t.max() >= len(v):
        raise MeshError(
            f"{source}: triangle indices must lie in 0..{len(v) - 1}, found {t.min()}..{t.max()}; the file is inconsistent"
        )
    bad = ~np.isfinite(v[np.unique(t)]).all(axis=1)
    if bad.any():
        raise MeshError(f"{source}: {int(bad.sum())} vertices have NaN or infinite coordinates; repair the export")
    corners = v[t]
    edges = np.roll(corners, -1, axis=1) - corners
    longest = np.linalg.norm(edges, axis=2).max(axis=1)
    areas = 0.5 * np.linalg.norm(np.cross(edges[:, 0], -edges[:, 2]), axis=1)
    degenerate = areas <= DEGENERATE_AREA_FRACTION * (np.sqrt(3.0) / 4.0) * longest**2
    if degenerate.any():
        first = int(np.flatnonzero(degenerate)[0])
        where = ", ".join(f"{x:.6g}" for x in corners[first].mean(axis=0))
        raise MeshError(
            f"{source}: {int(degenerate.sum())} degenerate (zero-area) triangles, first is #{first} near ({where}) m;"
            " remove them or remesh"
        )
    return v, t


def merge_vertices(vertices, triangles, tolerance: float):
    """Merge vertices closer than ``tolerance`` (metres) and drop unused ones.

    Parameters
    ----------
    vertices : (n, 3) float
    triangles : (m, 3) int
    tolerance : absolute distance, metres; callers usually pass a small fraction
        (say 1e-9) of the model's bounding-box diagonal.

    Returns
    -------
    vertices : (k, 3) float64, the first vertex of every cluster, in first-use order
    triangles : (m, 3) int64 re-indexed
    """
    v = np.asarray(vertices, dtype=np.float64)
    t = np.asarray(triangles, dtype=np.int64)
    pairs = cKDTree(v).query_pairs(r=tolerance, output_type="ndarray")
    n = len(v)
    graph = coo_matrix((np.ones(len(pairs)), (pairs[:, 0], pairs[:, 1])), shape=(n, n)) if len(pairs) else coo_matrix((n, n))
    _, cluster = _components(graph, directed=False)
    used_clusters, first_use = np.unique(cluster[t.ravel()], return_index=True)
    order = np.argsort(first_use)
    new_index = np.full(cluster.max() + 1, -1, dtype=np.int64)
    new_index[used_clusters[order]] = np.arange(len(order))
    representative = np.full(cluster.max() + 1, -1, dtype=np.int64)
    representative[cluster[::-1]] = np.arange(n)[::-1]  # lowest original index per cluster
    new_vertices = v[representative[used_clusters[order]]]
    return new_vertices, new_index[cluster[t]]


def connected_components(triangles) -> np.ndarray:
    """Component index (m,) of every triangle; triangles sharing a vertex are connected.

    Components are numbered 0, 1, ... in the order of each one's lowest triangle index.
    """
    t = np.asarray(triangles, dtype=np.int64)
    m = len(t)
    n_vertices = int(t.max()) + 1
    rows = np.repeat(np.arange(m), 3)
    graph = coo_matrix((np.ones(3 * m), (rows, m + t.ravel())), shape=(m + n_vertices, m + n_vertices))
    _, comp = _components(graph, directed=False)
    tri_comp = comp[:m]
    _, first = np.unique(tri_comp, return_index=True)
    order = np.argsort(first)
    renumber = np.empty(tri_comp.max() + 1, dtype=np.int64)
    renumber[np.unique(tri_comp)[order]] = np.arange(len(order))
    return renumber[tri_comp]
