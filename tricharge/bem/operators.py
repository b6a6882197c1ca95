"""Single-layer operators: the map from panel charge density to potential at targets.

Operators here are geometric: entry ``(i, j)`` is ``integral over panel j of
1/|x_i - y| dA_y`` in metres. The physical potential is that times
``sigma_j / (4 pi eps0)``. Scaling by ``4 pi eps0`` happens once, in
:mod:`tricharge.bem.capacitance`, which keeps the linear algebra well scaled.

Every operator is a :class:`scipy.sparse.linalg.LinearOperator`, so solvers and
preconditioners never need to know whether the matrix is stored (dense) or applied
by a fast method.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy.spatial.distance import cdist
from scipy.sparse.linalg import LinearOperator

from ..errors import OptionError
from ..mesh import PairFinder, pairs_within
from .integrals import point_rule_field, point_rule_potential, triangle_field
from .panels import QUADRATURE_RULES, Panels

#: Columns assembled per block in the dense fill (bounds the temporary to ~8 MB per 1k rows).
_COLUMN_BLOCK = 1024


@dataclass(frozen=True)
class NearFieldPolicy:
    """Which integration rule each target/panel pair gets.

    Distances are from the target to the panel's centroid, in units of that panel's
    size (longest edge). Closer than ``closed_form_within``: exact closed form; closer
    than ``near_within``: the Dunavant rule of degree ``near_degree``; closer than
    ``mid_within``: degree ``mid_degree``; farther: the rule of degree ``far_degree``,
    whose points act as point charges (what a fast multipole method evaluates).

    ``DENSE_POLICY`` keeps every matrix entry within about 5e-5 of the exact integral
    and capacitances within about 1e-6 of the all-exact matrix; ``FAST_POLICY`` puts one
    point per panel in the multipole part and corrects pairs within 6 panel sizes, which
    keeps capacitances within about 1e-4 (both checked in tests/test_operators.py).
    """

    closed_form_within: float = 2.0
    near_within: float = 4.0
    near_degree: int = 5
    mid_within: float = 4.0
    mid_degree: int = 2
    far_degree: int = 2

    def __post_init__(self):
        if not 0 < self.closed_form_within <= self.near_within <= self.mid_within:
            raise ValueError(f"NearFieldPolicy needs 0 < closed_form_within <= near_within <= mid_within, got {self}")
        degrees = (self.near_degree, self.mid_degree, self.far_degree)
        if any(d not in QUADRATURE_RULES for d in degrees):
            raise ValueError(f"NearFieldPolicy degrees must be among {sorted(QUADRATURE_RULES)}, got {self}")

    @property
    def corrected_within(self) -> float:
        """Pairs closer than this (panel sizes) get something other than the far rule."""
        return self.mid_within


DENSE_POLICY = NearFieldPolicy()
FAST_POLICY = NearFieldPolicy(mid_within=6.0, far_degree=1)


def near_pairs(targets: np.ndarray, panels: Panels, within: float) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """All target/panel pairs closer than ``within`` panel sizes.

    Parameters
    ----------
    targets : (M, 3) metres
    panels : the N source panels
    within : distance limit in units of each panel's size

    Returns
    -------
    i : (p,) int64 target indices
    j : (p,) int64 panel indices
    rel : (p,) float64 distance target-to-centroid divided by the panel's size
    """
    i, j, distance = pairs_within(targets, panels.centroids, within * panels.sizes)
    rel = distance / panels.sizes[j]
    return i, j, rel


def _kernel_arrays(panels: Panels, policy: NearFieldPolicy):
    near_pts, near_w = panels.quadrature(policy.near_degree)
    mid_pts, mid_w = panels.quadrature(policy.mid_degree)
    far_pts, far_w = panels.quadrature(policy.far_degree)
    return (panels.corners, panels.sizes, near_pts, near_w, mid_pts, mid_w, far_pts, far_w,
            float(policy.closed_form_within), float(policy.near_within))


def pair_integrals(points: np.ndarray, panels: Panels, j: np.ndarray, rel: np.ndarray,
                   policy: NearFieldPolicy, kind: str = "potential", *, minus_far: bool = False) -> np.ndarray:
    """Integrals for explicit point/panel pairs closer than ``policy.corrected_within``.

    Parameters
    ----------
    points : (p, 3) metres
    panels : source panels; ``j`` (p,) indexes them
    rel : (p,) distance in panel sizes (from :func:`near_pairs`)
    kind : "potential" (returns (p,) metres) or "field" (returns (p, 3), dimensionless)
    minus_far : subtract the far-rule value (potential only): the near correction
    """
    points = np.ascontiguousarray(points, dtype=np.float64)
    if kind == "potential":
        from .kernels import near_values

        index = np.arange(len(points), dtype=np.int64)
        return near_values(points, index, np.asarray(j, np.int64), np.asarray(rel, np.float64),
                           *_kernel_arrays(panels, policy), minus_far)
    out = np.empty((len(points), 3))
    closed = rel < policy.closed_form_within
    out[closed] = triangle_field(points[closed], panels.corners[j[closed]])
    near = ~closed & (rel < policy.near_within)
    mid = ~closed & ~near
    for mask, degree in ((near, policy.near_degree), (mid, policy.mid_degree)):
        qp, qw = panels.quadrature(degree)
        out[mask] = point_rule_field(points[mask], qp[j[mask]], qw[j[mask]])
    if minus_far:
        out -= far_rule_pairs(points, panels, j, policy, kind)
    return out


def far_rule_pairs(points: np.ndarray, panels: Panels, j: np.ndarray, policy: NearFieldPolicy,
                   kind: str = "potential") -> np.ndarray:
    """What the far rule gives for explicit pairs; near corrections subtract this.

    A rule point within 1e-9 panel sizes of the evaluation point contributes nothing,
    as in a multipole sum, which skips a source sitting on its target.
    """
    qp, qw = panels.quadrature(policy.far_degree)
    rule = point_rule_potential if kind == "potential" else point_rule_field
    gap = np.linalg.norm(qp[j] - points[:, None, :], axis=2)
    weights = np.where(gap > 1e-9 * panels.sizes[j][:, None], qw[j], 0.0)
    with np.errstate(divide="ignore", invalid="ignore"):
        values = rule(points, qp[j], weights)
    return np.where(np.isfinite(values), values, 0.0)


def assemble_single_layer(targets: np.ndarray, panels: Panels, policy: NearFieldPolicy | None = None) -> np.ndarray:
    """Dense single-layer matrix, (M, N) float64 in Fortran order, metres.

    Every pair first gets the far rule (distances by ``cdist``, in column blocks);
    pairs closer than ``policy.corrected_within`` panel sizes are then overwritten.
    """
    policy = policy or NearFieldPolicy()
    targets = np.asarray(targets, dtype=np.float64)
    matrix = np.zeros((len(targets), len(panels)), order="F")
    qp, qw = panels.quadrature(policy.far_degree)
    with np.errstate(divide="ignore"):
        for s in range(0, len(panels), _COLUMN_BLOCK):
            cols = slice(s, s + _COLUMN_BLOCK)
            block = matrix[:, cols].T  # C-ordered view (panels, targets) of the Fortran matrix
            for q in range(qw.shape[1]):
                r = cdist(qp[cols, q], targets)
                np.divide(qw[cols, q, None], r, out=r)
                block += r
    i, j, rel = near_pairs(targets, panels, policy.corrected_within)
    matrix[i, j] = pair_integrals(targets[i], panels, j, rel, policy)
    return matrix


class DenseSingleLayer(LinearOperator):
    """Stored single-layer matrix for collocation at the panel centroids.

    Memory is ``8 N^2`` bytes (800 MB at 10k panels), so this is the choice for up to
    roughly 10-15k panels. Solve with :func:`tricharge.bem.solvers.solve_linear`,
    which factorises it once for any number of right-hand sides.
    """

    method = "dense"

    def __init__(self, panels: Panels, policy: NearFieldPolicy | None = None):
        self.panels = panels
        self.policy = policy or DENSE_POLICY
        self.matrix = assemble_single_layer(panels.centroids, panels, self.policy)
        super().__init__(dtype=np.float64, shape=self.matrix.shape)

    def _matvec(self, x):
        return self.matrix @ x

    def _matmat(self, x):
        return self.matrix @ x


def near_corrections(panels: Panels, policy: NearFieldPolicy, *, chunk: int = 20_000, progress=None):
    """Sparse (N, N) CSR matrix: accurate value minus far-rule value for every pair within
    ``policy.corrected_within`` panel sizes (the far rule of a pair at distance 0, which
    the multipole sum skips, counts as 0). Memory O(N): about 280 entries per panel with
    FAST_POLICY. ``progress(done, total)`` is called after each chunk of targets.
    """
    from scipy import sparse

    n = len(panels)
    finder = PairFinder(panels.centroids, policy.corrected_within * panels.sizes)
    blocks = []
    arrays = _kernel_arrays(panels, policy)
    from .kernels import near_values

    for s in range(0, n, chunk):
        targets = panels.centroids[s : s + chunk]
        i, j, distance = finder.query(targets)
        values = near_values(targets, i, j, distance / panels.sizes[j], *arrays, True)
        blocks.append(sparse.csr_matrix((values, (i, j.astype(np.int32))), shape=(len(targets), n)))
        del i, j, distance, values
        if progress is not None:
            progress(min(s + chunk, n), n)
    return _stack_rows(blocks, n)


def _stack_rows(blocks: list, n_columns: int):
    """Stack CSR row blocks into one CSR matrix, freeing each block once copied, so the
    peak memory is about one copy of the entries rather than two."""
    from scipy import sparse

    nnz = sum(b.nnz for b in blocks)
    n_rows = sum(b.shape[0] for b in blocks)
    index_type = np.int32 if max(nnz, n_columns) < 2**31 else np.int64
    data = np.empty(nnz)
    indices = np.empty(nnz, dtype=index_type)
    indptr = np.empty(n_rows + 1, dtype=index_type)
    indptr[0] = 0
    row = at = 0
    while blocks:
        b = blocks.pop(0)
        data[at : at + b.nnz] = b.data
        indices[at : at + b.nnz] = b.indices
        indptr[row + 1 : row + 1 + b.shape[0]] = b.indptr[1:] + at
        row, at = row + b.shape[0], at + b.nnz
        del b
    return sparse.csr_matrix((data, indices, indptr), shape=(n_rows, n_columns))


class FastSingleLayer(LinearOperator):
    """Matrix-free single-layer operator: multipole far field plus sparse near corrections.

    ``A x = FMM(point charges x_j w_jq at the far-rule points of every panel) + C x``
    where C (:func:`near_corrections`) replaces the far-rule value of every pair within
    ``policy.corrected_within`` panel sizes by its accurate one. Memory and time grow
    about linearly with N; no N x N array is formed.

    Parameters
    ----------
    panels : the N panels; targets are their centroids
    policy : integration policy; ``far_degree`` must be 1, 2 or 4 (rules whose points
        never sit at a centroid, except the one-point rule, whose self term is skipped)
    tol : solver tolerance; sets the multipole precision (:func:`tricharge.bem.fmm.fmm_eps`)
    progress : optional ``progress(done, total)`` for the near-field build
    """

    method = "fast"

    def __init__(self, panels: Panels, policy: NearFieldPolicy | None = None, *, tol: float = 1e-6,
                 progress=None):
        from .fmm import fmm_eps

        self.panels = panels
        self.policy = policy or FAST_POLICY
        if self.policy.far_degree == 5:
            raise ValueError("the fast operator cannot use the degree-5 rule far away: its centre point coincides "
                             "with the collocation point; use far_degree 1, 2 or 4")
        self.eps = fmm_eps(tol)
        self.near = near_corrections(panels, self.policy, progress=progress)
        qp, qw = panels.quadrature(self.policy.far_degree)
        self._points, self._weights = qp.reshape(-1, 3), qw
        super().__init__(dtype=np.float64, shape=(len(panels), len(panels)))

    def _matvec(self, x):
        return self._matmat(np.asarray(x).reshape(-1, 1))[:, 0]

    def _matmat(self, x):
        from .fmm import potentials

        x = np.asarray(x, dtype=np.float64)
        k = x.shape[1]
        charges = (self._weights[:, :, None] * x[:, None, :]).reshape(-1, k)
        if self.policy.far_degree == 1:
            far = potentials(self._points, charges, eps=self.eps)
        else:
            far = potentials(self._points, charges, self.panels.centroids, eps=self.eps)
        return far + self.near @ x

    def far_values(self, rows: np.ndarray, cols: np.ndarray) -> np.ndarray:
        """Far-rule values for explicit pairs (0 where the points coincide), metres."""
        return far_rule_pairs(self.panels.centroids[rows], self.panels, cols, self.policy)


def make_operator(panels: Panels, method: str = "auto", *, tol: float = 1e-6, progress=None) -> LinearOperator:
    """The single-layer operator for ``method``: "dense", "fast" or "auto" (by panel count).

    The crossover :data:`AUTO_DENSE_LIMIT` was measured with bench/fast.py.
    """
    if method == "auto":
        method = "dense" if len(panels) <= AUTO_DENSE_LIMIT else "fast"
    if method == "dense":
        return DenseSingleLayer(panels)
    if method == "fast":
        return FastSingleLayer(panels, tol=tol, progress=progress)
    raise OptionError(f"method must be auto, dense or fast, got {method!r}")


#: Panel count up to which "auto" picks the dense operator. Measured here (2 cores,
#: one conductor): the fast path is as fast at 2,400 panels and 2-4x faster from 6,000;
#: dense stays up to 3,000 because its one LU serves any number of conductors.
AUTO_DENSE_LIMIT = 3000
