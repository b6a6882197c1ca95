"""The full boundary-element system: conductors, dielectric interfaces, a ground plane
and floating conductors (stored and matrix-free).

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

import time

import numpy as np
from scipy.sparse.linalg import LinearOperator
from scipy.spatial.distance import cdist

from .nearfield import (DENSE_POLICY, GENERAL_FAST_POLICY, NearFieldPolicy, near_correction_rows, near_pairs,
                        pair_integrals)
from .operators import StoredOperator, assemble_single_layer
from .panels import Panels
from .problem import Problem
from .sums import csr_times

#: The direct far sum is timed on every SAMPLE_EVERY-th target to predict its cost.
SAMPLE_EVERY = 40


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
    areas = panels.areas[rows]
    for members in _closed_members(panels, rows):
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
        members = np.flatnonzero(problem.panel_conductor == k)
        matrix[members, n + f] = -1.0
        matrix[n + f, members] = problem.permittivity[members] * panels.areas[members]
    return matrix

def gauss_self_terms(panels: Panels, rows: np.ndarray, near, precision: float = 1e-6):
    """Self terms of the normal-field operator on closed interface pieces (matrix-free
    form of :func:`_gauss_diagonal`).

    Parameters
    ----------
    panels : all panels; ``rows`` (R,) the interface panels
    near : sparse (R, N) near corrections of the normal field for those rows
        (:func:`~tricharge.bem.nearfield.near_correction_rows`, without images)
    precision : multipole precision

    Returns
    -------
    members : indices into ``rows`` of panels on closed pieces; values : their self terms
    """
    from .fmm import dipole_sums

    if not len(rows):
        return np.zeros(0, np.int64), np.zeros(0)
    areas = panels.areas[rows]
    found, values = [], []
    for members in _closed_members(panels, rows):
        # flux of every panel j of the piece through it: far part by dipoles A_i n_i at c_i
        dipoles = panels.normals[rows[members]] * areas[members, None]
        far = areas[members] * dipole_sums(panels.centroids[rows[members]], dipoles, precision=precision)
        sub = near[members][:, rows[members]]
        flux = far + np.asarray(sub.T @ areas[members]).ravel() - areas[members] * sub.diagonal()
        found.append(members)
        values.append((2.0 * np.pi * areas[members] - flux) / areas[members])
    if not found:
        return np.zeros(0, np.int64), np.zeros(0)
    return np.concatenate(found), np.concatenate(values)

class FastSystem(LinearOperator):
    """Matrix-free general system (same rows as :func:`assemble_system`).

    Far interactions: one point charge per panel (and per image panel) through the
    multipole method, potentials at conductor panels and gradients at interface panels.
    Near interactions: sparse corrections to closed-form/Gauss values. The Gauss self
    term of closed interfaces (:func:`_gauss_diagonal`) comes from one multipole pass
    with dipoles. Memory O(N).
    """

    method = "fast"

    def __init__(self, problem: Problem, *, tol: float = 1e-6, policy: NearFieldPolicy | None = None):
        from .fmm import fmm_precision

        self.problem = problem
        self.policy = policy or GENERAL_FAST_POLICY
        if self.policy.far_degree != 1:
            raise ValueError("FastSystem puts one point charge per panel: far_degree must be 1")
        self.precision = fmm_precision(tol)
        panels = problem.panels
        self.panels = panels
        n = len(panels)
        self.rows_c = np.flatnonzero(problem.is_conductor_panel)
        self.rows_i = np.flatnonzero(~problem.is_conductor_panel)
        c = panels.centroids
        normals = panels.normals[self.rows_i]
        self.near_c = near_correction_rows(c[self.rows_c], panels, self.policy, "potential")
        self.near_i = near_correction_rows(c[self.rows_i], panels, self.policy, "field", normals).tolil()
        self._add_gauss_diagonal()
        self.near_i = self.near_i.tocsr()
        if problem.images is not None:
            self.near_c = self.near_c - near_correction_rows(c[self.rows_c], problem.images, self.policy, "potential")
            self.near_i = self.near_i - near_correction_rows(c[self.rows_i], problem.images, self.policy, "field", normals)
        self.n, self.floating = n, problem.floating_index
        #: how far sums above the crossover are done ("multipole" or "direct"), chosen by
        #: timing both at the first one (None until then); far_seconds: those timings
        self.far_route, self.far_seconds = None, {}
        size = n + len(self.floating)
        super().__init__(dtype=np.float64, shape=(size, size))

    def _add_gauss_diagonal(self) -> None:
        members, values = gauss_self_terms(self.panels, self.rows_i, self.near_i.tocsr(), self.precision)
        if len(members):
            self.near_i[members, self.rows_i[members]] = values

    def _far_sums(self, points, charges, need_grad: bool):
        """The far field of every panel charge (and image): the potential at the conductor
        centroids (Kc, K) and the gradient at the interface centroids (Ki, K, 3), or None.

        Summed directly (exact, each only where it is needed) below the multipole
        library's measured crossover (:func:`~tricharge.bem.fmm.direct_is_cheaper`).
        Above it, at the first sum, the direct sum is timed on a sample of the targets;
        when that predicts less than the library's best case
        (:func:`~tricharge.bem.fmm.multipole_seconds_at_least`) every sum is direct,
        else the first goes through the library (one pass over every source, images
        included, evaluated at the panels) and is timed too, and the cheaper does the rest (``far_route``). The
        library's cost grows with the number of right-hand sides and with the grading of
        the mesh far more than the direct sum's: on the package demo's first refinement
        (31,504 panels, five conductors) one multipole pass took 20 s, the direct sum 5.6 s.
        """
        from .fmm import direct_is_cheaper, multipole_seconds_at_least, multipole_sums

        if self.far_route == "direct" or direct_is_cheaper(len(points), len(self.panels)):
            return self._direct_far(points, charges, need_grad)
        if self.far_route is None:
            self.far_seconds = {"direct": self._time_direct(points, charges, need_grad)}
            if self.far_seconds["direct"] <= multipole_seconds_at_least(self.n, charges.shape[1]):
                self.far_route = "direct"
                return self._direct_far(points, charges, need_grad)
        start = time.perf_counter()
        # evaluated at the panels only, not at their images (half the points: 1.5-2x
        # faster on the package demo's first refinement, the same values)
        targets = None if len(points) == self.n else self.panels.centroids
        phi, grad = multipole_sums(points, charges, targets, self.precision, need_grad)
        if self.far_route is None:
            self.far_seconds["multipole"] = time.perf_counter() - start
            self.far_route = min(self.far_seconds, key=self.far_seconds.get)
        return phi[self.rows_c], (grad[self.rows_i] if need_grad else None)

    def _direct_far(self, points, charges, need_grad: bool, rows_c=None, rows_i=None):
        """The far sums of :meth:`_far_sums` by direct summation, at ``rows_c`` and
        ``rows_i`` (default: every conductor and interface row)."""
        from .fmm import direct_sums

        c = self.panels.centroids
        rows_c = self.rows_c if rows_c is None else rows_c
        rows_i = self.rows_i if rows_i is None else rows_i
        phi_c = direct_sums(points, charges, c[rows_c], False)[0]
        grad_i = direct_sums(points, charges, c[rows_i], True)[1] if need_grad else None
        return phi_c, grad_i

    def _time_direct(self, points, charges, need_grad: bool) -> float:
        """Seconds a direct far sum at every target would take, from one over every
        SAMPLE_EVERY-th target (its cost is proportional to the targets); the faster of
        two runs, so that a first call's loading of the compiled code is not scaled up."""
        seconds = []
        for _ in range(2):
            start = time.perf_counter()
            self._direct_far(points, charges, need_grad, self.rows_c[::SAMPLE_EVERY], self.rows_i[::SAMPLE_EVERY])
            seconds.append(time.perf_counter() - start)
        sampled = len(self.rows_c[::SAMPLE_EVERY]) + len(self.rows_i[::SAMPLE_EVERY])
        return min(seconds) * self.n / max(sampled, 1)

    def _matmat(self, x):

        x = np.asarray(x, dtype=np.float64)
        x = x[:, None] if x.ndim == 1 else x
        n, problem, panels = self.n, self.problem, self.panels
        s = x[:n]
        charges = panels.areas[:, None] * s
        points = panels.centroids
        if problem.images is not None:
            points = np.vstack([points, problem.images.centroids])
            charges = np.vstack([charges, -charges])
        need_grad = len(self.rows_i) > 0
        phi_c, grad_i = self._far_sums(points, charges, need_grad)
        out = np.zeros_like(x)
        out[self.rows_c] = phi_c + csr_times(self.near_c, s)
        if need_grad:
            normal_field = -np.einsum("pkd,pd->pk", grad_i, panels.normals[self.rows_i])
            lam = problem.contrast[self.rows_i, None]
            out[self.rows_i] = 2.0 * np.pi * s[self.rows_i] + lam * (normal_field + csr_times(self.near_i, s))
        for f, k in enumerate(self.floating):
            members = problem.panel_conductor == k
            out[:n][members] -= x[n + f]
            out[n + f] = (problem.permittivity[members] * panels.areas[members]) @ s[members]
        return out

    def _matvec(self, x):
        return self._matmat(np.asarray(x).reshape(-1, 1))[:, 0]


class StoredSystem(StoredOperator):
    """The assembled general system (:func:`assemble_system`), solved by LU."""

    def __init__(self, problem: Problem, policy: NearFieldPolicy | None = None):
        self.problem = problem
        self.matrix = assemble_system(problem, policy)
        super().__init__()


def _closed_members(panels: Panels, rows: np.ndarray):
    """Indices into ``rows`` of the panels of every closed piece those rows form."""
    from ..mesh import closed_pieces

    if not len(rows):
        return
    piece, closed = closed_pieces(panels.triangles[rows])
    for p in np.flatnonzero(closed):
        yield np.flatnonzero(piece == p)
