"""Potential and electric field of the solved surface charge, surface fields, hot spots
and Gauss's-law checks.

The charge layer is piecewise constant: ``sigma`` (N,) C/m^2 on N flat panels, the
*total* (free plus bound) density on conductors and dielectric interfaces alike, so the
vacuum kernel gives the potential and field everywhere; a ground plane enters through
its image panels. Media matter only for the free charge on conductors.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .fmm import potentials
from .nearfield import (GENERAL_FAST_POLICY, NearFieldPolicy, far_rule_pairs, near_correction_rows, near_pairs,
                        pair_integrals)
from .panels import Panels
from .results import EPS0, FOUR_PI_EPS0
from .system import gauss_self_terms

#: Multipole precision for field evaluation (well below the 1 % checks made on fields).
FIELD_FMM_PRECISION = 1e-7


def _evaluate(points, panels, sigma, policy, kinds):
    """Far rule for every pair (one direct or multipole sum for all ``kinds``), then
    exact-minus-far corrections for near pairs. Returns one array per kind ("potential":
    (M,), "field": (M, 3)), geometric units."""
    points = np.atleast_2d(np.asarray(points, dtype=np.float64))
    sigma = np.asarray(sigma, dtype=np.float64)
    policy = policy or NearFieldPolicy()
    qp, qw = panels.quadrature(policy.far_degree)
    phi, grad = potentials(qp.reshape(-1, 3), (sigma[:, None] * qw).ravel(), points, precision=FIELD_FMM_PRECISION,
                           gradient=True)
    totals = {"potential": phi, "field": -grad}
    i, j, rel = near_pairs(points, panels, policy.corrected_within)
    for kind in kinds if len(i) else ():
        far = far_rule_pairs(points[i], panels, j, policy, kind)
        exact = pair_integrals(points[i], panels, j, rel, policy, kind)
        weight = sigma[j] if kind == "potential" else sigma[j, None]
        np.add.at(totals[kind], i, weight * (exact - far))
    return tuple(totals[kind] for kind in kinds)


def _with_images(points, panels, sigma, policy, kinds, images):
    totals = _evaluate(points, panels, sigma, policy, kinds)
    if images is not None:  # the plane's images carry the opposite charge
        totals = tuple(a - b for a, b in zip(totals, _evaluate(points, images, sigma, policy, kinds)))
    return tuple(t / FOUR_PI_EPS0 for t in totals)


def potential_and_field(points, panels: Panels, sigma, *, policy: NearFieldPolicy | None = None,
                        images: Panels | None = None) -> tuple[np.ndarray, np.ndarray]:
    """:func:`potential_at` and :func:`field_at` together, in one pass: (M,) V, (M, 3) V/m."""
    return _with_images(points, panels, sigma, policy, ("potential", "field"), images)


def potential_at(points, panels: Panels, sigma, *, policy: NearFieldPolicy | None = None,
                 images: Panels | None = None) -> np.ndarray:
    """Potential (M,) volts at ``points`` (M, 3) metres of the charge density ``sigma`` (N,) C/m^2.

    Accurate close to and on the surface: pairs within a few panel sizes use the
    closed-form triangle integral. On a conductor panel's centroid it reproduces the
    collocation potential. ``images``: the panels mirrored in a ground plane, whose
    charge is the negative of ``sigma``.
    """
    return _with_images(points, panels, sigma, policy, ("potential",), images)[0]


def field_at(points, panels: Panels, sigma, *, policy: NearFieldPolicy | None = None,
             images: Panels | None = None) -> np.ndarray:
    """Electric field (M, 3) V/m at ``points`` (M, 3) metres of the density ``sigma`` (N,) C/m^2.

    Points must not lie on an edge of a panel (the field of a uniform panel is
    logarithmically singular there). On a panel's face the normal part is the
    principal value, the mean of the two sides. ``images`` as in :func:`potential_at`.
    """
    return _with_images(points, panels, sigma, policy, ("field",), images)[0]


def free_charge_density(problem, sigma) -> np.ndarray:
    """Free charge density (C/m^2) on the conductor panels of a solved problem; 0 elsewhere.

    ``sigma`` (N,) or (N, K) is the total density. A closed conductor skin touching a
    medium of relative permittivity eps carries ``eps sigma``. A sheet carries the total
    of both faces: with ``eps_a`` in front (where its normal points) and ``eps_b`` behind,
    the normal fields on the faces are ``E_pv +- sigma / (2 eps0)`` and the free charge is
    ``eps0 (eps_a E+ - eps_b E-) = (eps_a + eps_b) / 2 sigma + eps0 (eps_a - eps_b) E_pv``,
    ``E_pv`` the principal-value normal field of all panels at the sheet (derivation in
    docs/design.md; for one medium it is ``eps sigma``).
    """
    s = np.asarray(sigma, dtype=np.float64)
    columns = s.reshape(len(problem.panels), -1)
    out = np.where(problem.is_conductor_panel, problem.permittivity, 0.0)[:, None] * columns
    rows = np.flatnonzero(problem.two_media)
    if len(rows):
        front, behind = problem.permittivity[rows], problem.permittivity_behind[rows]
        for k in range(columns.shape[1]):
            normal = normal_field_at_panels(problem, columns[:, k], rows)
            out[rows, k] = 0.5 * (front + behind) * columns[rows, k] + EPS0 * (front - behind) * normal
    return out.reshape(s.shape)


def normal_field_at_panels(problem, sigma, rows) -> np.ndarray:
    """Principal-value normal field (V/m) at the centroids of panels ``rows`` (images included)."""
    panels = problem.panels
    e = field_at(panels.centroids[rows], panels, sigma, images=problem.images)
    return np.einsum("md,md->m", e, panels.normals[rows])


@dataclass(frozen=True, repr=False)
class SurfaceField:
    """The field on every panel, V/m. On conductor panels the field is normal:
    ``outside = sigma / eps0`` (outward normal), ``inside = 0``, ``tangential = 0``. On
    interface panels ``outside`` and ``inside`` are the normal components on the side the
    normal points into and behind it, and ``tangential`` the magnitude of the tangential
    field (continuous across; insulator surfaces flash over along it).

    outside, inside, tangential, magnitude : (N,) V/m; magnitude is the larger |E| of the
    two sides
    free_charge_density : (N,) C/m^2 on conductor panels (0 on interfaces)
    tangential_vector : (N, 3) V/m, the tangential field itself (zero on conductors)
    """

    outside: np.ndarray
    inside: np.ndarray
    tangential: np.ndarray
    magnitude: np.ndarray
    free_charge_density: np.ndarray
    tangential_vector: np.ndarray

    def __repr__(self) -> str:
        return f"SurfaceField({len(self.magnitude)} panels, max |E| {self.magnitude.max():.4g} V/m)"


def surface_field(problem, sigma, *, policy: NearFieldPolicy | None = None) -> SurfaceField:
    """Surface fields of a solved charge layer ``sigma`` (N,) C/m^2 on a
    :class:`~tricharge.bem.system.Problem`."""
    panels = problem.panels
    sigma = np.asarray(sigma, dtype=np.float64)
    n = len(panels)
    outside, inside, tangential = np.zeros(n), np.zeros(n), np.zeros((n, 3))
    on = problem.is_conductor_panel
    outside[on] = sigma[on] / EPS0
    sheets = np.flatnonzero(problem.sheet)
    if len(sheets):  # both faces: the principal-value field plus or minus half the jump
        normal = normal_field_at_panels(problem, sigma, sheets)
        outside[sheets] = normal + sigma[sheets] / (2.0 * EPS0)
        inside[sheets] = normal - sigma[sheets] / (2.0 * EPS0)
    rows = np.flatnonzero(~on)
    if len(rows):
        e = field_at(panels.centroids[rows], panels, sigma, policy=policy, images=problem.images)
        normals = panels.normals[rows]
        normal = np.einsum("md,md->m", e, normals)
        # the curvature a flat panel misses: the same Gauss self term the solve used
        near = near_correction_rows(panels.centroids[rows], panels, GENERAL_FAST_POLICY, "field", normals)
        members, self_terms = gauss_self_terms(panels, rows, near, FIELD_FMM_PRECISION)
        normal[members] += self_terms * sigma[rows[members]] / FOUR_PI_EPS0
        outside[rows] = normal + sigma[rows] / (2.0 * EPS0)
        inside[rows] = normal - sigma[rows] / (2.0 * EPS0)
        tangential[rows] = e - normal[:, None] * normals
    size = np.linalg.norm(tangential, axis=1)
    magnitude = np.hypot(np.maximum(np.abs(outside), np.abs(inside)), size)
    return SurfaceField(outside, inside, size, magnitude, free_charge_density(problem, sigma), tangential)


@dataclass(frozen=True)
class GaussCheck:
    """Gauss's law on a sphere: ``eps0 * flux`` against the free charge it encloses.

    flux_charge : eps0 times the flux of E through the sphere, coulombs
    enclosed_charge : sum of the charges of the panels inside the sphere, coulombs
    relative_error : (flux_charge - enclosed_charge) / |enclosed_charge| (or over the
        total absolute charge when the sphere encloses none)
    """

    center: tuple[float, float, float]
    radius: float
    flux_charge: float
    enclosed_charge: float
    relative_error: float


def sphere_quadrature(center, radius: float, n_theta: int = 48):
    """Points (M, 3), outward unit normals (M, 3) and weights (M,) m^2 on a sphere.

    Gauss-Legendre in cos(theta) times the trapezoid rule in phi (2 n_theta points),
    exact for spherical harmonics up to degree 2 n_theta - 1.
    """
    x, w = np.polynomial.legendre.leggauss(n_theta)
    phi = np.arange(2 * n_theta) * (np.pi / n_theta)
    ct, ph = np.meshgrid(x, phi, indexing="ij")
    st = np.sqrt(1.0 - ct**2)
    normals = np.stack([st * np.cos(ph), st * np.sin(ph), ct], axis=-1).reshape(-1, 3)
    weights = (w[:, None] * np.full(len(phi), np.pi / n_theta)[None, :]).reshape(-1) * radius**2
    return np.asarray(center, float) + radius * normals, normals, weights


def gauss_check(panels: Panels, sigma, center, radius: float, *, eps_r: float = 1.0,
                n_theta: int = 48, policy: NearFieldPolicy | None = None) -> GaussCheck:
    """Compare the flux of the field through a sphere with the charge inside it.

    Parameters
    ----------
    panels, sigma : the solved charge layer; ``sigma`` (N,) C/m^2 total density
    center : (3,) metres; radius : metres. The sphere must not cut any panel.
    eps_r : relative permittivity of the homogeneous medium (free charge = eps_r * total)

    Raises
    ------
    ValueError if the sphere cuts a panel.
    """
    center = np.asarray(center, float)
    dist = np.linalg.norm(panels.corners - center, axis=2)
    inside = (dist < radius).all(axis=1)
    outside = (dist > radius).all(axis=1)
    if not np.all(inside | outside):
        raise ValueError(f"the Gauss sphere (radius {radius:g} m) cuts {int((~inside & ~outside).sum())} panels")
    points, normals, weights = sphere_quadrature(center, radius, n_theta)
    e = field_at(points, panels, sigma, policy=policy)
    flux_charge = EPS0 * eps_r * float(np.einsum("md,md,m->", e, normals, weights))
    charges = eps_r * np.asarray(sigma) * panels.areas
    enclosed = float(np.sum(charges[inside]))
    scale = abs(enclosed) if enclosed != 0 else float(np.sum(np.abs(charges)))  # empty sphere: relative to all charge
    return GaussCheck(tuple(map(float, center)), float(radius), flux_charge, enclosed, (flux_charge - enclosed) / scale)


#: Panels with an edge whose dihedral angle exceeds this (degrees) sit on a sharp feature
#: (engineering judgement, common practice, no source).
SHARP_ANGLE = 30.0


def edge_sharpness(panels: Panels, sheet=None) -> np.ndarray:
    """(N,) largest angle (degrees) between a panel's normal and its neighbours' across
    its edges; 180 on a free edge of an open sheet (a knife edge), and, given ``sheet``
    ((N,) bool, the conductor sheet panels), on a sheet's rim where it meets the
    interface it lies in (the neighbours there are coplanar, but the conductor ends)."""
    from ..mesh import edge_ids, neighbour_pairs

    t = panels.triangles
    edges, side = edge_ids(t)
    sharp = np.zeros(len(t))
    sharp[(np.bincount(side.ravel())[side] == 1).any(axis=1)] = 180.0  # a free edge
    if sheet is not None and np.any(sheet):
        sheet = np.asarray(sheet, dtype=bool)
        on_sheets = np.bincount(side[sheet].ravel(), minlength=len(edges))
        rim = np.zeros(len(t), dtype=bool)
        rim[sheet] = (on_sheets[side[sheet]] == 1).any(axis=1)
        sharp[rim] = 180.0
    a, b = neighbour_pairs(t)
    cosine = np.clip(np.einsum("pd,pd->p", panels.normals[a], panels.normals[b]), -1.0, 1.0)
    angle = np.degrees(np.arccos(cosine))
    np.maximum.at(sharp, a, angle)
    np.maximum.at(sharp, b, angle)
    return sharp


@dataclass(frozen=True)
class HotSpot:
    """A local field maximum on one part.

    group : part index (as given to :func:`hot_spots`); rank : 1 = highest on the part
    panel : panel index; location : (3,) metres (the panel centroid)
    field : |E| V/m; panel_size : metres
    sharp_angle : degrees (see :func:`edge_sharpness`); sharp : above SHARP_ANGLE
    """

    group: int
    rank: int
    panel: int
    location: tuple[float, float, float]
    field: float
    panel_size: float
    sharp_angle: float
    sharp: bool


def hot_spots(panels: Panels, magnitude, groups, *, top: int = 5, separation: float = 3.0,
              sheet=None) -> list[HotSpot]:
    """The ``top`` highest field values on each group of panels, at least
    ``separation`` panel sizes apart so one peak is not listed many times.

    Parameters
    ----------
    panels : the panels; magnitude : (N,) |E| V/m; groups : (N,) part index, -1 to skip
    sheet : (N,) bool, the conductor sheet panels (their rims are knife edges), or None
    """
    magnitude = np.asarray(magnitude, dtype=np.float64)
    groups = np.asarray(groups)
    sharpness = edge_sharpness(panels, sheet)
    spots = []
    for g in np.unique(groups[groups >= 0]):
        chosen = []
        for j in np.flatnonzero(groups == g)[np.argsort(-magnitude[groups == g], kind="stable")]:
            c = panels.centroids[j]
            if all(np.linalg.norm(c - panels.centroids[k]) > separation * panels.sizes[j] for k in chosen):
                chosen.append(j)
                spots.append(HotSpot(int(g), len(chosen), int(j), tuple(map(float, c)), float(magnitude[j]),
                                     float(panels.sizes[j]), float(sharpness[j]), bool(sharpness[j] > SHARP_ANGLE)))
            if len(chosen) == top:
                break
    return spots
