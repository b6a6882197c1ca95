"""Flat triangular panels: geometry and quadrature points.

Convention (stated once for the whole package): ``vertices`` is an ``(n, 3)`` float64
array in metres, ``triangles`` an ``(m, 3)`` int64 array of vertex indices. A panel's
unit normal follows the right-hand rule on its vertex order, so closed surfaces with
counter-clockwise vertices seen from outside have outward normals.
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import cached_property

import numpy as np

from ..mesh import edge_ids, validate_surface

# Dunavant, "High degree efficient symmetrical Gaussian quadrature rules for the
# triangle", Int. J. Numer. Meth. Eng. 21 (1985) 1129-1148, rules of degree 1, 2, 4, 5.
# Each rule: (barycentric coordinates (q, 3), weights (q,) summing to 1). Exactness
# for polynomials up to the stated degree is checked in tests/test_panels.py.
def _orbit3(a: float) -> list[tuple[float, float, float]]:
    b = 1.0 - 2.0 * a
    return [(a, a, b), (a, b, a), (b, a, a)]


def _dunavant_rules() -> dict[int, tuple[np.ndarray, np.ndarray]]:
    s15 = np.sqrt(15.0)
    a5, b5 = (6.0 - s15) / 21.0, (6.0 + s15) / 21.0
    w5a, w5b = (155.0 - s15) / 1200.0, (155.0 + s15) / 1200.0
    rules = {
        1: ([(1 / 3, 1 / 3, 1 / 3)], [1.0]),
        2: (_orbit3(1 / 6), [1 / 3] * 3),
        4: (
            _orbit3(0.445948490915965) + _orbit3(0.091576213509771),
            [0.223381589678011] * 3 + [0.109951743655322] * 3,
        ),
        5: (
            [(1 / 3, 1 / 3, 1 / 3)] + _orbit3(a5) + _orbit3(b5),
            [9.0 / 40.0] + [w5a] * 3 + [w5b] * 3,
        ),
    }
    return {deg: (np.array(b, dtype=float), np.array(w, dtype=float)) for deg, (b, w) in rules.items()}


QUADRATURE_RULES: dict[int, tuple[np.ndarray, np.ndarray]] = _dunavant_rules()


@dataclass(frozen=True, eq=False)
class Panels:
    """Geometry of a set of flat triangular panels.

    Parameters
    ----------
    vertices : (n, 3) float64, metres
    triangles : (m, 3) int64, indices into ``vertices``

    Use :func:`make_panels` to build one with validation.
    """

    vertices: np.ndarray
    triangles: np.ndarray

    def __len__(self) -> int:
        return len(self.triangles)

    def __repr__(self) -> str:
        return f"Panels(n_panels={len(self)}, size {self.sizes.min():.3g}..{self.sizes.max():.3g} m)"

    @cached_property
    def corners(self) -> np.ndarray:
        """(m, 3, 3) float64, metres: the three vertices of every panel."""
        return self.vertices[self.triangles]

    @cached_property
    def centroids(self) -> np.ndarray:
        """(m, 3) float64, metres: collocation points."""
        return self.corners.mean(axis=1)

    @cached_property
    def _cross(self) -> np.ndarray:
        c = self.corners
        return np.cross(c[:, 1] - c[:, 0], c[:, 2] - c[:, 0])

    @cached_property
    def areas(self) -> np.ndarray:
        """(m,) float64, square metres."""
        return 0.5 * np.linalg.norm(self._cross, axis=1)

    @cached_property
    def normals(self) -> np.ndarray:
        """(m, 3) float64: unit normals by the right-hand rule on the vertex order."""
        return self._cross / (2.0 * self.areas[:, None])

    @cached_property
    def sizes(self) -> np.ndarray:
        """(m,) float64, metres: panel diameter (longest edge)."""
        c = self.corners
        edges = np.stack([c[:, 1] - c[:, 0], c[:, 2] - c[:, 1], c[:, 0] - c[:, 2]], axis=1)
        return np.linalg.norm(edges, axis=2).max(axis=1)

    @cached_property
    def _quadrature_cache(self) -> dict:
        return {}

    def quadrature(self, degree: int) -> tuple[np.ndarray, np.ndarray]:
        """Quadrature points and weights of a Dunavant rule on every panel.

        Parameters
        ----------
        degree : one of 1, 2, 4, 5 (polynomial degree integrated exactly)

        Returns
        -------
        points : (m, q, 3) float64, metres
        weights : (m, q) float64, square metres (rule weight times panel area)
        """
        if degree not in QUADRATURE_RULES:
            raise ValueError(f"quadrature degree {degree} not available; choose one of {sorted(QUADRATURE_RULES)}")
        if degree not in self._quadrature_cache:
            bary, w = QUADRATURE_RULES[degree]
            points = self.centroids[:, None, :] if degree == 1 else np.einsum("qk,mkd->mqd", bary, self.corners)
            self._quadrature_cache[degree] = (points, self.areas[:, None] * w[None, :])
        return self._quadrature_cache[degree]


def make_panels(vertices, triangles, *, source: str = "mesh") -> Panels:
    """Validate arrays (see :func:`tricharge.mesh.validate_surface`) and build :class:`Panels`."""
    return Panels(*validate_surface(vertices, triangles, source=source))


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


# -- exact surfaces for refinement tests: project(midpoints, ends) -> points ---------------

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
