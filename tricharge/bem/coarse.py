"""A coarse level for the general system's preconditioner: what local inverses cannot see.

Local inverses (:mod:`.preconditioners`) take care of how each panel's charge talks to its
neighbours; what remains slow for GMRES is smooth: charge spread over whole clusters of
panels (the first-kind single layer makes such modes the hardest). Measured on the package
demo (7,876 panels, conductors in mold over a plane, GMRES to 1e-6): unpreconditioned 673
iterations, local inverses 24-25 (19 with 48 neighbours instead of 16, at 5x the set-up),
a coarse correction added to them 25, the same coarse correction applied first and the
local inverse to what it leaves (multiplicative) 9-11.

The coarse space is piecewise constant on clusters of about :data:`CLUSTER_SIZE` panels,
made by recursive bisection of each part (one conductor, or the interface panels).
Interactions between clusters are exact (the operator's own far rule plus its stored near
corrections) for clusters close to each other, and a point charge (or, on interface rows,
its normal field) at the cluster's centre for the rest; images likewise, all as points.
"""

from __future__ import annotations

import numpy as np
import scipy.linalg
from scipy import sparse
from scipy.sparse.linalg import LinearOperator

from .kernels import compiled
from .sums import csr_times

#: Panels per cluster (measured on the package demo: 30 gave 11 iterations, 8 gave 9 at
#: four times the coarse matrix).
CLUSTER_SIZE = 30
#: Clusters closer than this many times the sum of their radii interact exactly.
NEAR_CLUSTERS = 2.0


def bisect_clusters(points: np.ndarray, size: int = CLUSTER_SIZE) -> np.ndarray:
    """(n,) cluster index of each point: split along the longest side of the bounding box
    at the median until no cluster has more than ``size`` points."""
    labels = np.zeros(len(points), dtype=np.int64)
    pending, count = [np.arange(len(points))], 0
    while pending:
        members = pending.pop()
        if len(members) <= size:
            labels[members] = count
            count += 1
            continue
        coords = points[members]
        axis = int(np.argmax(np.ptp(coords, axis=0)))
        order = np.argsort(coords[:, axis], kind="stable")
        half = len(members) // 2
        pending += [members[order[:half]], members[order[half:]]]
    return labels


def clusters_of(system, size: int = CLUSTER_SIZE) -> np.ndarray:
    """(N,) cluster of every panel of a FastSystem: each conductor, and the interface
    panels of each contrast, are bisected separately, so no cluster mixes conductors,
    row kinds or media."""
    problem = system.problem
    part = problem.panel_conductor.copy()
    interface = part < 0
    part[interface] = problem.n_conductors + np.unique(problem.contrast[interface], return_inverse=True)[1]
    labels, offset = np.empty(len(part), dtype=np.int64), 0
    for g in np.unique(part):
        members = np.flatnonzero(part == g)
        local = bisect_clusters(system.panels.centroids[members], size)
        labels[members] = local + offset
        offset += int(local.max()) + 1
    return labels


class TwoLevel(LinearOperator):
    """Two-level preconditioner for a :class:`~tricharge.bem.system.FastSystem`: a coarse
    solve on clusters, then ``local`` (a sparse approximate inverse) on the residual the
    coarse correction leaves, ``x = c + M_local (v - A~ c)`` with ``c = P A_c^-1 P^T v``.
    Floating-conductor unknowns join the coarse space as they are."""

    def __init__(self, system, local, size: int = CLUSTER_SIZE):
        self.system, self.local = system, local
        panels, problem = system.panels, system.problem
        self.n, self.floating = len(panels), problem.floating_index
        self.cluster = clusters_of(system, size)
        m = int(self.cluster.max()) + 1
        self.m = m
        self.P = sparse.csr_matrix((np.ones(self.n), (np.arange(self.n), self.cluster)), shape=(self.n, m))
        areas = panels.areas
        self.area = np.bincount(self.cluster, areas, m)
        self.centre = np.stack([np.bincount(self.cluster, areas * panels.centroids[:, d], m) for d in range(3)],
                               axis=1) / self.area[:, None]
        spread = np.linalg.norm(panels.centroids - self.centre[self.cluster], axis=1) + panels.sizes
        self.radius = np.zeros(m)
        np.maximum.at(self.radius, self.cluster, spread)
        self.near_pairs = self._near_cluster_pairs()
        self.near = self._near_on_clusters()  # (N, m): near clusters exactly, with the near corrections
        self.lu = scipy.linalg.lu_factor(self._coarse_matrix())
        super().__init__(dtype=np.float64, shape=system.shape)

    # -- geometry of the coarse level -----------------------------------------------------

    def _near_cluster_pairs(self):
        from scipy.spatial import cKDTree

        tree = cKDTree(self.centre)
        pairs = tree.query_ball_point(self.centre, NEAR_CLUSTERS * 2.0 * self.radius)
        rows = np.repeat(np.arange(self.m), [len(p) for p in pairs])
        cols = np.concatenate([np.asarray(p, dtype=np.int64) for p in pairs]) if len(rows) else rows
        gap = np.linalg.norm(self.centre[rows] - self.centre[cols], axis=1)
        keep = gap < NEAR_CLUSTERS * (self.radius[rows] + self.radius[cols])
        return sparse.csr_matrix((np.ones(int(keep.sum())), (rows[keep], cols[keep])), shape=(self.m, self.m))

    def _exact_near_columns(self):
        """(N, m) sparse: for every panel, the far-rule sum over the panels of every
        cluster near its own cluster (images included), compiled
        (:func:`~tricharge.bem.sums.cluster_pair_sums`)."""
        from .sums import cluster_pair_sums

        problem, panels = self.system.problem, self.system.panels
        order = np.argsort(self.cluster, kind="stable")
        starts = np.searchsorted(self.cluster[order], np.arange(self.m + 1)).astype(np.int64)
        near = self.near_pairs.tocoo()
        pair_i, pair_j = near.row.astype(np.int64), near.col.astype(np.int64)
        sizes = starts[pair_i + 1] - starts[pair_i]
        offsets = np.concatenate([[0], np.cumsum(sizes)]).astype(np.int64)
        mirrored = problem.ground_z is not None
        values = cluster_pair_sums(order.astype(np.int64), starts, pair_i, pair_j, offsets,
                                   np.ascontiguousarray(panels.centroids), np.ascontiguousarray(panels.normals),
                                   np.ascontiguousarray(panels.areas, dtype=np.float64), problem.panel_conductor >= 0,
                                   np.ascontiguousarray(problem.contrast, dtype=np.float64),
                                   float(problem.ground_z) if mirrored else 0.0, mirrored)
        within = np.arange(offsets[-1]) - np.repeat(offsets[:-1], sizes)
        rows = order[np.repeat(starts[pair_i], sizes) + within]
        return sparse.csr_matrix((values, (rows, np.repeat(pair_j, sizes))), shape=(self.n, self.m))

    def _near_on_clusters(self):
        """(N, m) sparse: every panel row's near part for a function constant on each
        cluster: the exact near-cluster sums plus the system's near corrections summed over
        each cluster's columns (once here, instead of the (N, N) corrections times every
        coarse column at each application)."""
        system, n = self.system, self.n
        lam = self.system.problem.contrast[system.rows_i]
        on_c = sparse.csr_matrix((np.ones(len(system.rows_c)), (system.rows_c, np.arange(len(system.rows_c)))),
                                 shape=(n, len(system.rows_c)))
        on_i = sparse.csr_matrix((lam, (system.rows_i, np.arange(len(system.rows_i)))), shape=(n, len(system.rows_i)))
        return (self._exact_near_columns() + on_c @ (system.near_c @ self.P) + on_i @ (system.near_i @ self.P)).tocsr()

    def _far_between_clusters(self, y: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """Potential (m, K) and field (m, 3, K) at every cluster centre of the point charges
        ``area_J y_J`` at the other centres (images included), leaving out near pairs
        (summed exactly in :meth:`_exact_near_columns`), compiled
        (:func:`~tricharge.bem.sums.cluster_far_sums`)."""
        from .sums import cluster_far_sums

        return cluster_far_sums(*self._far_geometry(), np.ascontiguousarray(y, dtype=np.float64),
                                *self._mirror_plane())

    def _far_geometry(self):
        near = self.near_pairs
        return (np.ascontiguousarray(self.centre), np.ascontiguousarray(self.area),
                near.indptr.astype(np.int64), near.indices.astype(np.int64))

    def _mirror_plane(self) -> tuple[float, bool]:
        ground_z = self.system.problem.ground_z
        return (0.0, False) if ground_z is None else (float(ground_z), True)

    # -- the coarse operator ---------------------------------------------------------------

    def _far_on_panels(self, y: np.ndarray) -> np.ndarray:
        """(N, K): the far clusters' contribution at every panel, from its cluster's centre:
        the potential on conductor rows, the contrast times the normal field on interface rows."""
        problem, panels = self.system.problem, self.system.panels
        potential, field = self._far_between_clusters(y)
        offset = panels.centroids - self.centre[self.cluster]  # first order across the target cluster
        out = potential[self.cluster] - np.einsum("pd,pdk->pk", offset, field[self.cluster])
        rows = self.system.rows_i
        out[rows] = problem.contrast[rows, None] * np.einsum("pd,pdk->pk", panels.normals[rows],
                                                              field[self.cluster[rows]])
        return out

    def _far_restricted(self, y: np.ndarray) -> np.ndarray:
        """(m, K): P^T :meth:`_far_on_panels`, summed per cluster without forming the panel
        rows (clusters never mix conductor and interface rows, so each cluster's sum is its
        panel count times the potential less its summed offsets dotted with the field, or
        its summed contrast-weighted normals dotted with the field)."""
        potential, field = self._far_between_clusters(y)
        return self.sum_count[:, None] * potential + np.einsum("id,idk->ik", self.sum_vector, field)

    def _cluster_sums(self) -> tuple[np.ndarray, np.ndarray]:
        """Per cluster: the count of conductor panels (m,) and the vector (m, 3) that
        dots with the field at its centre: minus the summed offsets of its conductor
        panels, plus the summed contrast times normal of its interface panels."""
        problem, panels = self.system.problem, self.system.panels
        conductor = problem.panel_conductor >= 0
        offset = panels.centroids - self.centre[self.cluster]
        vector = np.where(conductor[:, None], -offset, problem.contrast[:, None] * panels.normals)
        count = np.bincount(self.cluster, conductor.astype(np.float64), self.m)
        return count, np.stack([np.bincount(self.cluster, vector[:, d], self.m) for d in range(3)], axis=1)

    def _apply_coarse(self, y: np.ndarray, *, restricted: bool = False, far: bool = True) -> np.ndarray:
        """A~ applied to the coarse function (P y_panels, y_floating): (N + F, K), or with
        ``restricted`` its restriction P^T (m + F, K) (the far part then stays per cluster,
        and ``far=False`` leaves it out)."""
        system, problem = self.system, self.system.problem
        yp, yf = y[: self.m], y[self.m :]
        s = self.P @ yp
        panels_part = csr_times(self.near, yp)
        panels_part[system.rows_i] += 2.0 * np.pi * s[system.rows_i]
        floating_part = np.zeros((len(self.floating), y.shape[1]))
        for f, k in enumerate(self.floating):
            on = problem.panel_conductor == k
            panels_part[on] -= yf[f]
            floating_part[f] = (problem.permittivity[on] * system.panels.areas[on]) @ s[on]
        if restricted:
            near = self.P.T @ panels_part
            return np.vstack([near + self._far_restricted(yp) if far else near, floating_part])
        return np.vstack([panels_part + self._far_on_panels(yp), floating_part])

    def _coarse_matrix(self) -> np.ndarray:
        """P^T A~ P, (m + F, m + F): the near part from column blocks of the identity through
        :meth:`_apply_coarse`, the far part between clusters formed entry by entry
        (:func:`~tricharge.bem.sums.cluster_far_matrix`; through the identity's columns it
        cost m^3: 180 s of the 126,016-panel package refinement's 232 s set-up)."""
        from .sums import cluster_far_matrix

        self.sum_count, self.sum_vector = self._cluster_sums()
        size = self.m + len(self.floating)
        out = np.empty((size, size))
        for s in range(0, size, 256):
            columns = np.zeros((size, min(256, size - s)))
            columns[np.arange(s, s + columns.shape[1]), np.arange(columns.shape[1])] = 1.0
            out[:, s : s + columns.shape[1]] = self._apply_coarse(columns, restricted=True, far=False)
        out[: self.m, : self.m] += cluster_far_matrix(*self._far_geometry(), np.ascontiguousarray(self.sum_count),
                                                      np.ascontiguousarray(self.sum_vector), *self._mirror_plane())
        return out

    def _restrict(self, v: np.ndarray) -> np.ndarray:
        return np.vstack([self.P.T @ v[: self.n], v[self.n :]])

    def _matmat(self, v):
        v = np.asarray(v, dtype=np.float64)
        y = lu_solve_serial(*self.lu, self._restrict(v))
        correction = np.vstack([self.P @ y[: self.m], y[self.m :]])
        return correction + self.local.matmat(v - self._apply_coarse(y))

    def _matvec(self, v):
        return self._matmat(np.asarray(v).reshape(-1, 1))[:, 0]


@compiled(fastmath=False)
def lu_solve_serial(lu, piv, b):
    """``scipy.linalg.lu_solve((lu, piv), b)`` on one thread, for b (n, K): the coarse
    solve runs once per GMRES iteration, and LAPACK's threads, left spinning after it,
    took the cores from the compiled far-field sums that follow (measured on the package
    demo: 0.171 s per application of operator and preconditioner, 0.131 s with BLAS held
    to one thread). lu, piv as :func:`scipy.linalg.lu_factor` returns them (row i was
    swapped with row piv[i], in order)."""
    n, k = lu.shape[0], b.shape[1]
    x = b.astype(np.float64)
    for i in range(n):
        p = piv[i]
        if p != i:
            for c in range(k):
                x[i, c], x[p, c] = x[p, c], x[i, c]
    for i in range(n):
        for j in range(i):
            f = lu[i, j]
            if f != 0.0:
                for c in range(k):
                    x[i, c] -= f * x[j, c]
    for i in range(n - 1, -1, -1):
        for j in range(i + 1, n):
            f = lu[i, j]
            if f != 0.0:
                for c in range(k):
                    x[i, c] -= f * x[j, c]
        for c in range(k):
            x[i, c] /= lu[i, i]
    return x
