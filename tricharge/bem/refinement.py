"""Refining panels: split chosen triangles (conforming or with hanging nodes), refine
uniformly, carry each new panel's role over from its parent, and optionally move new
vertices onto an exact surface (for tests against analytic shapes).
"""

from __future__ import annotations

from dataclasses import replace

import numpy as np

from ..mesh import edge_ids
from .panels import make_panels

def split_triangles(vertices, triangles, mask, *, conforming: bool = False,
                    project=None) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Split the triangles selected by ``mask`` into four at their edge midpoints.

    With ``conforming=False`` neighbours that are not split keep their edges, so the mesh
    may get hanging nodes (piecewise-constant collocation does not need conforming
    panels). With ``conforming=True`` neighbours are bisected to match: every triangle
    with a split side gets its longest side split too (repeated until nothing changes).
    A triangle with all three sides split becomes four as above; one with fewer is halved
    across its longest side and, where another side is split, halved again there
    (longest-edge bisection, Rivara 1984, from memory). Every edge stays shared by whole
    sides, closed surfaces stay closed, and repeated refinement keeps angles bounded away
    from zero.

    ``project(midpoints (k, 3), ends (k, 2, 3)) -> (k, 3)`` moves the new vertices onto
    the exact surface the mesh approximates (see :func:`onto_sphere` and friends); the
    default leaves them on the flat panels. Vertex order, hence normal direction, is kept.

    Returns
    -------
    vertices : (n', 3); triangles : (m', 3); parent : (m',) index of the original
    triangle each new one came from
    """
    v = np.asarray(vertices, dtype=np.float64)
    t = np.asarray(triangles, dtype=np.int64)
    mask = np.asarray(mask, dtype=bool)
    edges, side = edge_ids(t)
    marked = np.zeros(len(edges), dtype=bool)
    marked[side[mask].ravel()] = True
    if conforming:
        lengths = np.linalg.norm(v[edges[:, 0]] - v[edges[:, 1]], axis=1)[side]
        longest = np.argmax(lengths, axis=1)
        longest_edge = side[np.arange(len(t)), longest]
        while True:
            touched = marked[side].any(axis=1) & ~marked[longest_edge]
            if not touched.any():
                break
            marked[longest_edge[touched]] = True
        red = marked[side].all(axis=1)
        bisected = marked[side].any(axis=1) & ~red
    else:
        red, bisected, longest = mask, np.zeros(len(t), dtype=bool), None
    used = np.flatnonzero(marked)
    ends = v[edges[used]]
    midpoints = ends.mean(axis=1)
    if project is not None and len(used):
        midpoints = np.asarray(project(midpoints, ends), dtype=np.float64)
    number = np.full(len(edges), -1, dtype=np.int64)
    number[used] = len(v) + np.arange(len(used))
    mid = number[side]  # midpoint vertex of side k per triangle, -1 where not split
    a, b, c = t[red, 0], t[red, 1], t[red, 2]
    ab, bc, ca = mid[red, 0], mid[red, 1], mid[red, 2]
    red_children = np.stack([np.column_stack(x) for x in ((a, ab, ca), (ab, b, bc), (ca, bc, c), (ab, bc, ca))],
                            axis=1).reshape(-1, 3)
    keep = ~(red | bisected)
    children, parents = [t[keep], red_children], [np.flatnonzero(keep), np.repeat(np.flatnonzero(red), 4)]
    if bisected.any():
        children_b, parents_b = _bisect(t, mid, np.flatnonzero(bisected), longest)
        children.append(children_b)
        parents.append(parents_b)
    return np.vstack([v, midpoints]), np.vstack(children), np.concatenate(parents)

def _bisect(t, mid, rows, longest):
    """Children of triangles whose longest side is split: halves across it, and each half
    halved again across its other split side, if any. Returns (children, parent)."""
    k = longest[rows]
    p0, p1, p2 = (t[rows, (k + s) % 3] for s in range(3))  # longest side p0 -> p1
    m, m1, m2 = (mid[rows, (k + s) % 3] for s in range(3))  # midpoints of p0p1, p1p2, p2p0
    out, parent = [], []
    for keep, tris in (
        (m1 < 0, [(m, p1, p2)]),
        (m1 >= 0, [(m, p1, m1), (m, m1, p2)]),
        (m2 < 0, [(p0, m, p2)]),
        (m2 >= 0, [(m, p2, m2), (m, m2, p0)]),
    ):
        for tri in tris:
            out.append(np.column_stack([x[keep] for x in tri]))
            parent.append(rows[keep])
    return np.vstack(out), np.concatenate(parent)

def refine_uniformly(vertices, triangles, *, project=None):
    """Every triangle into four (halves the panel size); see :func:`split_triangles`."""
    return split_triangles(vertices, triangles, np.ones(len(triangles), dtype=bool), project=project)

def onto_sphere(center=(0.0, 0.0, 0.0), radius: float = 1.0):
    """Radial projection onto the sphere |x - center| = radius (metres)."""
    return onto_spheres([(center, radius)])

def onto_spheres(spheres):
    """Projection onto the nearest of several spheres [(center (3,), radius), ...]."""
    centers = np.array([c for c, _ in spheres], dtype=np.float64)
    radii = np.array([r for _, r in spheres], dtype=np.float64)

    def project(points, ends):
        offset = points[:, None, :] - centers[None, :, :]
        distance = np.linalg.norm(offset, axis=2)
        k = np.argmin(np.abs(distance - radii[None, :]), axis=1)
        rows = np.arange(len(points))
        return centers[k] + offset[rows, k] * (radii[k] / distance[rows, k])[:, None]
    return project

def onto_ellipsoid(center=(0.0, 0.0, 0.0), semi_axes=(1.0, 1.0, 1.0)):
    """Projection along the ray from ``center`` onto the ellipsoid with ``semi_axes`` (metres)."""
    c, axes = np.asarray(center, dtype=np.float64), np.asarray(semi_axes, dtype=np.float64)

    def project(points, ends):
        d = points - c
        return c + d / np.sqrt(((d / axes) ** 2).sum(axis=1))[:, None]
    return project

def onto_disk_rim(center=(0.0, 0.0, 0.0), radius: float = 1.0, tolerance: float = 1e-9):
    """For a flat disk in a plane z = const: midpoints of edges whose two ends lie on the
    rim move out onto the circle of ``radius``; all others stay where they are."""
    c = np.asarray(center, dtype=np.float64)

    def project(points, ends):
        r_ends = np.linalg.norm((ends - c)[:, :, :2], axis=2)
        on_rim = np.all(np.abs(r_ends - radius) <= tolerance * radius, axis=1)
        out = points.copy()
        d = out[on_rim, :2] - c[:2]
        out[on_rim, :2] = c[:2] + d * (radius / np.linalg.norm(d, axis=1))[:, None]
        return out
    return project


def refined_problem(problem, mask=None, *, conforming: bool = True, project=None):
    """The problem on refined panels (all of them when ``mask`` is None), with each new
    panel's role copied from its parent. Returns (problem, parent (N',))."""
    panels = problem.panels
    if mask is None:
        mask = np.ones(len(panels), dtype=bool)
    v, t, parent = split_triangles(panels.vertices, panels.triangles, mask, conforming=conforming, project=project)
    behind = None if problem.permittivity_behind is None else problem.permittivity_behind[parent]
    return replace(problem, panels=make_panels(v, t), panel_conductor=problem.panel_conductor[parent],
                   permittivity=problem.permittivity[parent], contrast=problem.contrast[parent],
                   permittivity_behind=behind), parent
