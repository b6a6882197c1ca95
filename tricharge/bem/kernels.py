"""Compiled (numba) kernels: the near-field potential integrals of many pairs, and the
direct far-field sums of point charges (below the size where the multipole library
becomes cheaper, see :mod:`.fmm`).

The same mathematics as :mod:`tricharge.bem.integrals` and
:func:`tricharge.bem.operators.pair_integrals`, written with scalars only (small arrays
inside a numba kernel are slow, docs/measured.md) and run over pairs in parallel. It pays
where millions of pairs are integrated (the fast operator's near field: about 6x faster
than the vectorised numpy path, measured by bench/fast.py); tests check it against the
numpy path to 1e-12.
"""

from __future__ import annotations

import math

import numba
import numpy as np
from numba import njit, prange

from ..cache import numba_cache_dir
from .integrals import EDGE_FLOOR, PLANE_TOLERANCE  # the same tolerances as the numpy twin


#: Where compiled kernels are cached (tricharge.cache): never beside this file, where pip
#: would leave them behind on uninstall. None: compile without caching.
_CACHE_DIR = numba_cache_dir(numba.config.CACHE_DIR)


def _compiled(**options):
    """``numba.njit(**options)``, caching compiled code in ``_CACHE_DIR``.

    numba picks the cache folder from ``numba.config.CACHE_DIR`` when the decorator runs
    (not when it compiles), so the setting is changed for that moment only and the
    user's own is restored.
    """
    def decorate(function):
        if _CACHE_DIR is None:
            return njit(cache=False, **options)(function)
        setting = numba.config.CACHE_DIR
        numba.config.CACHE_DIR = str(_CACHE_DIR)
        try:
            return njit(cache=True, **options)(function)
        finally:
            numba.config.CACHE_DIR = setting

    return decorate


@_compiled(fastmath=False)
def _closed_form(x0, x1, x2, c):
    """Integral of 1/|x - y| over triangle c (3, 3) at point (x0, x1, x2); see integrals.py."""
    ax, ay, az = c[0, 0], c[0, 1], c[0, 2]
    e1x, e1y, e1z = c[1, 0] - ax, c[1, 1] - ay, c[1, 2] - az
    e2x, e2y, e2z = c[2, 0] - ax, c[2, 1] - ay, c[2, 2] - az
    nx, ny, nz = e1y * e2z - e1z * e2y, e1z * e2x - e1x * e2z, e1x * e2y - e1y * e2x
    nn = math.sqrt(nx * nx + ny * ny + nz * nz)
    nx, ny, nz = nx / nn, ny / nn, nz / nn
    height = (x0 - ax) * nx + (x1 - ay) * ny + (x2 - az) * nz
    longest = 0.0
    for k in range(3):
        k1 = (k + 1) % 3
        dx, dy, dz = c[k1, 0] - c[k, 0], c[k1, 1] - c[k, 1], c[k1, 2] - c[k, 2]
        longest = max(longest, math.sqrt(dx * dx + dy * dy + dz * dz))
    if abs(height) < PLANE_TOLERANCE * longest:
        height = 0.0
    px, py, pz = x0 - height * nx, x1 - height * ny, x2 - height * nz
    total = 0.0
    for k in range(3):
        k1 = (k + 1) % 3
        dx, dy, dz = c[k1, 0] - c[k, 0], c[k1, 1] - c[k, 1], c[k1, 2] - c[k, 2]
        length = math.sqrt(dx * dx + dy * dy + dz * dz)
        lx, ly, lz = dx / length, dy / length, dz / length
        ux, uy, uz = ly * nz - lz * ny, lz * nx - lx * nz, lx * ny - ly * nx
        rx, ry, rz = c[k, 0] - px, c[k, 1] - py, c[k, 2] - pz
        t = rx * ux + ry * uy + rz * uz
        l_minus = rx * lx + ry * ly + rz * lz
        l_plus = l_minus + length
        r0 = max(math.sqrt(t * t + height * height), EDGE_FLOOR * length)
        total += t * (math.asinh(l_plus / r0) - math.asinh(l_minus / r0))
    if height != 0.0:
        ax_, ay_, az_ = c[0, 0] - x0, c[0, 1] - x1, c[0, 2] - x2
        bx, by, bz = c[1, 0] - x0, c[1, 1] - x1, c[1, 2] - x2
        cx, cy, cz = c[2, 0] - x0, c[2, 1] - x1, c[2, 2] - x2
        na = math.sqrt(ax_ * ax_ + ay_ * ay_ + az_ * az_)
        nb = math.sqrt(bx * bx + by * by + bz * bz)
        nc = math.sqrt(cx * cx + cy * cy + cz * cz)
        numerator = ax_ * (by * cz - bz * cy) + ay_ * (bz * cx - bx * cz) + az_ * (bx * cy - by * cx)
        denominator = (na * nb * nc + (ax_ * bx + ay_ * by + az_ * bz) * nc + (ax_ * cx + ay_ * cy + az_ * cz) * nb
                       + (bx * cx + by * cy + bz * cz) * na)
        total -= abs(height) * abs(2.0 * math.atan2(numerator, denominator))
    return total


@_compiled()
def _point_rule(x0, x1, x2, pts, w, skip_within):
    """sum_q w_q / |x - y_q|, skipping points closer than ``skip_within``."""
    total = 0.0
    for q in range(pts.shape[0]):
        dx, dy, dz = pts[q, 0] - x0, pts[q, 1] - x1, pts[q, 2] - x2
        r = math.sqrt(dx * dx + dy * dy + dz * dz)
        if r > skip_within:
            total += w[q] / r
    return total


@_compiled(parallel=True)
def near_values(targets, i, j, rel, corners, sizes, near_pts, near_w, mid_pts, mid_w, far_pts, far_w,
                closed_within, near_within, subtract_far):
    """Per pair p: the policy's value for target ``i[p]`` and panel ``j[p]``, minus the
    far-rule value when ``subtract_far`` (a far point on the target counts as 0).

    Arrays: targets (M, 3); i, j (P,) int64; rel (P,) distance in panel sizes; corners
    (N, 3, 3); sizes (N,); near/mid/far points (N, q, 3) and weights (N, q).
    """
    out = np.empty(len(i))
    for p in prange(len(i)):
        a, b = i[p], j[p]
        x0, x1, x2 = targets[a, 0], targets[a, 1], targets[a, 2]
        if rel[p] < closed_within:
            value = _closed_form(x0, x1, x2, corners[b])
        elif rel[p] < near_within:
            value = _point_rule(x0, x1, x2, near_pts[b], near_w[b], -1.0)
        else:
            value = _point_rule(x0, x1, x2, mid_pts[b], mid_w[b], -1.0)
        if subtract_far:
            value -= _point_rule(x0, x1, x2, far_pts[b], far_w[b], 1e-9 * sizes[b])
        out[p] = value
    return out


@_compiled(parallel=True, fastmath=True)
def direct_sums(sources, q, points, gradient):
    """``phi[m, k] = sum_j q[j, k] / |x_m - y_j|`` and, when ``gradient``, its gradient
    ``grad[m, k, :]`` with respect to x_m, by direct summation over all pairs, the points
    split over threads; a source at the point itself is skipped.

    sources (N, 3), q (N, K), points (M, 3), all float64; returns phi (M, K) and grad
    (M, K, 3) (zeros when not ``gradient``). The fast operator's far-field sum below the
    size where the multipole library becomes cheaper (see :mod:`.fmm`).
    """
    m, n, k = points.shape[0], sources.shape[0], q.shape[1]
    phi = np.zeros((m, k))
    grad = np.zeros((m, k, 3) if gradient else (0, k, 3))
    for a in prange(m):
        x0, x1, x2 = points[a, 0], points[a, 1], points[a, 2]
        acc = np.zeros(k)
        g = np.zeros((k, 3))
        for j in range(n):
            d0, d1, d2 = x0 - sources[j, 0], x1 - sources[j, 1], x2 - sources[j, 2]
            r2 = d0 * d0 + d1 * d1 + d2 * d2
            if r2 == 0.0:
                continue
            inv = 1.0 / math.sqrt(r2)
            inv3 = inv * inv * inv
            for c in range(k):
                acc[c] += q[j, c] * inv
                if gradient:
                    w = q[j, c] * inv3
                    g[c, 0] -= w * d0
                    g[c, 1] -= w * d1
                    g[c, 2] -= w * d2
        for c in range(k):
            phi[a, c] = acc[c]
            if gradient:
                grad[a, c, 0] = g[c, 0]
                grad[a, c, 1] = g[c, 1]
                grad[a, c, 2] = g[c, 2]
    return phi, grad
