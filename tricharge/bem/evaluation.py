"""The potential and field at sample points, right up to (and inside) the surfaces.

The charge is piecewise constant on flat panels, so the field its layer produces is
logarithmically singular at every panel edge and vertex: evaluated there it shows the
mesh, not the device (a probe on a vertex of a sphere read 42 % high). Each point is
therefore placed first:

* **inside a conductor** (winding number of the conductor's closed skins above 1/2):
  potential of that conductor, zero field;
* **below the ground plane**: potential 0, zero field;
* **near a surface** (closer than :data:`NEAR_SURFACE` times the size of the nearest
  panel): the field follows a quadratic along the line from the nearest surface point
  through the sample, through the surface value there (:class:`SurfaceValues`: the
  panels' values averaged to their vertices and interpolated, so it is smooth) and the
  field at half and one panel size out, where the layer's field is accurate. Where the
  surface value is unknown (an open conductor sheet, whose charge is the sum of both
  faces') it is extrapolated from three points at :data:`TRUSTED_STEPS`. The potential,
  continuous and finite everywhere, is evaluated directly;
* **in a gap narrower than the mesh resolves** (one of those three points lies closer to
  another surface): evaluated directly and flagged;
* **free**: evaluated directly.

Accuracy is measured in tests/reference/test_fields.py and docs/measured.md (error
against distance from the surface, in panel sizes).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .fmm import dipole_sums
from .integrals import solid_angles
from .nearfield import near_pairs
from .panels import Panels

#: Points closer to a surface than this many sizes of the nearest panel are near: the
#: direct evaluation was within 0.3 % on a sphere from here outwards, and up to 15 % off
#: (42 % at a vertex) closer in (measured, 2,880 panels).
NEAR_SURFACE = 0.5
#: Distances (in sizes of the nearest panel) of the three points a near point's field is
#: extrapolated from; the first is where direct evaluation becomes accurate.
TRUSTED_STEPS = (0.5, 1.0, 1.5)
#: Points this close to a surface (in panel sizes) count as on it (outside a conductor).
ON_SURFACE = 1e-6

FREE, NEAR, INSIDE, BELOW_PLANE, NARROW_GAP = range(5)
#: Words for the ``where`` codes of :class:`Samples` (CSV, JSON, terminal).
WHERE = ("free", "near surface", "inside conductor", "below ground plane", "narrow gap")


@dataclass(frozen=True, repr=False)
class Samples:
    """Potential and field at M points, and where each point lies.

    potential : (M,) V; field : (M, 3) V/m
    where : (M,) int8 code, an index into :data:`WHERE`
    distance : (M,) metres to the nearest surface (NaN where none is within reach)
    panel_size : (M,) metres, size of the nearest panel (NaN where none)
    conductor : (M,) index of the conductor a point lies inside, else -1
    """

    potential: np.ndarray
    field: np.ndarray
    where: np.ndarray
    distance: np.ndarray
    panel_size: np.ndarray
    conductor: np.ndarray

    def __repr__(self) -> str:
        counts = ", ".join(f"{int((self.where == k).sum())} {name}" for k, name in enumerate(WHERE)
                           if (self.where == k).any())
        return f"Samples({len(self.where)} points: {counts})"


def closest_points(points, corners) -> tuple[np.ndarray, np.ndarray]:
    """The point of each triangle closest to its paired point, and the distance.

    points (p, 3), corners (p, 3, 3), metres; returns closest (p, 3) and distance (p,).
    Region tests of Ericson, *Real-Time Collision Detection* (2005) §5.1.5 (from memory),
    vectorised: the first region that holds wins, as in the sequential original.
    """
    p = np.asarray(points, dtype=np.float64)
    a, b, c = (np.asarray(corners, dtype=np.float64)[:, k] for k in range(3))
    ab, ac = b - a, c - a

    def dot(u, v):
        return np.einsum("pd,pd->p", u, v)

    d1, d2 = dot(ab, p - a), dot(ac, p - a)
    d3, d4 = dot(ab, p - b), dot(ac, p - b)
    d5, d6 = dot(ab, p - c), dot(ac, p - c)
    vc, vb, va = d1 * d4 - d3 * d2, d5 * d2 - d1 * d6, d3 * d6 - d5 * d4
    with np.errstate(divide="ignore", invalid="ignore"):
        on_ab = a + (d1 / (d1 - d3))[:, None] * ab
        on_ac = a + (d2 / (d2 - d6))[:, None] * ac
        on_bc = b + ((d4 - d3) / ((d4 - d3) + (d5 - d6)))[:, None] * (c - b)
        total = va + vb + vc
        face = a + (vb / total)[:, None] * ab + (vc / total)[:, None] * ac
    conditions = [(d1 <= 0) & (d2 <= 0), (d3 >= 0) & (d4 <= d3), (vc <= 0) & (d1 >= 0) & (d3 <= 0),
                  (d6 >= 0) & (d5 <= d6), (vb <= 0) & (d2 >= 0) & (d6 <= 0),
                  (va <= 0) & (d4 - d3 >= 0) & (d5 - d6 >= 0)]
    choices = [a, b, on_ab, c, on_ac, on_bc]
    closest = face.copy()
    for condition, choice in reversed(list(zip(conditions, choices))):  # earlier regions take precedence
        closest[condition] = choice[condition]
    return closest, np.linalg.norm(p - closest, axis=1)


def nearest_surface(points, panels: Panels, within: float = NEAR_SURFACE + 1.0):
    """For each point, the nearest panel among those whose centroid lies within
    ``within`` panel sizes (exact among them: a panel at distance d has its centroid
    within d + its size), the closest point on it and the distance.

    Returns panel (M,) int64 (-1 where none is in reach), closest (M, 3), distance (M,)
    (NaN where none).
    """
    points = np.asarray(points, dtype=np.float64)
    m = len(points)
    panel, closest, distance = np.full(m, -1, np.int64), np.full((m, 3), np.nan), np.full(m, np.nan)
    i, j, _ = near_pairs(points, panels, within)
    if not len(i):
        return panel, closest, distance
    cp, d = closest_points(points[i], panels.corners[j])
    order = np.lexsort((d, i))
    first = order[np.r_[True, i[order][1:] != i[order][:-1]]]
    panel[i[first]], closest[i[first]], distance[i[first]] = j[first], cp[first], d[first]
    return panel, closest, distance


def winding_numbers(points, panels: Panels, groups: np.ndarray, n_groups: int, *, precision: float = 1e-6):
    """(M, G) winding number of each group's panels around each point: the sum of the
    signed solid angles over 4 pi (about 1 inside an outward-oriented closed skin, 0
    outside, -1 inside a cavity lining). Panels with group -1 are left out. Far panels
    count as point dipoles ``A n`` (:func:`~tricharge.bem.fmm.dipole_sums`), those within
    three panel sizes with their exact solid angle."""
    points = np.asarray(points, dtype=np.float64)
    rows = np.flatnonzero(groups >= 0)
    out = np.zeros((len(points), n_groups))
    if not len(rows) or not len(points):
        return out
    dipoles = np.zeros((len(rows), n_groups, 3))
    dipoles[np.arange(len(rows)), groups[rows]] = panels.normals[rows] * panels.areas[rows, None]
    centroids = panels.centroids[rows]
    out += dipole_sums(centroids, dipoles, points, precision=precision).reshape(len(points), n_groups)
    local = Panels(panels.vertices, panels.triangles[rows])
    i, j, _ = near_pairs(points, local, 3.0)
    if len(i):
        diff = centroids[j] - points[i]
        r3 = np.linalg.norm(diff, axis=1) ** 3
        with np.errstate(divide="ignore", invalid="ignore"):
            point_rule = np.where(r3 > 0, np.einsum("pd,pd->p", diff, dipoles[j, groups[rows][j]]) / r3, 0.0)
        np.add.at(out, (i, groups[rows][j]), solid_angles(points[i], local.corners[j]) - point_rule)
    return out / (4.0 * np.pi)


def barycentric(points, corners) -> np.ndarray:
    """(p, 3) barycentric coordinates of points in (the plane of) their triangles (p, 3, 3)."""
    a, b, c = (corners[:, k] for k in range(3))
    v0, v1, v2 = b - a, c - a, points - a
    d00, d01, d11 = (np.einsum("pd,pd->p", x, y) for x, y in ((v0, v0), (v0, v1), (v1, v1)))
    d20, d21 = np.einsum("pd,pd->p", v2, v0), np.einsum("pd,pd->p", v2, v1)
    denominator = d00 * d11 - d01 * d01
    v, w = (d11 * d20 - d01 * d21) / denominator, (d00 * d21 - d01 * d20) / denominator
    return np.column_stack([1.0 - v - w, v, w])


class SurfaceValues:
    """The field on either side of the surface at any point of it, continuous across
    panels: each panel's side values are averaged (weighted by area) to its vertices,
    among panels of the same part only, and interpolated linearly over the panel.

    Parameters
    ----------
    panels : the panels; groups : (N,) part of each panel (values do not mix across parts)
    normal : (N, 2) normal component on the outside and inside, V/m (NaN where unknown)
    tangential : (N, 3) tangential field, V/m (continuous across the surface)
    """

    def __init__(self, panels: Panels, groups, normal, tangential):
        self.panels = panels
        triangles = panels.triangles
        keys = np.asarray(groups, np.int64)[:, None] * (len(panels.vertices) + 1) + triangles
        unique, self.corner = np.unique(keys.ravel(), return_inverse=True)
        self.corner = self.corner.reshape(-1, 3)
        self.known = np.isfinite(np.asarray(normal, dtype=float))
        weight = np.repeat(panels.areas, 3)

        def average(values):  # (N, c) -> (vertices, c), NaN where no known panel
            values = np.repeat(np.asarray(values, dtype=float).reshape(len(panels), -1), 3, axis=0)
            known = np.isfinite(values)
            sums = np.stack([np.bincount(self.corner.ravel(), np.where(known[:, c], weight * values[:, c], 0.0),
                                         len(unique)) for c in range(values.shape[1])], axis=1)
            counts = np.stack([np.bincount(self.corner.ravel(), weight * known[:, c], len(unique))
                               for c in range(values.shape[1])], axis=1)
            with np.errstate(invalid="ignore", divide="ignore"):
                return sums / counts

        self.normal, self.tangential = average(normal), average(tangential)

    def at(self, panel, points, outside) -> tuple[np.ndarray, np.ndarray]:
        """The field vector (m, 3) V/m on the ``outside`` (bool (m,)) or inside of
        ``panel`` (m,) at ``points`` (m, 3) lying on it, and whether it is known (m,)."""
        weights = barycentric(points, self.panels.corners[panel])
        corner = self.corner[panel]
        side = np.where(outside, 0, 1)
        normal = np.einsum("pk,pk->p", weights, self.normal[corner, side[:, None]])
        tangential = np.einsum("pk,pkd->pd", weights, self.tangential[corner])
        n = self.panels.normals[panel]
        tangential -= np.einsum("pd,pd->p", tangential, n)[:, None] * n
        known = self.known[panel, side] & np.isfinite(normal)
        return tangential + normal[:, None] * n, known


def _near_values(points, panel, closest, distance, panels: Panels, evaluate_field, surface: SurfaceValues | None,
                 outside):
    """Field at near points: a quadratic through the surface value and the field at 0.5
    and 1 panel size out (or, without a surface value, through the field at
    :data:`TRUSTED_STEPS`), along the line from the surface through each point. Also a
    mask of points whose off-surface points came close to another surface (narrow gaps)."""
    size = panels.sizes[panel]
    offset = points - closest
    away = np.where((distance > ON_SURFACE * size)[:, None], offset / np.maximum(distance, 1e-300)[:, None],
                    np.where(outside[:, None], 1.0, -1.0) * panels.normals[panel])
    steps = np.array(TRUSTED_STEPS)
    trusted = closest[:, None, :] + (steps[None, :, None] * size[:, None, None]) * away[:, None, :]
    values = evaluate_field(trusted.reshape(-1, 3)).reshape(len(points), len(steps), 3)
    _, _, reach = nearest_surface(trusted.reshape(-1, 3), panels, within=max(steps) + 1.0)
    crowded = np.any(reach.reshape(len(points), len(steps)) < 0.9 * steps[None, :] * size[:, None], axis=1)
    anchor, known = surface.at(panel, closest, outside) if surface is not None else (None, np.zeros(len(points), bool))
    x = distance / size
    nodes = np.where(known[:, None], np.r_[0.0, steps[:2]][None, :], steps[None, :])
    data = np.where(known[:, None, None], np.concatenate([np.nan_to_num(anchor)[:, None, :] if anchor is not None else
                                                          values[:, :1], values[:, :2]], axis=1), values)
    weights = np.stack([np.prod([(x - nodes[:, m]) / (nodes[:, k] - nodes[:, m]) for m in range(3) if m != k], axis=0)
                        for k in range(3)], axis=1)
    return np.einsum("pk,pkd->pd", weights, data), crowded


def closed_skins(problem) -> np.ndarray:
    """(N,) conductor index of the panels that lie on closed pieces of their conductor's
    surface, -1 elsewhere: open sheets and interfaces have no inside."""
    from ..mesh import closed_pieces

    out = np.full(len(problem.panels), -1, np.int64)
    for k in range(problem.n_conductors):
        rows = np.flatnonzero(problem.panel_conductor == k)
        if len(rows):
            piece, closed = closed_pieces(problem.panels.triangles[rows])
            out[rows[closed[piece]]] = k
    return out


def sample_field(points, problem, sigma, potentials, evaluate, surface: SurfaceValues | None = None) -> Samples:
    """Potential and field at ``points`` (M, 3) metres, placed as the module docstring says.

    Parameters
    ----------
    problem : the :class:`~tricharge.bem.problem.Problem` that was solved
    sigma : (N,) C/m^2, its solved total charge density
    potentials : (K,) volts of every conductor (computed ones for floating conductors)
    evaluate : ``evaluate(points) -> (potential (M,), field (M, 3))``, direct evaluation
        of the layer (with the ground plane's images), e.g. from :mod:`.fields`
    surface : the field on the surface (:func:`surface_values`); without it near points
        are extrapolated from off-surface points only
    """
    points = np.asarray(points, dtype=np.float64).reshape(-1, 3)
    panels = problem.panels
    if not len(points):
        empty = np.zeros(0)
        return Samples(empty, np.zeros((0, 3)), np.zeros(0, np.int8), empty, empty, np.zeros(0, np.int64))
    phi, field = evaluate(points)
    where = np.full(len(points), FREE, np.int8)
    conductor = np.full(len(points), -1, np.int64)
    panel, closest, distance = nearest_surface(points, panels)
    size = np.where(panel >= 0, panels.sizes[np.maximum(panel, 0)], np.nan)
    skins = closed_skins(problem)
    winding = winding_numbers(points, panels, skins, problem.n_conductors)
    on_surface = distance <= ON_SURFACE * size
    inside = (winding.max(axis=1) > 0.5) & ~on_surface if problem.n_conductors else np.zeros(len(points), bool)
    conductor[inside] = np.argmax(winding[inside], axis=1)
    near = ~inside & (distance < NEAR_SURFACE * size)
    if near.any():
        j = panel[near]
        facing = np.einsum("pd,pd->p", points[near] - closest[near], panels.normals[j]) >= 0
        outside = facing | (skins[j] >= 0)  # near a closed conductor skin a point is outside it
        values, crowded = _near_values(points[near], j, closest[near], distance[near], panels,
                                       lambda q: evaluate(q)[1], surface, outside)
        field[near] = np.where(crowded[:, None], field[near], values)
        where[np.flatnonzero(near)[crowded]] = NARROW_GAP
        where[np.flatnonzero(near)[~crowded]] = NEAR
    where[inside] = INSIDE
    phi[inside] = np.asarray(potentials, dtype=np.float64)[conductor[inside]]
    field[inside] = 0.0
    if problem.ground_z is not None:
        below = points[:, 2] < problem.ground_z
        where[below], phi[below], field[below], conductor[below] = BELOW_PLANE, 0.0, 0.0, -1
    return Samples(phi, field, where, distance, size, conductor)


def surface_values(problem, surface, groups) -> SurfaceValues:
    """:class:`SurfaceValues` of a solved problem: on closed conductor skins the outside
    field ``sigma / eps0`` along the normal (no field inside); on interfaces and on
    conductor sheets whose faces the problem knows (``permittivity_behind``) both sides;
    unknown on other open sheets (their charge is the sum of both faces').
    ``surface`` is a :class:`~tricharge.bem.fields.SurfaceField`, ``groups`` (N,) the
    part of every panel."""
    normal = np.column_stack([surface.outside, surface.inside]).astype(float)
    conductor = problem.panel_conductor >= 0
    normal[conductor & ~problem.sheet, 1] = np.nan
    normal[conductor & (closed_skins(problem) < 0) & ~problem.sheet] = np.nan  # a sheet of unknown faces
    return SurfaceValues(problem.panels, groups, normal, surface.tangential_vector)
