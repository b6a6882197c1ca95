"""Polygons (faces with more than three corners) split into triangles that cover exactly
the polygon: quads by the diagonal that lies inside, larger polygons by ear clipping in
their best-fit plane. Polygons that cannot be split so (crossing themselves, far from
flat, without area) are refused. numpy only; no files.

Triangles keep the polygon's orientation (right-hand rule around its corners) and come
out polygon by polygon, in input order; a convex polygon gives the same fan of
triangles from its first corner as a plain fan split would.
"""

from __future__ import annotations

import numpy as np

from .errors import MeshError
from .mesh import DEGENERATE_AREA_FRACTION

#: A polygon is refused as far from flat when one of its corners lies farther from its
#: best-fit plane than this fraction of the diagonal of its bounding box (our choice, no
#: source: a quad twisted so far bends by about 30 degrees across its diagonal).
FLATNESS_FRACTION = 0.1

#: Largest polygon that is not convex which is split (ear clipping and the
#: self-crossing check cost about the square of the corners; our choice, no source).
MAX_CONCAVE_CORNERS = 2000

#: Orientation tests treat values below this fraction of the squared size as zero
#: (a few hundred float64 roundings; common practice, no source).
ORIENTATION_EPS = 1e-12


class PolygonError(MeshError):
    """A polygon cannot be split into triangles; ``polygon`` is its index in the input,
    ``reason`` says why (a phrase like "crosses itself")."""

    def __init__(self, polygon: int, reason: str):
        super().__init__(f"polygon {polygon} {reason}")
        self.polygon, self.reason = polygon, reason


def triangulate_polygons(points, polygons) -> tuple[np.ndarray, np.ndarray]:
    """Split polygons with the same number of corners into triangles.

    Parameters
    ----------
    points : (n, 3) float, any length unit
    polygons : (k, p) int, corner indices into ``points``, p >= 3

    Returns
    -------
    triangles : (t, 3) int64
    owner : (t,) int64, the polygon each triangle comes from (non-decreasing)

    Raises
    ------
    PolygonError for a polygon that crosses or touches itself, is far from flat, has no
    area, or is not convex and has more than MAX_CONCAVE_CORNERS corners.

    >>> square = np.array([[0, 0, 0], [1, 0, 0], [1, 1, 0], [0, 1, 0]], float)
    >>> triangulate_polygons(square, [[0, 1, 2, 3]])[0].tolist()
    [[0, 1, 2], [0, 2, 3]]
    """
    cells = np.asarray(polygons, dtype=np.int64)
    k, p = cells.shape
    if p == 3 or k == 0:
        return cells.reshape(-1, 3), np.arange(len(cells), dtype=np.int64)
    corners = np.asarray(points, dtype=np.float64)[cells]
    fan = _fan_is_inside(corners)
    pieces = [(_fan(cells[fan]), np.repeat(np.flatnonzero(fan), p - 2))]
    if p == 4:  # a quad the diagonal 0-2 does not split may be split by 1-3
        other = ~fan & _other_diagonal(corners)
        pieces.append((_fan(np.roll(cells[other], -1, axis=1)), np.repeat(np.flatnonzero(other), 2)))
        fan |= other
    for i in np.flatnonzero(~fan):
        local = _split_one(corners[i], i)
        pieces.append((cells[i][local], np.full(len(local), i, dtype=np.int64)))
    triangles = np.concatenate([t for t, _ in pieces]).reshape(-1, 3)
    owner = np.concatenate([o for _, o in pieces])
    order = np.argsort(owner, kind="stable")
    return triangles[order], owner[order]


def _fan(cells: np.ndarray) -> np.ndarray:
    """Fan split (k, p) -> (k * (p - 2), 3) from each polygon's first corner."""
    p = cells.shape[1]
    return np.stack([cells[:, [0, i, i + 1]] for i in range(1, p - 1)], axis=1).reshape(-1, 3)


def newell_normals(corners: np.ndarray) -> np.ndarray:
    """(k, 3) Newell normals of polygons ``corners`` (k, p, 3): length twice the area of
    the polygon projected on its plane, direction by the right-hand rule."""
    return np.cross(corners, np.roll(corners, -1, axis=1)).sum(axis=1)


def _fan_is_inside(corners: np.ndarray) -> np.ndarray:
    """(k,) True where the fan from the first corner covers the polygon exactly: the
    polygon is flat enough, and (quads) both fan triangles turn the way the polygon
    does, i.e. the diagonal 0-2 lies inside, or (more corners) every corner turns that
    way and the boundary winds round once (convex). Non-finite corners: True (the fan
    is kept; the mesh checks refuse such coordinates later)."""
    finite = np.isfinite(corners).all(axis=(1, 2))
    c = np.where(finite[:, None, None], corners, 0.0)
    normal = newell_normals(c)
    area2 = np.linalg.norm(normal, axis=1)
    size2 = np.einsum("kd,kd->k", np.ptp(c, axis=1), np.ptp(c, axis=1))
    eps = ORIENTATION_EPS * size2 * area2
    bend = np.abs(np.einsum("kpd,kd->kp", c - c.mean(axis=1, keepdims=True), normal)).max(axis=1)
    flat = bend <= FLATNESS_FRACTION * np.sqrt(size2) * area2
    if c.shape[1] == 4:
        fan_normals = np.cross(c[:, 1:-1] - c[:, :1], c[:, 2:] - c[:, :1])
        turns_left = (np.einsum("ktd,kd->kt", fan_normals, normal) > eps[:, None]).all(axis=1)
    else:
        edges = np.roll(c, -1, axis=1) - c
        following = np.roll(edges, -1, axis=1)
        turn = np.einsum("kpd,kd->kp", np.cross(edges, following), normal)
        # |e| |f| sin(turn), positive where a corner turns as the polygon does
        sine = turn / np.maximum(area2, np.finfo(float).tiny)[:, None]
        angle = np.arctan2(sine, np.einsum("kpd,kpd->kp", edges, following))
        turns_left = (turn > eps[:, None]).all(axis=1) & (np.abs(angle.sum(axis=1) - 2 * np.pi) < np.pi)
    return ~finite | (turns_left & flat)


def _other_diagonal(corners: np.ndarray) -> np.ndarray:
    """(k,) True where quads (k, 4, 3) are split correctly by the diagonal 1-3 (both
    triangles turn the way the quad does) and are flat enough."""
    return _fan_is_inside(np.roll(corners, -1, axis=1))


def _split_one(corners: np.ndarray, index: int) -> np.ndarray:
    """Local triangles (t, 3) of one polygon (p, 3) that the fan does not cover exactly."""
    keep = np.flatnonzero(np.any(corners != np.roll(corners, 1, axis=0), axis=1))
    if len(keep) < 3:
        raise PolygonError(index, "has fewer than three distinct corners (no area)")
    c = corners[keep]
    normal = newell_normals(c[None])[0]
    area2, size = float(np.linalg.norm(normal)), float(np.linalg.norm(np.ptp(c, axis=0)))
    if area2 <= DEGENERATE_AREA_FRACTION * size**2:  # the threshold of a degenerate triangle
        raise PolygonError(index, "has no area (its corners lie on one line, or its loops cancel)")
    unit = normal / area2
    bend = float(np.abs((c - c.mean(axis=0)) @ unit).max())
    if bend > FLATNESS_FRACTION * size:
        raise PolygonError(index, f"is far from flat (a corner lies {bend / size:.0%} of its size off its plane)")
    if len(c) > MAX_CONCAVE_CORNERS:
        raise PolygonError(index, f"is not convex and has {len(c):,} corners, more than the {MAX_CONCAVE_CORNERS:,} "
                                  "tricharge splits")
    flat = _in_plane(c, unit)
    if _crosses_itself(flat, ORIENTATION_EPS * size**2):
        raise PolygonError(index, "crosses or touches itself")
    return keep[_ear_clip(flat, ORIENTATION_EPS * size**2, index)]


def _in_plane(c: np.ndarray, unit: np.ndarray) -> np.ndarray:
    """(p, 2) coordinates in the plane normal to ``unit``, counter-clockwise seen from it."""
    helper = np.eye(3)[np.argmin(np.abs(unit))]
    u = np.cross(unit, helper)
    u /= np.linalg.norm(u)
    v = np.cross(unit, u)
    centred = c - c.mean(axis=0)
    return np.column_stack([centred @ u, centred @ v])


def _orient(a, b, c):
    """Twice the signed area of triangles (a, b, c), 2D points (..., 2); positive when
    counter-clockwise."""
    return (b[..., 0] - a[..., 0]) * (c[..., 1] - a[..., 1]) - (b[..., 1] - a[..., 1]) * (c[..., 0] - a[..., 0])


def _crosses_itself(flat: np.ndarray, eps: float) -> bool:
    """True when two edges of the closed polyline ``flat`` (p, 2) cross or touch, other
    than neighbours at their shared corner (a neighbour folding back counts)."""
    p = len(flat)
    a, b = flat, np.roll(flat, -1, axis=0)
    before = np.roll(a, 1, axis=0)
    if np.any((np.abs(_orient(before, a, b)) <= eps) & (np.einsum("pd,pd->p", a - before, b - a) < 0)):
        return True
    slack = np.sqrt(eps)
    for i in range(0, p, 256):  # edges i.. against every later edge that is not a neighbour
        ii, jj = np.meshgrid(np.arange(i, min(i + 256, p)), np.arange(p), indexing="ij")
        pair = (jj > ii + 1) & ~((ii == 0) & (jj == p - 1))
        ii, jj = ii[pair], jj[pair]
        if len(ii) and _segments_meet(a[ii], b[ii], a[jj], b[jj], eps, slack).any():
            return True
    return False


def _segments_meet(a, b, c, d, eps: float, slack: float) -> np.ndarray:
    """(s,) True where closed segments a-b and c-d (each (s, 2)) share a point;
    orientations within ``eps`` count as zero, ``slack`` is a length tolerance."""
    o1, o2, o3, o4 = _orient(a, b, c), _orient(a, b, d), _orient(c, d, a), _orient(c, d, b)
    clear = (np.abs(o1) > eps) & (np.abs(o2) > eps) & (np.abs(o3) > eps) & (np.abs(o4) > eps)
    proper = clear & (o1 * o2 < 0) & (o3 * o4 < 0)

    def on(p, q, r, o):  # r on segment p-q
        inside = (r >= np.minimum(p, q) - slack) & (r <= np.maximum(p, q) + slack)
        return (np.abs(o) <= eps) & inside.all(axis=-1)

    return proper | on(a, b, c, o1) | on(a, b, d, o2) | on(c, d, a, o3) | on(c, d, b, o4)


def _ear_clip(flat: np.ndarray, eps: float, index: int) -> np.ndarray:
    """(p - 2, 3) local triangles of a simple counter-clockwise polygon (p, 2)."""
    p = len(flat)
    after, before = np.roll(np.arange(p), -1), np.roll(np.arange(p), 1)
    alive = np.ones(p, dtype=bool)
    triangles, cur, misses, left = [], 0, 0, p
    while left > 3:
        prev, nxt = before[cur], after[cur]
        if _is_ear(flat, alive, prev, cur, nxt, eps):
            triangles.append((prev, cur, nxt))
            alive[cur], after[prev], before[nxt] = False, nxt, prev
            left, misses, cur = left - 1, 0, prev
        else:
            misses += 1
            if misses > left:
                raise PolygonError(index, "cannot be split into triangles (no corner can be cut off)")
            cur = nxt
    cur = int(np.flatnonzero(alive)[0])
    triangles.append((cur, after[cur], after[after[cur]]))
    return np.array(triangles, dtype=np.int64)


def _is_ear(flat, alive, prev, cur, nxt, eps) -> bool:
    """True when the corner ``cur`` turns left and no other remaining corner lies in or
    on the triangle (prev, cur, nxt)."""
    a, b, c = flat[prev], flat[cur], flat[nxt]
    if _orient(a, b, c) <= eps:
        return False
    others = alive.copy()
    others[[prev, cur, nxt]] = False
    q = flat[others]
    inside = (_orient(a, b, q) >= -eps) & (_orient(b, c, q) >= -eps) & (_orient(c, a, q) >= -eps)
    return not inside.any()
