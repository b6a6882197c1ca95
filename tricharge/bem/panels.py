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

from ..mesh import triangle_measures, validate_surface

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
    def _measures(self) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        return triangle_measures(self.vertices, self.triangles)

    @cached_property
    def _cross(self) -> np.ndarray:
        return self._measures[2]

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
        return self._measures[1]

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
