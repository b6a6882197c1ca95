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

from .sums import csr_times


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
        return csr_times(self.matrix, x)

    def _matmat(self, x):
        return csr_times(self.matrix, x)


class GeneralLocalInverse(LinearOperator):
    """Sparse approximate inverse of the whole general system (:class:`~tricharge.bem.system.FastSystem`).

    As :class:`LocalInverse`, from local problems over each panel's ``k`` nearest
    panels, but of the system's own rows whatever the panels are: conductor rows
    (potential, with the plane's images) and interface rows (``2 pi s_i`` plus the
    contrast times the normal field, with images and Gauss self terms) side by side, so
    the coupling between a conductor and the dielectric skin around it is inverted
    locally. Entries are the operator's: its one-point far rule plus its stored near
    corrections. Floating-conductor rows are left as they are (identity).
    """

    def __init__(self, system, k: int = LOCAL_INVERSE_SIZE):
        from scipy import sparse
        from scipy.spatial import cKDTree

        panels = system.panels
        n = len(panels)
        k = int(min(k, n))
        _, neighbours = cKDTree(panels.centroids).query(panels.centroids, k=k)
        neighbours = neighbours.reshape(n, k).astype(np.int64)
        position = np.full((2, n), -1, dtype=np.int64)
        position[0, system.rows_c] = np.arange(len(system.rows_c))
        position[1, system.rows_i] = np.arange(len(system.rows_i))
        rows = np.empty((n, k))
        for s in range(0, n, 4096):
            nb = neighbours[s : s + 4096]
            a = np.repeat(nb, k, axis=1).reshape(-1)  # row panel of every local entry
            b = np.tile(nb, (1, k)).reshape(-1)  # column panel
            local = _system_entries(system, a, b, position).reshape(-1, k, k)
            unit = np.zeros((len(nb), k))
            unit[:, 0] = 1.0
            rows[s : s + 4096] = np.linalg.solve(np.transpose(local, (0, 2, 1)), unit[:, :, None])[:, :, 0]
        self.n = n
        self.matrix = sparse.csr_matrix((rows.ravel(), (np.repeat(np.arange(n), k), neighbours.ravel())),
                                        shape=(n, n))
        super().__init__(dtype=np.float64, shape=system.shape)

    def _matvec(self, x):
        return self._matmat(np.asarray(x).reshape(-1, 1))[:, 0]

    def _matmat(self, x):
        x = np.asarray(x, dtype=np.float64)
        out = x.copy()
        out[: self.n] = csr_times(self.matrix, x[: self.n])
        return out


def _system_entries(system, a: np.ndarray, b: np.ndarray, position: np.ndarray) -> np.ndarray:
    """Entries (a[p], b[p]) of a FastSystem's panel block: far rule (one point per panel,
    images with the opposite charge), stored near corrections, and the interface rows'
    2 pi diagonal and contrast."""
    panels, problem = system.panels, system.problem
    c, areas = panels.centroids, panels.areas
    diff = c[a] - c[b]
    r = np.linalg.norm(diff, axis=1)
    with np.errstate(divide="ignore", invalid="ignore"):
        potential = np.where(r > 0, areas[b] / r, 0.0)
        normal_field = np.where(r > 0, areas[b] * np.einsum("pd,pd->p", panels.normals[a], diff) / r**3, 0.0)
    if problem.images is not None:
        mirror = problem.images.centroids[b]
        diff_i = c[a] - mirror
        r_i = np.linalg.norm(diff_i, axis=1)
        potential -= areas[b] / r_i
        normal_field -= areas[b] * np.einsum("pd,pd->p", panels.normals[a], diff_i) / r_i**3
    out = np.empty(len(a))
    on_conductor = position[0, a] >= 0
    rows_c, rows_i = position[0, a[on_conductor]], position[1, a[~on_conductor]]
    out[on_conductor] = potential[on_conductor] + _entries(system.near_c, rows_c, b[on_conductor])
    contrast = problem.contrast[a[~on_conductor]]
    near = _entries(system.near_i, rows_i, b[~on_conductor])
    out[~on_conductor] = (contrast * (normal_field[~on_conductor] + near)
                          + 2.0 * np.pi * (a[~on_conductor] == b[~on_conductor]))
    return out


def _entries(matrix, rows: np.ndarray, cols: np.ndarray) -> np.ndarray:
    """``matrix[rows, cols]`` of a CSR matrix as a flat array, by binary search in each row
    (scipy scans whole rows when the samples are few against the stored entries: 1 s of
    the package demo's set-up, where a row holds about 2,300 near entries)."""
    from .kernels import csr_entries

    if not matrix.has_sorted_indices:
        matrix.sort_indices()
    return csr_entries(matrix.indptr, matrix.indices, matrix.data, rows.astype(np.int64), cols.astype(np.int64))
