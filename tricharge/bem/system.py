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


def near_rows(targets, panels: Panels, policy: NearFieldPolicy, kind: str, normals=None):
    """Sparse (M, N) near corrections of the far rule for the given targets: exact minus
    one-point values for pairs within ``policy.corrected_within`` panel sizes; for
    ``kind="field"`` the normal component ``n_i . F``."""
    from scipy import sparse

    i, j, rel = near_pairs(targets, panels, policy.corrected_within)
    values = pair_integrals(targets[i], panels, j, rel, policy, kind, minus_far=True)
    if kind == "field":
        values = np.einsum("pd,pd->p", values, normals[i])
    return sparse.csr_matrix((values, (i, j)), shape=(len(targets), len(panels)))


def gauss_self_terms(panels: Panels, rows: np.ndarray, near, eps: float = 1e-6):
    """Self terms of the normal-field operator on closed interface pieces (matrix-free
    form of :func:`_gauss_diagonal`).

    Parameters
    ----------
    panels : all panels; ``rows`` (R,) the interface panels
    near : sparse (R, N) near corrections of the normal field for those rows
        (:func:`near_rows`, without images)
    eps : multipole precision

    Returns
    -------
    members : indices into ``rows`` of panels on closed pieces; values : their self terms
    """
    from ..mesh import connected_components, edge_use
    from .fmm import _fmm3dpy

    if not len(rows):
        return np.zeros(0, np.int64), np.zeros(0)
    local = panels.triangles[rows]
    pieces = connected_components(local)
    areas = panels.areas[rows]
    found, values = [], []
    for p in range(pieces.max() + 1):
        members = np.flatnonzero(pieces == p)
        _, count, _ = edge_use(local[members])
        if not np.all(count == 2):
            continue
        # flux of every panel j of the piece through it: far part by dipoles A_i n_i at c_i
        dipoles = (panels.normals[rows[members]] * areas[members, None]).T
        sources = panels.centroids[rows[members]]
        if len(members) ** 2 <= 4e6:
            diff = sources[None, :, :] - sources[:, None, :]  # [j, i] = c_i - c_j
            r = np.linalg.norm(diff, axis=2)
            with np.errstate(divide="ignore", invalid="ignore"):
                kernel = np.where(r > 0, np.einsum("jid,di->ji", diff, dipoles) / r**3, 0.0)
            far = areas[members] * kernel.sum(axis=1)
        else:
            out = _fmm3dpy().lfmm3d(eps=eps, sources=np.ascontiguousarray(sources.T),
                                    dipvec=np.ascontiguousarray(dipoles), pg=1)
            far = -areas[members] * 4.0 * np.pi * out.pot  # fmm3dpy: v . (c_j - c_i) / (4 pi r^3)
        sub = near[members][:, rows[members]]
        flux = far + np.asarray(sub.T @ areas[members]).ravel() - areas[members] * sub.diagonal()
        found.append(members)
        values.append((2.0 * np.pi * areas[members] - flux) / areas[members])
    if not found:
        return np.zeros(0, np.int64), np.zeros(0)
    return np.concatenate(found), np.concatenate(values)


#: Integration rules of :class:`FastSystem`: one point per panel beyond 8 panel sizes.
#: The normal-field rows need the wider correction zone: on a sphere in a dielectric
#: shell (4,160 panels) the capacitance differed from the dense path's by 1.9e-4 with
#: 6 sizes and by 2e-5 with 8.
GENERAL_FAST_POLICY = NearFieldPolicy(mid_within=8.0, far_degree=1)


class FastSystem:
    """Matrix-free general system (same rows as :func:`assemble_system`).

    Far interactions: one point charge per panel (and per image panel) through the
    multipole method, potentials at conductor panels and gradients at interface panels.
    Near interactions: sparse corrections to closed-form/Gauss values. The Gauss self
    term of closed interfaces (:func:`_gauss_diagonal`) comes from one multipole pass
    with dipoles. Memory O(N).
    """

    method = "fast"

    def __init__(self, problem: Problem, *, tol: float = 1e-6, policy: NearFieldPolicy | None = None):
        from .fmm import fmm_eps

        self.problem = problem
        self.policy = policy or GENERAL_FAST_POLICY
        if self.policy.far_degree != 1:
            raise ValueError("FastSystem puts one point charge per panel: far_degree must be 1")
        self.eps = fmm_eps(tol)
        panels = problem.panels
        self.panels = panels
        n = len(panels)
        self.rows_c = np.flatnonzero(problem.is_conductor_panel)
        self.rows_i = np.flatnonzero(~problem.is_conductor_panel)
        c = panels.centroids
        normals = panels.normals[self.rows_i]
        self.near_c = near_rows(c[self.rows_c], panels, self.policy, "potential")
        self.near_i = near_rows(c[self.rows_i], panels, self.policy, "field", normals).tolil()
        self._add_gauss_diagonal()
        self.near_i = self.near_i.tocsr()
        if problem.images is not None:
            self.near_c = self.near_c - near_rows(c[self.rows_c], problem.images, self.policy, "potential")
            self.near_i = self.near_i - near_rows(c[self.rows_i], problem.images, self.policy, "field", normals)
        self.n, self.floating = n, problem.floating_index
        size = n + len(self.floating)
        self.shape = (size, size)
        self.dtype = np.dtype(np.float64)

    def _add_gauss_diagonal(self) -> None:
        members, values = gauss_self_terms(self.panels, self.rows_i, self.near_i.tocsr(), self.eps)
        if len(members):
            self.near_i[members, self.rows_i[members]] = values

    def matmat(self, x):
        from .fmm import potentials

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
        if need_grad:
            phi, grad = potentials(points, charges, eps=self.eps, gradient=True)
        else:
            phi, grad = potentials(points, charges, eps=self.eps), None
        out = np.zeros_like(x)
        out[self.rows_c] = phi[self.rows_c] + self.near_c @ s
        if need_grad:
            normal_field = -np.einsum("pkd,pd->pk", grad[self.rows_i], panels.normals[self.rows_i])
            lam = problem.contrast[self.rows_i, None]
            out[self.rows_i] = 2.0 * np.pi * s[self.rows_i] + lam * (normal_field + self.near_i @ s)
        for f, k in enumerate(self.floating):
            members = problem.conductor == k
            out[:n][members] -= x[n + f]
            out[n + f] = (problem.permittivity[members] * panels.areas[members]) @ s[members]
        return out

    def matvec(self, x):
        return self.matmat(np.asarray(x).reshape(-1, 1))[:, 0]
