"""Compiled (numba) kernels: the near-field potential and normal-field integrals of many
pairs, the pair search in a grid, and sampling a sparse matrix; the compiled sums of point
charges are in :mod:`.sums`. :func:`compiled` is numba's ``njit`` with the cache kept in
the user's cache folder, for every compiled kernel of the package.

The same mathematics as :mod:`tricharge.bem.integrals` and
:func:`tricharge.bem.nearfield.pair_integrals`, written with scalars only (small arrays
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


def compiled(**options):
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


@compiled(fastmath=False)
def _plane(x0, x1, x2, c):
    """Unit normal (nx, ny, nz) of triangle c (3, 3), the point's signed height above its
    plane (0 within PLANE_TOLERANCE of the longest edge) and the point projected onto it."""
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
    return nx, ny, nz, height, x0 - height * nx, x1 - height * ny, x2 - height * nz


@compiled(fastmath=False)
def _edge(c, k, nx, ny, nz, height, px, py, pz):
    """For edge k (corner k to k + 1) of triangle c: its in-plane outward normal (ux, uy,
    uz), the signed in-plane distance t of the projected point to its line, and the
    edge-log term asinh(l+/R0) - asinh(l-/R0)."""
    k1 = (k + 1) % 3
    dx, dy, dz = c[k1, 0] - c[k, 0], c[k1, 1] - c[k, 1], c[k1, 2] - c[k, 2]
    length = math.sqrt(dx * dx + dy * dy + dz * dz)
    lx, ly, lz = dx / length, dy / length, dz / length
    ux, uy, uz = ly * nz - lz * ny, lz * nx - lx * nz, lx * ny - ly * nx
    rx, ry, rz = c[k, 0] - px, c[k, 1] - py, c[k, 2] - pz
    t = rx * ux + ry * uy + rz * uz
    l_minus = rx * lx + ry * ly + rz * lz
    r0 = max(math.sqrt(t * t + height * height), EDGE_FLOOR * length)
    return ux, uy, uz, t, math.asinh((l_minus + length) / r0) - math.asinh(l_minus / r0)


@compiled(fastmath=False)
def _solid_angle(x0, x1, x2, c):
    """The unsigned solid angle triangle c subtends at the point (van Oosterom & Strackee)."""
    ax, ay, az = c[0, 0] - x0, c[0, 1] - x1, c[0, 2] - x2
    bx, by, bz = c[1, 0] - x0, c[1, 1] - x1, c[1, 2] - x2
    cx, cy, cz = c[2, 0] - x0, c[2, 1] - x1, c[2, 2] - x2
    na = math.sqrt(ax * ax + ay * ay + az * az)
    nb = math.sqrt(bx * bx + by * by + bz * bz)
    nc = math.sqrt(cx * cx + cy * cy + cz * cz)
    numerator = ax * (by * cz - bz * cy) + ay * (bz * cx - bx * cz) + az * (bx * cy - by * cx)
    denominator = (na * nb * nc + (ax * bx + ay * by + az * bz) * nc + (ax * cx + ay * cy + az * cz) * nb
                   + (bx * cx + by * cy + bz * cz) * na)
    return abs(2.0 * math.atan2(numerator, denominator))


@compiled(fastmath=False)
def _closed_form(x0, x1, x2, c):
    """Integral of 1/|x - y| over triangle c (3, 3) at point (x0, x1, x2); see integrals.py."""
    nx, ny, nz, height, px, py, pz = _plane(x0, x1, x2, c)
    total = 0.0
    for k in range(3):
        _, _, _, t, f = _edge(c, k, nx, ny, nz, height, px, py, pz)
        total += t * f
    if height != 0.0:
        total -= abs(height) * _solid_angle(x0, x1, x2, c)
    return total


@compiled()
def _point_rule(x0, x1, x2, pts, w, skip_within):
    """sum_q w_q / |x - y_q|, skipping points closer than ``skip_within``."""
    total = 0.0
    for q in range(pts.shape[0]):
        dx, dy, dz = pts[q, 0] - x0, pts[q, 1] - x1, pts[q, 2] - x2
        r = math.sqrt(dx * dx + dy * dy + dz * dz)
        if r > skip_within:
            total += w[q] / r
    return total


@compiled(parallel=True)
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


@compiled(fastmath=False)
def _closed_form_normal_field(x0, x1, x2, c, m0, m1, m2):
    """``m . integral over triangle c of (x - y)/|x - y|^3 dA_y`` at (x0, x1, x2): the
    normal field of the unit-density triangle along the target normal m (dimensionless;
    integrals.triangle_field dotted with m)."""
    nx, ny, nz, height, px, py, pz = _plane(x0, x1, x2, c)
    fx = fy = fz = 0.0
    for k in range(3):
        ux, uy, uz, _, f = _edge(c, k, nx, ny, nz, height, px, py, pz)
        fx, fy, fz = fx + ux * f, fy + uy * f, fz + uz * f
    if height != 0.0:
        side = _solid_angle(x0, x1, x2, c) * (1.0 if height > 0.0 else -1.0)
        fx, fy, fz = fx + side * nx, fy + side * ny, fz + side * nz
    return m0 * fx + m1 * fy + m2 * fz


@compiled()
def _point_rule_normal_field(x0, x1, x2, m0, m1, m2, pts, w, skip_within):
    """m . sum_q w_q (x - y_q)/|x - y_q|^3, skipping points closer than ``skip_within``."""
    total = 0.0
    for q in range(pts.shape[0]):
        dx, dy, dz = x0 - pts[q, 0], x1 - pts[q, 1], x2 - pts[q, 2]
        r = math.sqrt(dx * dx + dy * dy + dz * dz)
        if r > skip_within:
            total += w[q] * (m0 * dx + m1 * dy + m2 * dz) / (r * r * r)
    return total


@compiled(parallel=True)
def near_normal_field_values(targets, target_normals, i, j, rel, corners, sizes, near_pts, near_w, mid_pts, mid_w,
                             far_pts, far_w, closed_within, near_within, subtract_far):
    """As :func:`near_values` for the normal field ``n_i . integral of (x - y)/|x - y|^3``
    at target ``i[p]`` along ``target_normals[i[p]]`` (dimensionless): the interface
    rows of the general system. Arrays as there, with target_normals (M, 3)."""
    out = np.empty(len(i))
    for p in prange(len(i)):
        a, b = i[p], j[p]
        x0, x1, x2 = targets[a, 0], targets[a, 1], targets[a, 2]
        m0, m1, m2 = target_normals[a, 0], target_normals[a, 1], target_normals[a, 2]
        if rel[p] < closed_within:
            value = _closed_form_normal_field(x0, x1, x2, corners[b], m0, m1, m2)
        elif rel[p] < near_within:
            value = _point_rule_normal_field(x0, x1, x2, m0, m1, m2, near_pts[b], near_w[b], -1.0)
        else:
            value = _point_rule_normal_field(x0, x1, x2, m0, m1, m2, mid_pts[b], mid_w[b], -1.0)
        if subtract_far:
            value -= _point_rule_normal_field(x0, x1, x2, m0, m1, m2, far_pts[b], far_w[b], 1e-9 * sizes[b])
        out[p] = value
    return out


@compiled(parallel=True)
def grid_pairs(targets, centers, radii, members, keys, starts, origin, cell, shape, offsets, out_i, out_j, out_d,
               fill):
    """One pass of the pair search of :func:`tricharge.bem.nearfield.pairs_in_grid` over
    one group of centers binned in a grid of cubes of side ``cell`` (at least every
    radius of the group): for each target, the centers in the 27 cubes around its own
    that lie closer than their radius.

    targets (M, 3); centers (N, 3); radii (N,); members (G,) the group's center indices
    sorted by cube; keys (K,) the sorted distinct cube numbers ``x + nx (y + ny z)`` of
    the group and starts (K + 1,) where each begins in ``members``; origin (3,) the
    grid's corner; shape (3,) int64 cubes per axis. Returns the count per target (M,);
    with ``fill``, also writes target i, center j and the distance into ``out_i``,
    ``out_j``, ``out_d`` from ``offsets[a]`` on (the running sum of the counts).
    """
    m = targets.shape[0]
    counts = np.zeros(m, np.int64)
    nx, ny, nz = shape[0], shape[1], shape[2]
    for a in prange(m):
        x0, x1, x2 = targets[a, 0], targets[a, 1], targets[a, 2]
        cx = math.floor((x0 - origin[0]) / cell)
        cy = math.floor((x1 - origin[1]) / cell)
        cz = math.floor((x2 - origin[2]) / cell)
        if cx < -1 or cy < -1 or cz < -1 or cx > nx or cy > ny or cz > nz:
            continue
        found = 0
        at = offsets[a] if fill else 0
        for z in range(max(cz - 1, 0), min(cz + 2, nz)):
            for y in range(max(cy - 1, 0), min(cy + 2, ny)):
                for x in range(max(cx - 1, 0), min(cx + 2, nx)):
                    key = x + nx * (y + ny * z)
                    k = np.searchsorted(keys, key)
                    if k >= keys.shape[0] or keys[k] != key:
                        continue
                    for u in range(starts[k], starts[k + 1]):
                        b = members[u]
                        d0, d1, d2 = x0 - centers[b, 0], x1 - centers[b, 1], x2 - centers[b, 2]
                        d = math.sqrt(d0 * d0 + d1 * d1 + d2 * d2)
                        if d < radii[b]:
                            if fill:
                                out_i[at + found] = a
                                out_j[at + found] = b
                                out_d[at + found] = d
                            found += 1
        counts[a] = found
    return counts


@compiled(parallel=True)
def csr_entries(indptr, indices, data, rows, cols):
    """``A[rows[p], cols[p]]`` of a CSR matrix with sorted column indices in every row
    (0 where not stored), by binary search in the row, samples over both cores.
    indptr (n + 1,), indices (nnz,), data (nnz,); rows, cols (P,) int64; returns (P,)."""
    out = np.zeros(rows.shape[0])
    for p in prange(rows.shape[0]):
        start, end = indptr[rows[p]], indptr[rows[p] + 1]
        k = start + np.searchsorted(indices[start:end], cols[p])
        if k < end and indices[k] == cols[p]:
            out[p] = data[k]
    return out
