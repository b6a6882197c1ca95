"""How every capacitance changes when a part of a conductor moves, from one solve.

At fixed potentials the electrostatic energy ``W = V^T C V / 2`` grows by the work of the
pressure ``sigma_f^2 / (2 eps)`` on the conductors' surfaces (Jackson, Classical
Electrodynamics, 3rd ed., 1999, section 1.11; from memory), so an outward normal
displacement ``dn`` of conductor surfaces changes the Maxwell matrix by

    dC_ij = integral of sigma_i sigma_j / eps dn dA,

``sigma_i`` the free charge density for 1 V on conductor i (others at 0 V) and ``eps`` the
permittivity of the medium at the surface. A rigid move ``d`` of a part has ``dn = d . n``
on its surface; a uniform outward growth has ``dn = 1``. A sheet has a face on each side:
each face contributes with its own free charge and medium, the back face with ``-n``.
Checked against central differences of full solves and against the exact derivatives of
the two-sphere and sphere-over-plane series (tests/reference/test_sensitivity.py).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .fields import normal_field_at_panels, free_charge_density
from .results import EPS0


@dataclass(frozen=True, repr=False)
class Sensitivity:
    """Derivatives of a Maxwell matrix (K, K) with respect to moving parts, F/m.

    parts : names of the parts; translation : (P, 3, K, K), moving part p by a unit
    length along x, y, z; growth : (P, K, K), growing part p's surface outward by a unit
    length everywhere
    """

    parts: tuple[str, ...]
    translation: np.ndarray
    growth: np.ndarray

    def __repr__(self) -> str:
        return f"Sensitivity({len(self.parts)} parts, {self.translation.shape[-1]} conductors)"

    def reduced(self, names, *, nets=None, grounded=(), reference=None) -> "Sensitivity":
        """The derivatives after the same reductions as
        :meth:`~tricharge.bem.results.Result.reduced` (merging and grounding are linear
        in the matrix, so they apply to its derivatives unchanged)."""
        from .results import ground_conductors, merge_conductors

        grounded = list(grounded) + ([reference] if reference not in (None, "infinity", "ground plane") else [])

        def one(matrix):
            out, current = matrix, tuple(names)
            if nets:
                out, current = merge_conductors(out, current, nets)
            if grounded:
                out, current = ground_conductors(out, current, grounded)
            return out

        flat = [one(m) for m in self.translation.reshape(-1, *self.translation.shape[-2:])]
        k = flat[0].shape[0]
        return Sensitivity(self.parts, np.array(flat).reshape(len(self.parts), 3, k, k),
                           np.array([one(m) for m in self.growth]))

    def to_dict(self) -> dict:
        """Plain data for the JSON: both forms of every derivative, F/m."""
        from .results import mutual_form

        t = self.translation
        return {"parts": list(self.parts), "unit": "F/m", "directions": ["x", "y", "z"],
                "translation_maxwell": t.tolist(),
                "translation_mutual": [[mutual_form(m).tolist() for m in part] for part in t],
                "growth_maxwell": self.growth.tolist(),
                "growth_mutual": [mutual_form(m).tolist() for m in self.growth]}


def _faces(problem, sigma: np.ndarray) -> list[tuple[np.ndarray, np.ndarray, float]]:
    """[(free charge density (N, K) on a face, relative permittivity (N,) there, sign of
    the face's outward normal relative to the panel's)]: the front faces of all conductor
    panels, then the back faces of sheets."""
    front = free_charge_density(problem, sigma)
    eps = np.where(problem.is_conductor_panel, problem.permittivity, 1.0)
    faces = [(front, eps, 1.0)]
    rows = np.flatnonzero(problem.sheet)
    if len(rows):  # split a sheet's charge between its faces: eps0 eps E on each
        behind = problem.permittivity_behind[rows]
        fronts, backs = np.zeros_like(front), np.zeros_like(front)
        for k in range(sigma.shape[1]):
            normal = normal_field_at_panels(problem, sigma[:, k], rows)
            fronts[rows, k] = EPS0 * problem.permittivity[rows] * (normal + sigma[rows, k] / (2 * EPS0))
            backs[rows, k] = -EPS0 * behind * (normal - sigma[rows, k] / (2 * EPS0))
        faces[0][0][rows] = fronts[rows]
        back_eps = np.ones(len(problem.panels))
        back_eps[rows] = behind
        faces.append((backs, back_eps, -1.0))
    return faces


def sensitivities(problem, sigma, panel_conductor, part_of_panel, part_names) -> Sensitivity:
    """Derivatives of the Maxwell matrix among the driven conductors with respect to
    moving each part.

    Parameters
    ----------
    problem : the solved :class:`~tricharge.bem.problem.Problem`
    sigma : (N, K) C/m^2, total charge density for 1 V on each driven conductor
    panel_conductor : (N,) index into the K driven conductors, -1 elsewhere (the
        result's); only conductor panels (driven or floating) carry pressure
    part_of_panel : (N,) part index of every panel (-1: not part of any named part)
    part_names : names of the parts
    """
    sigma = np.asarray(sigma, dtype=np.float64)
    panels = problem.panels
    k = sigma.shape[1]
    translation = np.zeros((len(part_names), 3, k, k))
    growth = np.zeros((len(part_names), k, k))
    on_conductor = problem.is_conductor_panel
    for charge, eps, side in _faces(problem, sigma):
        weight = np.where(on_conductor, panels.areas / (EPS0 * eps), 0.0)
        for p in range(len(part_names)):
            rows = np.flatnonzero((part_of_panel == p) & on_conductor)
            if not len(rows):
                continue
            q = charge[rows]
            pair = q[:, :, None] * q[:, None, :] * weight[rows, None, None]  # (rows, K, K)
            translation[p] += side * np.einsum("rd,rij->dij", panels.normals[rows], pair)
            growth[p] += pair.sum(axis=0)
    return Sensitivity(tuple(part_names), translation, growth)
