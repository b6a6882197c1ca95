"""Single-layer operators: the map from panel charge density to potential at targets.

Operators here are geometric: entry ``(i, j)`` is ``integral over panel j of
1/|x_i - y| dA_y`` in metres. The physical potential is that times
``sigma_j / (4 pi eps0)``; the factor is applied once, in :mod:`.capacitance`, which
keeps the linear algebra well scaled.

Every operator is a :class:`scipy.sparse.linalg.LinearOperator`: stored ones derive
from :class:`StoredOperator` (LU), matrix-free ones are applied by GMRES. The general
system (dielectrics, plane, floating parts) has its pair in :mod:`.system`; which one a
problem gets is decided in one place, :mod:`.factory`.
"""

from __future__ import annotations

import numpy as np
from scipy.sparse.linalg import LinearOperator
from scipy.spatial.distance import cdist

from .nearfield import DENSE_POLICY, FAST_POLICY, NearFieldPolicy, near_corrections, near_pairs, pair_integrals
from .panels import Panels
from .sums import csr_times

#: Columns assembled per block in the dense fill (bounds the temporary to ~8 MB per 1k rows).
_COLUMN_BLOCK = 1024

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

class StoredOperator(LinearOperator):
    """An operator whose matrix is stored (``matrix``, (N, N) float64, Fortran order):
    :func:`~tricharge.bem.solvers.solve_linear` factorises it by LU. Subclasses fill
    ``matrix`` and call ``super().__init__()``."""

    method = "dense"
    matrix: np.ndarray

    def __init__(self):
        super().__init__(dtype=np.float64, shape=self.matrix.shape)

    def _matvec(self, x):
        return self.matrix @ x

    def _matmat(self, x):
        return self.matrix @ x


class StoredMatrix(StoredOperator):
    """Any square matrix given as an array, as a stored operator (tests, notebooks)."""

    def __init__(self, matrix):
        self.matrix = np.asfortranarray(matrix, dtype=np.float64)
        super().__init__()


class DenseSingleLayer(StoredOperator):
    """Stored single-layer matrix for collocation at the panel centroids.

    Memory is ``8 N^2`` bytes (800 MB at 10k panels), so this is the choice for up to
    roughly 10-15k panels. Solve with :func:`tricharge.bem.solvers.solve_linear`,
    which factorises it once for any number of right-hand sides.
    """

    def __init__(self, panels: Panels, policy: NearFieldPolicy | None = None):
        self.panels = panels
        self.policy = policy or DENSE_POLICY
        self.matrix = assemble_single_layer(panels.centroids, panels, self.policy)
        super().__init__()

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
    tol : solver tolerance; sets the multipole precision (:func:`tricharge.bem.fmm.fmm_precision`)
    progress : optional ``progress(done, total)`` for the near-field build
    """

    method = "fast"

    def __init__(self, panels: Panels, policy: NearFieldPolicy | None = None, *, tol: float = 1e-6,
                 progress=None):
        from .fmm import fmm_precision

        self.panels = panels
        self.policy = policy or FAST_POLICY
        if self.policy.far_degree == 5:
            raise ValueError("the fast operator cannot use the degree-5 rule far away: its centre point coincides "
                             "with the collocation point; use far_degree 1, 2 or 4")
        self.precision = fmm_precision(tol)
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
            far = potentials(self._points, charges, precision=self.precision)
        else:
            far = potentials(self._points, charges, self.panels.centroids, precision=self.precision)
        return far + csr_times(self.near, x)

