"""The full boundary-element system: conductors, dielectric interfaces, a ground plane
and floating conductors (stored-matrix form).

Unknowns are scaled total charge densities ``s_j = sigma_j / (4 pi eps0)`` (volts per
metre) on every panel, plus the unknown potential of each floating conductor. Rows:

* conductor panel i of conductor k:  ``sum_j P_ij s_j = V_k`` (``- V_f`` moved to the
  left for a floating conductor f), with ``P_ij = S(c_i, T_j) - S(c_i, T_j*)`` where
  ``T_j*`` is the mirror image of panel j in the ground plane (image method; no term
  without a plane);
* interface panel i between medium a (the side its normal points into) and b: the
  normal-D condition ``(eps_a + eps_b) sigma_i / (2 eps0) + (eps_a - eps_b) E_n = 0``
  (Rao, Sarkar & Harrington, IEEE Trans. MTT 32(8), 1984), divided by ``eps_a + eps_b``:
  ``2 pi s_i + lambda_i sum_j n_i . F_ij s_j = 0`` with
  ``lambda_i = (eps_a - eps_b) / (eps_a + eps_b)`` and ``F_ij`` the principal-value field
  integral of panel j (minus its image's);
* floating conductor f: ``sum_{j in f} eps_j A_j s_j = Q_f / (4 pi eps0)``, its free
  charge (a conductor panel in a medium of permittivity eps_j carries free charge
  ``eps_j`` times its total charge).
"""

from __future__ import annotations

from dataclasses import dataclass, field
from functools import cached_property

import numpy as np
from scipy.spatial.distance import cdist

from .operators import DENSE_POLICY, NearFieldPolicy, assemble_single_layer, near_pairs, pair_integrals
from .panels import Panels, make_panels


@dataclass(frozen=True, eq=False)
class Problem:
    """Numerical description of a model, in SI units.

    panels : all N panels (conductors and interfaces)
    conductor : (N,) int, conductor index of each panel, -1 on interface panels
    permittivity : (N,) relative permittivity of the medium a conductor panel touches
        (ignored on interface panels)
    contrast : (N,) ``(eps_out - eps_in) / (eps_out + eps_in)`` on interface panels, 0 on
        conductor panels; ``eps_out`` is on the side the normal points into
    floating : (K,) bool per conductor
    ground_z : height of the grounded plane (metres) or None
    """

    panels: Panels
    conductor: np.ndarray
    permittivity: np.ndarray
    contrast: np.ndarray
    floating: np.ndarray
    ground_z: float | None = None
    names: tuple[str, ...] = field(default_factory=tuple)

    @property
    def n_conductors(self) -> int:
        return len(self.floating)

    @property
    def is_conductor_panel(self) -> np.ndarray:
        return self.conductor >= 0

    @cached_property
    def floating_index(self) -> np.ndarray:
        """Conductor indices of the floating conductors, in order."""
        return np.flatnonzero(self.floating)

    @property
    def is_simple(self) -> bool:
        """Conductors only, no plane, none floating: the plain single-layer problem."""
        return bool(self.is_conductor_panel.all() and self.ground_z is None and not self.floating.any())

    @cached_property
    def images(self) -> Panels | None:
        """The panels mirrored in the ground plane, or None without one."""
        if self.ground_z is None:
            return None
        mirrored = self.panels.vertices.copy()
        mirrored[:, 2] = 2.0 * self.ground_z - mirrored[:, 2]
        return Panels(mirrored, self.panels.triangles)


def assemble_normal_field(targets: np.ndarray, normals: np.ndarray, panels: Panels,
                          policy: NearFieldPolicy | None = None) -> np.ndarray:
    """Dense (M, N) matrix of ``n_i . integral over panel j of (x_i - y)/|x_i - y|^3 dA``
    (dimensionless); the principal value where the target lies on the panel."""
    policy = policy or DENSE_POLICY
    targets = np.asarray(targets, dtype=np.float64)
    out = np.zeros((len(targets), len(panels)))
    qp, qw = panels.quadrature(policy.far_degree)
    for s in range(0, len(panels), 512):
        cols = slice(s, s + 512)
        for q in range(qw.shape[1]):
            r = cdist(targets, qp[cols, q])
            # n_i . (x_i - y) = n_i . x_i - n_i . y
            along = np.einsum("md,md->m", normals, targets)[:, None] - normals @ qp[cols, q].T
            with np.errstate(divide="ignore", invalid="ignore"):
                out[:, cols] += np.where(r > 0, qw[cols, q] * along / r**3, 0.0)
    i, j, rel = near_pairs(targets, panels, policy.corrected_within)
    out[i, j] = np.einsum("pd,pd->p", pair_integrals(targets[i], panels, j, rel, policy, kind="field"), normals[i])
    return out


def _gauss_diagonal(block: np.ndarray, rows: np.ndarray, panels: Panels) -> None:
    """Self terms from Gauss's law on every closed piece of interface.

    A flat panel's own principal-value normal field is zero, which misses the curvature
    of the surface it approximates (an O(h) error). On a closed surface S the flux of a
    panel j lying on S through S is exactly 2 pi A_j (half of 4 pi A_j): choose the
    diagonal entry so the discrete flux obeys that, column by column.
    """
    from ..mesh import edge_use, connected_components

    local = panels.triangles[rows]
    pieces = connected_components(local)
    areas = panels.areas[rows]
    for p in range(pieces.max() + 1):
        members = np.flatnonzero(pieces == p)
        _, count, _ = edge_use(local[members])
        if not np.all(count == 2):
            continue  # open piece: no flux identity
        sub = block[np.ix_(members, rows[members])]
        flux = areas[members] @ sub - areas[members] * np.diag(sub)
        block[members, rows[members]] = (2.0 * np.pi * areas[members] - flux) / areas[members]


def assemble_system(problem: Problem, policy: NearFieldPolicy | None = None) -> np.ndarray:
    """The full dense system matrix, (N + F, N + F), F floating conductors."""
    panels = problem.panels
    n, floating = len(panels), problem.floating_index
    size = n + len(floating)
    matrix = np.zeros((size, size), order="F")
    rows_c = np.flatnonzero(problem.is_conductor_panel)
    rows_i = np.flatnonzero(~problem.is_conductor_panel)
    centroids = panels.centroids
    if len(rows_c):
        block = assemble_single_layer(centroids[rows_c], panels, policy)
        if problem.images is not None:
            block -= assemble_single_layer(centroids[rows_c], problem.images, policy)
        matrix[rows_c, :n] = block
    if len(rows_i):
        normals = panels.normals[rows_i]
        block = assemble_normal_field(centroids[rows_i], normals, panels, policy)
        _gauss_diagonal(block, rows_i, panels)
        if problem.images is not None:
            block -= assemble_normal_field(centroids[rows_i], normals, problem.images, policy)
        block *= problem.contrast[rows_i, None]
        block[np.arange(len(rows_i)), rows_i] += 2.0 * np.pi
        matrix[rows_i, :n] = block
    for f, k in enumerate(floating):
        members = np.flatnonzero(problem.conductor == k)
        matrix[members, n + f] = -1.0
        matrix[n + f, members] = problem.permittivity[members] * panels.areas[members]
    return matrix


def problem_from_arrays(vertices, triangles, conductor, permittivity=None, contrast=None, floating=None,
                        ground_z=None, names=()) -> Problem:
    """Convenience constructor (tests, notebooks): arrays in metres."""
    panels = make_panels(vertices, triangles)
    conductor = np.asarray(conductor, dtype=np.int64)
    n = len(panels)
    k = int(conductor.max()) + 1 if (conductor >= 0).any() else 0
    return Problem(panels, conductor,
                   np.ones(n) if permittivity is None else np.asarray(permittivity, float),
                   np.zeros(n) if contrast is None else np.asarray(contrast, float),
                   np.zeros(k, bool) if floating is None else np.asarray(floating, bool),
                   ground_z, tuple(names) or tuple(f"c{i + 1}" for i in range(k)))
