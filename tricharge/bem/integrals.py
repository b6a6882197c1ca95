"""Potential and field integrals of uniformly charged flat triangles.

All functions here are purely geometric: they integrate the kernel ``1/|x - y|`` (or its
negative gradient) over a triangle with unit density, so results are in metres (or
dimensionless for the field). Multiply by ``sigma / (4 pi eps0)`` for volts (V/m).

Closed forms follow Wilton, Rao, Glisson, Schaubert, Al-Bundak and Butler, "Potential
integrals for uniform and linear source distributions on polygonal and polyhedral
domains", IEEE Trans. Antennas Propag. 32(3), 1984, 276-281, and Graglia, "On the
numerical integration of the linear shape functions times the 3-D Green's function or
its gradient on a plane triangle", IEEE Trans. Antennas Propag. 41(10), 1993. The solid
angle uses van Oosterom & Strackee, "The solid angle of a plane triangle", IEEE Trans.
Biomed. Eng. 30(2), 1983, which stays finite on the triangle's plane.

Every function works on *pairs*: ``points[p]`` with ``corners[p]``, vectorised over p.
"""

from __future__ import annotations

import numpy as np

#: Pairs processed per chunk, to bound temporary memory (about 1 kB per pair).
CHUNK = 100_000

#: In-plane distances to an edge line below this fraction of the edge length are
#: treated as zero, which keeps the edge-log term finite on the edge's own line.
EDGE_FLOOR = 1e-14

#: Points closer to a triangle's plane than this fraction of its longest edge count as
#: lying in the plane (round-off in a computed centroid must not pick a side).
PLANE_TOLERANCE = 1e-11


def _edge_terms(points: np.ndarray, corners: np.ndarray):
    """Quantities shared by the potential and the field.

    Returns
    -------
    normal : (p, 3) unit normal of each triangle
    height : (p,) signed distance of the point from the triangle's plane, metres
    t : (p, 3) signed in-plane distance from the projected point to each edge line,
        positive on the triangle's side, metres
    u : (p, 3, 3) unit in-plane outward normal of each edge
    f : (p, 3) edge-log terms ``asinh(l+/R0) - asinh(l-/R0)``
    omega : (p,) unsigned solid angle the triangle subtends at the point, steradians
    """
    v0, v1, v2 = corners[:, 0], corners[:, 1], corners[:, 2]
    cross = np.cross(v1 - v0, v2 - v0)
    normal = cross / np.linalg.norm(cross, axis=1, keepdims=True)
    height = np.einsum("pd,pd->p", points - v0, normal)
    projected = points - height[:, None] * normal

    start = corners
    edge = np.roll(corners, -1, axis=1) - corners  # edge i runs from vertex i to i+1
    length = np.linalg.norm(edge, axis=2)
    height = np.where(np.abs(height) < PLANE_TOLERANCE * length.max(axis=1), 0.0, height)
    along = edge / length[:, :, None]
    u = np.cross(along, normal[:, None, :])
    rel = start - projected[:, None, :]
    t = np.einsum("ped,ped->pe", rel, u)
    l_minus = np.einsum("ped,ped->pe", rel, along)
    l_plus = l_minus + length
    r0 = np.sqrt(t * t + height[:, None] ** 2)
    r0 = np.maximum(r0, EDGE_FLOOR * length)
    f = np.arcsinh(l_plus / r0) - np.arcsinh(l_minus / r0)

    a, b, c = v0 - points, v1 - points, v2 - points
    na, nb, nc = (np.linalg.norm(x, axis=1) for x in (a, b, c))
    numerator = np.einsum("pd,pd->p", a, np.cross(b, c))
    denominator = (
        na * nb * nc
        + np.einsum("pd,pd->p", a, b) * nc
        + np.einsum("pd,pd->p", a, c) * nb
        + np.einsum("pd,pd->p", b, c) * na
    )
    omega = np.abs(2.0 * np.arctan2(numerator, denominator))
    return normal, height, t, u, f, omega


def _chunked(fn, points: np.ndarray, corners: np.ndarray, out_shape: tuple) -> np.ndarray:
    points = np.asarray(points, dtype=np.float64)
    corners = np.asarray(corners, dtype=np.float64)
    out = np.empty((len(points),) + out_shape)
    for s in range(0, len(points), CHUNK):
        out[s : s + CHUNK] = fn(points[s : s + CHUNK], corners[s : s + CHUNK])
    return out


def _potential(points, corners):
    _, height, t, _, f, omega = _edge_terms(points, corners)
    return np.einsum("pe,pe->p", t, f) - np.abs(height) * omega


def _field(points, corners):
    normal, height, _, u, f, omega = _edge_terms(points, corners)
    return np.einsum("ped,pe->pd", u, f) + (np.sign(height) * omega)[:, None] * normal


def triangle_potential(points, corners) -> np.ndarray:
    """Exact ``integral over T of 1/|x - y| dA_y`` for point/triangle pairs.

    Parameters
    ----------
    points : (p, 3) float, metres. Any position, on the triangle included.
    corners : (p, 3, 3) float, metres: the triangle paired with each point.

    Returns
    -------
    (p,) float64, metres.

    Examples
    --------
    At the centroid of a right triangle with unit legs the integral is finite:

    >>> import numpy as np
    >>> tri = np.array([[[0, 0, 0], [1, 0, 0], [0, 1, 0]]], float)
    >>> round(float(triangle_potential(tri.mean(axis=1), tri)[0]), 6)
    2.40723
    """
    return _chunked(_potential, points, corners, ())


def triangle_field(points, corners) -> np.ndarray:
    """Exact ``integral over T of (x - y)/|x - y|^3 dA_y`` (minus the gradient of the potential).

    On the triangle itself the normal part is the principal value (zero); the edge-log
    term grows without bound as the point approaches an edge, as the true field does.

    Parameters
    ----------
    points : (p, 3) float, metres
    corners : (p, 3, 3) float, metres

    Returns
    -------
    (p, 3) float64, dimensionless.
    """
    return _chunked(_field, points, corners, (3,))


def point_rule_potential(points, quad_points, quad_weights) -> np.ndarray:
    """Quadrature ``sum_q w_q / |x - y_q|`` for point/panel pairs.

    Parameters
    ----------
    points : (p, 3) metres
    quad_points : (p, q, 3) metres
    quad_weights : (p, q) square metres

    Returns
    -------
    (p,) metres
    """
    diff = quad_points - points[:, None, :]
    r = np.sqrt(np.einsum("pqd,pqd->pq", diff, diff))
    return np.einsum("pq,pq->p", quad_weights, 1.0 / r)


def point_rule_field(points, quad_points, quad_weights) -> np.ndarray:
    """Quadrature ``sum_q w_q (x - y_q)/|x - y_q|^3``; shapes as :func:`point_rule_potential`, returns (p, 3)."""
    diff = points[:, None, :] - quad_points
    r2 = np.einsum("pqd,pqd->pq", diff, diff)
    return np.einsum("pq,pqd->pd", quad_weights / (r2 * np.sqrt(r2)), diff)


def solid_angles(points, corners) -> np.ndarray:
    """Signed solid angle (steradians) each triangle subtends at its point, (p,): positive
    when the point lies behind the triangle (on the side its normal points away from), so
    the solid angles of a closed, outward-oriented surface sum to 4 pi at points inside
    and to 0 outside (van Oosterom & Strackee 1983, as in :func:`triangle_potential`)."""
    points = np.asarray(points, dtype=np.float64)
    c = np.asarray(corners, dtype=np.float64)
    a, b, d = c[:, 0] - points, c[:, 1] - points, c[:, 2] - points
    na, nb, nd = (np.linalg.norm(x, axis=1) for x in (a, b, d))
    numerator = np.einsum("pd,pd->p", a, np.cross(b, d))
    denominator = (na * nb * nd + np.einsum("pd,pd->p", a, b) * nd + np.einsum("pd,pd->p", a, d) * nb
                   + np.einsum("pd,pd->p", b, d) * na)
    return 2.0 * np.arctan2(numerator, denominator)
