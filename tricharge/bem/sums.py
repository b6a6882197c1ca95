"""Compiled sums of point charges: the direct far-field sums (below the size where the
multipole library becomes cheaper, see :mod:`.fmm`) and the sums of the general system's
coarse level (:mod:`.coarse`): panel by panel between near clusters, centre to centre
between the rest."""

from __future__ import annotations

import math

import numpy as np
from numba import prange

from .kernels import compiled


#: Sources per block of the direct sums: the inverse distances of a block stay in cache
#: while every density column is summed against them.
SOURCE_BLOCK = 256
#: Targets that share each load of a density in the direct potential sum.
TARGET_TILE = 4


@compiled(fastmath=True)
def _inverse_distances(x0, x1, x2, sx, sy, sz, s, count, inv):
    """inv[t] = 1/|x - y_(s+t)| for t < count (0 where the source sits on the point)."""
    for t in range(count):
        d0, d1, d2 = x0 - sx[s + t], x1 - sy[s + t], x2 - sz[s + t]
        r2 = d0 * d0 + d1 * d1 + d2 * d2
        inv[t] = 1.0 / math.sqrt(r2) if r2 > 0.0 else 0.0


@compiled(parallel=True, fastmath=True)
def potential_sums(sx, sy, sz, qT, points):
    """``phi[m, k] = sum_j qT[k, j] / |x_m - y_j|`` by direct summation, skipping a
    source on the point: sources in blocks whose inverse distances are formed once per
    target (vectorised), targets in tiles of TARGET_TILE that share every density load,
    tiles over all cores.

    sx, sy, sz (N,) source coordinates; qT (K, N) densities; points (M, 3); returns (M, K).
    """
    m, n, k = points.shape[0], sx.shape[0], qT.shape[0]
    phi = np.zeros((m, k))
    for tile in prange((m + TARGET_TILE - 1) // TARGET_TILE):
        a0 = tile * TARGET_TILE
        count = min(TARGET_TILE, m - a0)
        inv = np.zeros((TARGET_TILE, SOURCE_BLOCK))
        for s in range(0, n, SOURCE_BLOCK):
            length = min(SOURCE_BLOCK, n - s)
            for u in range(count):
                _inverse_distances(points[a0 + u, 0], points[a0 + u, 1], points[a0 + u, 2], sx, sy, sz, s, length,
                                   inv[u])
            for c in range(k):
                p0 = p1 = p2 = p3 = 0.0
                for t in range(length):
                    q = qT[c, s + t]
                    p0 += q * inv[0, t]
                    p1 += q * inv[1, t]
                    p2 += q * inv[2, t]
                    p3 += q * inv[3, t]
                phi[a0, c] += p0
                if count > 1:
                    phi[a0 + 1, c] += p1
                if count > 2:
                    phi[a0 + 2, c] += p2
                if count > 3:
                    phi[a0 + 3, c] += p3
    return phi


@compiled(parallel=True, fastmath=True)
def gradient_sums(sx, sy, sz, qT, points):
    """The potential (M, K) of :func:`potential_sums` and its gradient ``grad[m, k, :]``
    (M, K, 3) with respect to x_m, sources in blocks as there, targets over all cores."""
    m, n, k = points.shape[0], sx.shape[0], qT.shape[0]
    phi = np.zeros((m, k))
    grad = np.zeros((m, k, 3))
    for a in prange(m):
        x0, x1, x2 = points[a, 0], points[a, 1], points[a, 2]
        inv = np.empty(SOURCE_BLOCK)
        w0, w1, w2 = np.empty(SOURCE_BLOCK), np.empty(SOURCE_BLOCK), np.empty(SOURCE_BLOCK)
        for s in range(0, n, SOURCE_BLOCK):
            length = min(SOURCE_BLOCK, n - s)
            for t in range(length):
                d0, d1, d2 = x0 - sx[s + t], x1 - sy[s + t], x2 - sz[s + t]
                r2 = d0 * d0 + d1 * d1 + d2 * d2
                iv = 1.0 / math.sqrt(r2) if r2 > 0.0 else 0.0
                i3 = iv * iv * iv
                inv[t], w0[t], w1[t], w2[t] = iv, i3 * d0, i3 * d1, i3 * d2
            for c in range(k):
                p = g0 = g1 = g2 = 0.0
                for t in range(length):
                    q = qT[c, s + t]
                    p += q * inv[t]
                    g0 += q * w0[t]
                    g1 += q * w1[t]
                    g2 += q * w2[t]
                phi[a, c] += p
                grad[a, c, 0] -= g0
                grad[a, c, 1] -= g1
                grad[a, c, 2] -= g2
    return phi, grad


@compiled(parallel=True, fastmath=False)
def cluster_pair_sums(members, starts, pair_i, pair_j, offsets, centroids, normals, areas, is_conductor, contrast,
                      mirror_z, mirrored):
    """For every near pair p of clusters (target cluster ``pair_i[p]``, source cluster
    ``pair_j[p]``) and every panel a of the target cluster (the t-th, in ``members``
    order), the far-rule sum over the source cluster's panels b as point charges
    ``areas[b]`` at their centroids: ``out[offsets[p] + t]`` is the potential on a
    conductor panel a, ``contrast[a]`` times the normal field ``n_a . E`` on an interface
    panel; when ``mirrored``, each source's image at ``z -> 2 mirror_z - z`` adds the
    same with the opposite sign. A source at the target itself is skipped.

    members (N,) panel indices grouped by cluster, cluster c's from ``starts[c]`` to
    ``starts[c + 1]``; pair_i, pair_j (P,) int64; offsets (P + 1,) int64, the running
    sum of the target clusters' sizes; centroids, normals (N, 3); areas, contrast (N,);
    is_conductor (N,) bool. Returns (offsets[-1],) float64 (metres for potentials).
    """
    out = np.zeros(offsets[-1])
    for p in prange(pair_i.shape[0]):
        a0, a1 = starts[pair_i[p]], starts[pair_i[p] + 1]
        b0, b1 = starts[pair_j[p]], starts[pair_j[p] + 1]
        for t in range(a1 - a0):
            a = members[a0 + t]
            x0, x1, x2 = centroids[a, 0], centroids[a, 1], centroids[a, 2]
            n0, n1, n2 = normals[a, 0], normals[a, 1], normals[a, 2]
            conductor = is_conductor[a]
            acc = 0.0
            for u in range(b0, b1):
                b = members[u]
                for image in range(2 if mirrored else 1):
                    sign = 1.0 if image == 0 else -1.0
                    z = centroids[b, 2] if image == 0 else 2.0 * mirror_z - centroids[b, 2]
                    d0, d1, d2 = x0 - centroids[b, 0], x1 - centroids[b, 1], x2 - z
                    r2 = d0 * d0 + d1 * d1 + d2 * d2
                    if r2 == 0.0:
                        continue
                    inv = 1.0 / math.sqrt(r2)
                    if conductor:
                        acc += sign * areas[b] * inv
                    else:
                        acc += sign * areas[b] * (n0 * d0 + n1 * d1 + n2 * d2) * inv * inv * inv
            out[offsets[p] + t] = acc if conductor else contrast[a] * acc
    return out


@compiled(fastmath=False)
def _far_clusters(i, m, near_indptr, near_indices):
    """(m,) bool: the clusters that are not near cluster i (CSR rows of the near pairs)."""
    far = np.ones(m, dtype=np.bool_)
    for p in range(near_indptr[i], near_indptr[i + 1]):
        far[near_indices[p]] = False
    return far


@compiled(fastmath=False)
def _from_source(centre, i, j, image, mirror_z):
    """(sign, x_i - x_j as three numbers, r^2) for centre j (image 0) or its mirror image
    at ``z -> 2 mirror_z - z`` (image 1, sign -1)."""
    z = centre[j, 2] if image == 0 else 2.0 * mirror_z - centre[j, 2]
    d0, d1, d2 = centre[i, 0] - centre[j, 0], centre[i, 1] - centre[j, 1], centre[i, 2] - z
    return (1.0 if image == 0 else -1.0), d0, d1, d2, d0 * d0 + d1 * d1 + d2 * d2


@compiled(parallel=True, fastmath=False)
def cluster_far_sums(centre, area, near_indptr, near_indices, y, mirror_z, mirrored):
    """Potential (m, K) and field (m, 3, K) at every cluster centre of the point charges
    ``area[j] * y[j]`` at the other centres, leaving out the near pairs (row i's near
    clusters are ``near_indices[near_indptr[i]:near_indptr[i + 1]]``); when ``mirrored``
    each centre's image at ``z -> 2 mirror_z - z`` adds the same with the opposite sign
    (and is left out with its cluster). The "field" is sum ``area y (x_i - x_j) / r^3``.

    centre (m, 3); area (m,); near_indptr (m + 1,), near_indices int; y (m, K).
    """
    m, k = centre.shape[0], y.shape[1]
    potential, field = np.zeros((m, k)), np.zeros((m, 3, k))
    for i in prange(m):
        far = _far_clusters(i, m, near_indptr, near_indices)
        for j in range(m):
            if not far[j]:
                continue
            for image in range(2 if mirrored else 1):
                sign, d0, d1, d2, r2 = _from_source(centre, i, j, image, mirror_z)
                if r2 == 0.0:
                    continue
                inv = sign * area[j] / math.sqrt(r2)
                w = inv / r2
                for c in range(k):
                    potential[i, c] += inv * y[j, c]
                    field[i, 0, c] += w * d0 * y[j, c]
                    field[i, 1, c] += w * d1 * y[j, c]
                    field[i, 2, c] += w * d2 * y[j, c]
    return potential, field


@compiled(parallel=True, fastmath=False)
def cluster_far_matrix(centre, area, near_indptr, near_indices, count, vector, mirror_z, mirrored):
    """The (m, m) matrix of the sums of :func:`cluster_far_sums` restricted to clusters:
    ``F[i, j] = sum over j and its image of area_j / r (count[i] + vector[i] . (x_i - x_j) / r^2)``
    (signed for the image, near pairs left out): ``F @ y`` equals
    ``count[:, None] * potential + einsum("id,idk->ik", vector, field)`` of that function,
    formed once in O(m^2) instead of applying it to every column of the identity.

    count (m,), vector (m, 3); the rest as :func:`cluster_far_sums`.
    """
    m = centre.shape[0]
    out = np.zeros((m, m))
    for i in prange(m):
        far = _far_clusters(i, m, near_indptr, near_indices)
        for j in range(m):
            if not far[j]:
                continue
            for image in range(2 if mirrored else 1):
                sign, d0, d1, d2, r2 = _from_source(centre, i, j, image, mirror_z)
                if r2 == 0.0:
                    continue
                inv = sign * area[j] / math.sqrt(r2)
                out[i, j] += inv * (count[i] + (vector[i, 0] * d0 + vector[i, 1] * d1 + vector[i, 2] * d2) / r2)
    return out


@compiled(parallel=True, fastmath=True)
def _csr_times(indptr, indices, data, x):
    m, k = indptr.shape[0] - 1, x.shape[1]
    out = np.zeros((m, k))
    for i in prange(m):
        for p in range(indptr[i], indptr[i + 1]):
            j, v = indices[p], data[p]
            for c in range(k):
                out[i, c] += v * x[j, c]
    return out


def csr_times(matrix, x: np.ndarray) -> np.ndarray:
    """``matrix @ x`` for a scipy CSR matrix (M, N) and x (N,) or (N, K), rows over all
    cores (scipy's own product runs on one)."""
    x = np.asarray(x, dtype=np.float64)
    if matrix.format != "csr":
        return matrix @ x
    columns = np.ascontiguousarray(x.reshape(len(x), -1))
    out = _csr_times(matrix.indptr, matrix.indices, matrix.data, columns)
    return out[:, 0] if x.ndim == 1 else out
