"""Potential and electric field of the solved surface charge, and Gauss's-law checks.

The charge layer is piecewise constant: ``sigma`` (N,) C/m^2 on N flat panels in a
homogeneous medium of relative permittivity ``eps_r``. ``sigma`` here is the *total*
(free plus bound) density, so the medium only enters through the free charge.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .capacitance import EPS0, FOUR_PI_EPS0
from .fmm import potentials
from .operators import NearFieldPolicy, far_rule_pairs, near_pairs, pair_integrals
from .panels import Panels

#: Multipole precision for field evaluation (well below the 1 % checks made on fields).
FIELD_FMM_EPS = 1e-7


def _far_sum(points: np.ndarray, sources: np.ndarray, charges: np.ndarray, kind: str) -> np.ndarray:
    """Potential (M,) or field (M, 3) of point charges, geometric units; coincident points
    skipped. Direct sums for small problems, the multipole method for large ones."""
    if kind == "potential":
        return potentials(sources, charges, points, eps=FIELD_FMM_EPS)
    return -potentials(sources, charges, points, eps=FIELD_FMM_EPS, gradient=True)[1]


def _evaluate(points, panels, sigma, policy, kind):
    """Far rule for every pair, then exact-minus-far corrections for near pairs."""
    points = np.atleast_2d(np.asarray(points, dtype=np.float64))
    sigma = np.asarray(sigma, dtype=np.float64)
    policy = policy or NearFieldPolicy()
    qp, qw = panels.quadrature(policy.far_degree)
    total = _far_sum(points, qp.reshape(-1, 3), (sigma[:, None] * qw).ravel(), kind)
    i, j, rel = near_pairs(points, panels, policy.corrected_within)
    if len(i):
        far = far_rule_pairs(points[i], panels, j, policy, kind)
        exact = pair_integrals(points[i], panels, j, rel, policy, kind)
        weight = sigma[j] if kind == "potential" else sigma[j, None]
        np.add.at(total, i, weight * (exact - far))
    return total


def potential_at(points, panels: Panels, sigma, *, policy: NearFieldPolicy | None = None) -> np.ndarray:
    """Potential (M,) volts at ``points`` (M, 3) metres of the charge density ``sigma`` (N,) C/m^2.

    Accurate close to and on the surface: pairs within a few panel sizes use the
    closed-form triangle integral. On a conductor panel's centroid it reproduces the
    collocation potential.
    """
    return _evaluate(points, panels, sigma, policy, "potential") / FOUR_PI_EPS0


def field_at(points, panels: Panels, sigma, *, policy: NearFieldPolicy | None = None) -> np.ndarray:
    """Electric field (M, 3) V/m at ``points`` (M, 3) metres of the density ``sigma`` (N,) C/m^2.

    Points must not lie on an edge of a panel (the field of a uniform panel is
    logarithmically singular there). On a panel's face the normal part is the
    principal value, the mean of the two sides.
    """
    return _evaluate(points, panels, sigma, policy, "field") / FOUR_PI_EPS0


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
