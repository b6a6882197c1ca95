"""Do triangles cross? Segment-triangle and triangle-triangle intersection tests, for the
geometry checks (parts that touch or overlap). numpy only; no files, no solver.
"""

from __future__ import annotations

import numpy as np


def segments_cross_triangles(p0, p1, corners, tolerance: float = 1e-12) -> np.ndarray:
    """(p,) True where segment p0[k]-p1[k] passes through triangle corners[k] (pairs).

    Möller-Trumbore test restricted to the segment; touching at an end point within
    ``tolerance`` (relative) also counts. Parallel segments never cross.
    """
    a, b, c = corners[:, 0], corners[:, 1], corners[:, 2]
    d = p1 - p0
    e1, e2 = b - a, c - a
    h = np.cross(d, e2)
    det = np.einsum("pd,pd->p", e1, h)
    ok = np.abs(det) > 1e-14 * np.linalg.norm(e1, axis=1) * np.linalg.norm(e2, axis=1) * np.linalg.norm(d, axis=1)
    with np.errstate(divide="ignore", invalid="ignore"):
        inv = 1.0 / det
        s = p0 - a
        u = inv * np.einsum("pd,pd->p", s, h)
        q = np.cross(s, e1)
        v = inv * np.einsum("pd,pd->p", d, q)
        t = inv * np.einsum("pd,pd->p", e2, q)
    eps = tolerance
    with np.errstate(invalid="ignore"):
        return ok & (u >= -eps) & (v >= -eps) & (u + v <= 1 + eps) & (t >= -eps) & (t <= 1 + eps)


def triangles_intersect(corners_a, corners_b) -> np.ndarray:
    """(p,) True where triangle pairs cross or touch (an edge of one meets the other)."""
    hit = np.zeros(len(corners_a), dtype=bool)
    for first, second in ((corners_a, corners_b), (corners_b, corners_a)):
        for k in range(3):
            hit |= segments_cross_triangles(first[:, k], first[:, (k + 1) % 3], second)
    return hit
