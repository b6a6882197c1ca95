"""Preconditioners for the first-kind single-layer system, built from the near field.

Measured on 20k-panel meshes at tolerance 1e-6 (GMRES iterations without -> with
:class:`LocalInverse`, k = 16): cube 26 -> 11, two close plates 41 -> 18, sphere 3 -> 5
(a sphere's constant right-hand side is an eigenvector, nothing to gain). Tried and
dropped: block-Jacobi on spatial clusters of 32-128 panels (a fifth fewer iterations
at best), and threshold ILU of the near field (on a 97k-panel cube its 31 s set-up
saved 6 of 35 iterations, about 11 s).
"""

from __future__ import annotations

import numpy as np
from scipy.sparse.linalg import LinearOperator


#: Neighbourhood size of :class:`LocalInverse` (k = 32 saves two more iterations on the
#: cube and plates but costs six times the set-up).
LOCAL_INVERSE_SIZE = 16


class LocalInverse(LinearOperator):
    """Sparse approximate inverse from overlapping local problems.

    For every panel i, take its ``k`` nearest panels (itself first), invert the operator
    restricted to them, and keep the row of that inverse that belongs to i. The result is
    a sparse matrix with ``k`` entries per row; applying it costs one sparse product.

    Parameters
    ----------
    operator : anything with ``panels`` and ``policy`` (dense or fast single layer)
    k : neighbourhood size
    """

    def __init__(self, operator, k: int = LOCAL_INVERSE_SIZE):
        from scipy import sparse
        from scipy.spatial import cKDTree

        from .kernels import near_values
        from .nearfield import kernel_arrays

        panels = operator.panels
        n = len(panels)
        k = int(min(k, n))
        _, neighbours = cKDTree(panels.centroids).query(panels.centroids, k=k)
        neighbours = neighbours.reshape(n, k).astype(np.int64)
        arrays = kernel_arrays(panels, operator.policy)
        rows = np.empty((n, k))
        for s in range(0, n, 8192):
            nb = neighbours[s : s + 8192]
            a = np.repeat(nb, k, axis=1).reshape(-1)
            b = np.tile(nb, (1, k)).reshape(-1)
            rel = np.linalg.norm(panels.centroids[a] - panels.centroids[b], axis=1) / panels.sizes[b]
            local = near_values(panels.centroids, a, b, rel, *arrays, False).reshape(-1, k, k)
            unit = np.zeros((len(nb), k))
            unit[:, 0] = 1.0
            rows[s : s + 8192] = np.linalg.solve(np.transpose(local, (0, 2, 1)), unit[:, :, None])[:, :, 0]
        self.matrix = sparse.csr_matrix((rows.ravel(), (np.repeat(np.arange(n), k), neighbours.ravel())),
                                        shape=(n, n))
        super().__init__(dtype=np.float64, shape=(n, n))

    def _matvec(self, x):
        return self.matrix @ x

    def _matmat(self, x):
        return self.matrix @ x


class SystemPreconditioner(LinearOperator):
    """Preconditioner for the general system (:class:`~tricharge.bem.system.FastSystem`):
    :class:`LocalInverse` on the conductor panels' single layer (images ignored),
    ``1 / (2 pi)`` on interface rows (their diagonal), identity on floating rows."""

    def __init__(self, system, k: int = LOCAL_INVERSE_SIZE):
        from types import SimpleNamespace

        from .panels import Panels

        panels = system.panels
        self.rows_c, self.rows_i = system.rows_c, system.rows_i
        self.local = None
        if len(self.rows_c):
            conductor_panels = Panels(panels.vertices, panels.triangles[self.rows_c])
            self.local = LocalInverse(SimpleNamespace(panels=conductor_panels, policy=system.policy), k)
        super().__init__(dtype=np.float64, shape=system.shape)

    def _matvec(self, x):
        return self._matmat(np.asarray(x).reshape(-1, 1))[:, 0]

    def _matmat(self, x):
        x = np.asarray(x, dtype=np.float64)
        out = x.copy()
        if self.local is not None:
            out[self.rows_c] = self.local.matrix @ x[self.rows_c]
        out[self.rows_i] = x[self.rows_i] / (2.0 * np.pi)
        return out
