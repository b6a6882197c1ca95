"""Bodies swept from curves: surfaces of revolution from an (r, z) profile (rods, capsules,
rounded disks, tori) and tubes along a 3D path, meshed to a target panel size."""

from __future__ import annotations

import numpy as np

from ..errors import OptionError

# Bodies built from stacked rings: surfaces of revolution and tubes along a path.
#
# A "ring stack" is a sequence of rings; ring k holds ``sizes[k]`` vertices at angles
# ``offsets[k] + 2 pi j / sizes[k]`` (a ring of size 1 is a pole). Consecutive rings are
# joined by a zipper that walks both rings in angle order, so rings with different
# vertex counts stitch without slivers. Triangles are wound so that the normal is
# (direction of increasing angle) x (direction from ring k to ring k + 1).

_SQRT3_2 = np.sqrt(3.0) / 2.0

_CORNER_TURN = np.deg2rad(30.0)  # a polyline vertex turning more than this is kept exactly


def _positive(value, name: str) -> float:
    """``value`` as a float, or OptionError unless it is finite and > 0."""
    x = float(value)
    if not (np.isfinite(x) and x > 0.0):
        raise OptionError(f"{name} must be a positive length, got {value!r}; pass a number > 0")
    return x


def _stitch_pair(start_a: int, n_a: int, off_a: float, start_b: int, n_b: int, off_b: float) -> np.ndarray:
    """Triangles (n_a + n_b, 3) (fewer at a pole) joining ring A to ring B.

    Vertex j of ring A has global index ``start_a + j`` and angle ``off_a + 2 pi j / n_a``
    (radians); likewise for B. The zipper walks the edges of both rings in the order of
    their mid-angles, so each triangle's apex sits near the middle of its base.
    """
    if n_a == 1:
        q = np.arange(n_b)
        return np.column_stack([np.full(n_b, start_a), start_b + (q + 1) % n_b, start_b + q])
    if n_b == 1:
        q = np.arange(n_a)
        return np.column_stack([start_a + q, start_a + (q + 1) % n_a, np.full(n_a, start_b)])
    step_a, step_b = 2.0 * np.pi / n_a, 2.0 * np.pi / n_b
    shift = off_b - off_a
    first = (shift + step_b / 2) % step_b - step_b / 2  # B vertex nearest A's vertex 0, in [-step_b/2, step_b/2)
    j0 = int(np.rint((first - shift) / step_b)) % n_b
    keys = np.r_[step_a * (np.arange(n_a) + 0.5), first + step_b * (np.arange(n_b) + 0.5)]  # edge mid-angles
    from_a = np.concatenate([np.ones(n_a, bool), np.zeros(n_b, bool)])[np.argsort(keys, kind="stable")]
    i = np.cumsum(from_a) - from_a
    j = np.cumsum(~from_a) - ~from_a
    a0, a1 = start_a + i % n_a, start_a + (i + 1) % n_a
    b0, b1 = start_b + (j0 + j) % n_b, start_b + (j0 + j + 1) % n_b
    return np.where(from_a[:, None], np.column_stack([a0, a1, b0]), np.column_stack([a0, b1, b0]))


def _stitch_rings(sizes: np.ndarray, offsets: np.ndarray, closed: bool) -> np.ndarray:
    """Triangles (m, 3) int64 of a ring stack; ``closed`` also joins the last ring to the first."""
    starts = np.concatenate([[0], np.cumsum(sizes)[:-1]])
    pairs = [(k, k + 1) for k in range(len(sizes) - 1)] + ([(len(sizes) - 1, 0)] if closed else [])
    parts = [_stitch_pair(starts[a], sizes[a], offsets[a], starts[b], sizes[b], offsets[b]) for a, b in pairs]
    return np.vstack(parts).astype(np.int64)


def _ring_points(sizes, offsets, centers, radii, u, v) -> np.ndarray:
    """Vertices (sum(sizes), 3): ring k is ``centers[k] + radii[k] (cos a u[k] + sin a v[k])``."""
    ring = np.repeat(np.arange(len(sizes)), sizes)
    local = np.arange(len(ring)) - np.repeat(np.cumsum(sizes) - sizes, sizes)
    angle = offsets[ring] + 2.0 * np.pi * local / sizes[ring]
    rho = radii[ring][:, None]
    return centers[ring] + rho * (np.cos(angle)[:, None] * u[ring] + np.sin(angle)[:, None] * v[ring])


def _stagger(sizes: np.ndarray) -> np.ndarray:
    """Angle offsets (radians): every other ring turned by half its vertex spacing."""
    return np.pi / sizes * (np.arange(len(sizes)) % 2)


def _turns(points: np.ndarray, closed: bool) -> np.ndarray:
    """Turning angle (radians) at each vertex of a polyline (0 at the ends of an open one)."""
    d = np.diff(np.vstack([points, points[:1]]) if closed else points, axis=0)
    d = d / np.linalg.norm(d, axis=1, keepdims=True)
    before = np.roll(d, 1, axis=0) if closed else d[:-1]
    after = d if closed else d[1:]
    cos = np.clip(np.einsum("ij,ij->i", before, after), -1.0, 1.0)
    return np.arccos(cos) if closed else np.concatenate([[0.0], np.arccos(cos), [0.0]])


def _resample(points: np.ndarray, spacing: float, closed: bool) -> np.ndarray:
    """Points (k', d) evenly spaced by arc length, about ``spacing`` apart, on a polyline.

    Vertices turning by more than 30 degrees are kept exactly and the stretches between
    them resampled separately. A closed loop is given without its repeated first point
    and returned the same way.
    """
    if closed:
        turns = _turns(points, True)
        points = np.roll(points, -int(np.argmax(turns)), axis=0) if turns.max() > _CORNER_TURN else points
        points = np.vstack([points, points[:1]])
    breaks = np.concatenate([[0], np.flatnonzero(_turns(points, False) > _CORNER_TURN), [len(points) - 1]])
    pieces = []
    for lo, hi in zip(breaks[:-1], breaks[1:]):
        piece = points[lo:hi + 1]
        s = np.concatenate([[0.0], np.cumsum(np.linalg.norm(np.diff(piece, axis=0), axis=1))])
        t = np.linspace(0.0, s[-1], max(1, int(np.rint(s[-1] / spacing))) + 1)
        pieces.append(np.column_stack([np.interp(t, s, c) for c in piece.T])[(1 if pieces else 0):])
    out = np.vstack(pieces)
    return out[:-1] if closed else out


def _drop_repeats(points: np.ndarray, tolerance: float) -> np.ndarray:
    """Polyline without vertices closer than ``tolerance`` to the vertex before them."""
    keep = np.concatenate([[True], np.linalg.norm(np.diff(points, axis=0), axis=1) > tolerance])
    return points[keep]


def _checked_profile(profile_rz) -> tuple[np.ndarray, bool]:
    """Validated (r, z) profile, counter-clockwise in the (r, z) plane, and whether it is a loop."""
    rz = np.asarray(profile_rz, dtype=np.float64)
    if rz.ndim != 2 or rz.shape[1] != 2 or len(rz) < 3 or not np.isfinite(rz).all():
        raise OptionError(f"profile_rz must be a finite (k, 2) array of (r, z) with k >= 3, got shape {rz.shape}")
    tolerance = 1e-9 * np.ptp(rz, axis=0).max()
    if rz[:, 0].min() < -tolerance:
        raise OptionError(f"profile_rz has r = {rz[:, 0].min():.6g} < 0; give radii measured from the z axis, >= 0")
    closed = bool(np.linalg.norm(rz[0] - rz[-1]) <= tolerance)
    if closed:
        rz = _drop_repeats(rz[:-1], tolerance)
        if rz[:, 0].min() <= tolerance:
            raise OptionError("profile_rz is a closed loop touching the z axis; keep a ring's profile at r > 0")
    else:
        if rz[0, 0] > tolerance or rz[-1, 0] > tolerance:
            raise OptionError(
                f"profile_rz must start and end on the axis (r = 0) or be a closed loop, got r = {rz[0, 0]:.6g}"
                f" and {rz[-1, 0]:.6g} at its ends; close the profile"
            )
        rz = _drop_repeats(rz, tolerance)
        rz[[0, -1], 0] = 0.0
        if len(rz) < 3 or rz[1:-1, 0].min() <= tolerance:
            raise OptionError("profile_rz touches the z axis between its ends; split it into separate bodies")
    r, z = rz[:, 0], rz[:, 1]
    twice_area = np.sum(r * np.roll(z, -1) - np.roll(r, -1) * z)
    if abs(twice_area) <= tolerance**2:
        raise OptionError("profile_rz encloses no area; give the outline of the body's half cross-section")
    return (rz if twice_area > 0 else rz[::-1].copy()), closed


def revolve(profile_rz, panel_size: float, center=(0.0, 0.0, 0.0)):
    """Closed surface of revolution about the z axis of a polyline profile.

    Parameters
    ----------
    profile_rz : (k, 2) array of (r, z), metres (or any length unit, used throughout).
        Either an open polyline that starts and ends on the axis (r = 0) and stays off it
        in between (a sphere, capsule or disk), or a closed loop (first point equal to the
        last) with r > 0 everywhere (a ring). Either direction; it must not cross itself.
        Vertices where the profile turns by more than 30 degrees are kept as edges of the
        body; elsewhere the profile is resampled, so give curves densely.
    panel_size : target triangle edge length, same unit (one larger than the body gives a
        coarse but valid mesh with at least four intervals along the profile). Rings are ``panel_size * sqrt(3)/2``
        apart along the profile and each ring has ``round(2 pi r / panel_size)`` (>= 3)
        vertices, so panels are near-equilateral; the pole of an open profile is one vertex.
    center : (3,) offset added to every vertex.

    Returns
    -------
    vertices : (n, 3) float64, on the revolved profile polyline
    triangles : (m, 3) int64, normals outward (right-hand rule)

    >>> v, t = revolve([[0, -1], [1, -1], [1, 1], [0, 1]], 0.25)   # a cylinder of radius 1
    >>> bool(np.allclose(np.hypot(v[:, 0], v[:, 1])[np.abs(v[:, 2]) < 0.99], 1.0))
    True
    """
    rz, closed = _checked_profile(profile_rz)
    h = _positive(panel_size, "panel_size")
    length = np.linalg.norm(np.diff(np.vstack([rz, rz[:1]]) if closed else rz, axis=0), axis=1).sum()
    rz = _resample(rz, min(h * _SQRT3_2, length / 4), closed)  # a panel larger than the body still gives rings
    r, z = rz[:, 0], rz[:, 1]
    on_axis = r <= 1e-9 * np.ptp(rz, axis=0).max()
    sizes = np.where(on_axis, 1, np.maximum(3, np.rint(2.0 * np.pi * r / h))).astype(np.int64)
    offsets = _stagger(sizes)
    ones = np.ones(len(r))
    u, v = np.outer(ones, [1.0, 0.0, 0.0]), np.outer(ones, [0.0, 1.0, 0.0])
    centers = np.column_stack([0.0 * r, 0.0 * r, z])
    points = _ring_points(sizes, offsets, centers, np.where(on_axis, 0.0, r), u, v)
    return points + np.asarray(center, float), _stitch_rings(sizes, offsets, closed)


def arc_rz(center_rz, radius: float, start: float, stop: float) -> np.ndarray:
    """Dense points (k, 2) of a circular arc in the (r, z) plane, angles in radians from +r."""
    angle = np.linspace(start, stop, max(2, int(np.ceil(abs(stop - start) / 1e-3)) + 1))
    return np.asarray(center_rz, float) + radius * np.column_stack([np.cos(angle), np.sin(angle)])


def torus(major_radius: float, minor_radius: float, panel_size: float, center=(0.0, 0.0, 0.0)):
    """Torus about the z axis: tube of radius ``minor_radius`` around a circle of ``major_radius``.

    Lengths in metres (or any one unit); ``0 < minor_radius < major_radius``. Returns
    ``(vertices (n, 3), triangles (m, 3) int64)`` with outward normals; panels are about
    ``panel_size`` across (see :func:`revolve`).
    """
    big, small = _positive(major_radius, "major_radius"), _positive(minor_radius, "minor_radius")
    if small >= big:
        raise OptionError(
            f"torus minor_radius {small:g} must be below major_radius {big:g}; the ring would self-intersect")
    loop = arc_rz((big, 0.0), small, 0.0, 2.0 * np.pi)
    loop[-1] = loop[0]
    return revolve(loop, panel_size, center)


def rod(radius: float, length: float, panel_size: float, center=(0.0, 0.0, 0.0), rounded=(True, True)):
    """Closed cylinder along z whose bottom and top ends are hemispheres or flat disks.

    Parameters
    ----------
    radius : cylinder radius, metres (or any one unit)
    length : overall length from end to end along z, hemispheres included, same unit
    panel_size : target triangle edge length, same unit
    center : (3,) centre of the rod
    rounded : (bottom, top); True for a hemispherical end, False for a flat one

    Returns
    -------
    vertices : (n, 3) float64; triangles : (m, 3) int64, normals outward
    """
    a, total = _positive(radius, "radius"), _positive(length, "length")
    low, high = bool(rounded[0]), bool(rounded[1])
    if total < a * (low + high):
        raise OptionError(
            f"rod length {total:g} is shorter than its rounded ends ({a * (low + high):g}); make it longer")
    z0, z1 = -total / 2, total / 2
    bottom = arc_rz((0.0, z0 + a), a, -np.pi / 2, 0.0) if low else np.array([[0.0, z0], [a, z0]])
    top = arc_rz((0.0, z1 - a), a, 0.0, np.pi / 2) if high else np.array([[a, z1], [0.0, z1]])
    return revolve(np.vstack([bottom, top]), panel_size, center)


def capsule(radius: float, length: float, panel_size: float, center=(0.0, 0.0, 0.0)):
    """Cylinder along z with two hemispherical ends; ``length`` is end to end (>= 2 radius).

    Same units and returns as :func:`rod`.
    """
    return rod(radius, length, panel_size, center, rounded=(True, True))


def rounded_disk(radius: float, thickness: float, panel_size: float, center=(0.0, 0.0, 0.0)):
    """Thick disk about the z axis with flat faces and a half-round rim of diameter ``thickness``.

    Parameters
    ----------
    radius : outer radius (to the rim's outermost point), metres (or any one unit)
    thickness : distance between the flat faces, same unit; ``thickness <= 2 radius``
    panel_size : target triangle edge length, same unit
    center : (3,) centre of the disk (its mid-plane is z = center[2])

    Returns
    -------
    vertices : (n, 3) float64; triangles : (m, 3) int64, normals outward
    """
    big, t = _positive(radius, "radius"), _positive(thickness, "thickness")
    if t > 2.0 * big:
        raise OptionError(f"rounded_disk thickness {t:g} exceeds its diameter {2 * big:g}; make it thinner")
    rim = arc_rz((big - t / 2, 0.0), t / 2, -np.pi / 2, np.pi / 2)
    return revolve(np.vstack([[0.0, -t / 2], rim, [0.0, t / 2]]), panel_size, center)


def arc_path(start, end, height: float, n: int = 64) -> np.ndarray:
    """Points (n, 3) of a wire-bond-like arc from ``start`` to ``end``.

    The arc is the straight line from ``start`` (3,) to ``end`` (3,) lifted along +z by
    ``height * sin(pi s)`` at fraction s of the way, so it rises ``height`` (same unit,
    >= 0) above the line half-way and leaves both ends steeply.

    >>> arc_path([0, 0, 0], [2, 0, 0], 0.5, 3)[1].tolist()
    [1.0, 0.0, 0.5]
    """
    a, b = np.asarray(start, float).reshape(3), np.asarray(end, float).reshape(3)
    if not (np.isfinite(height) and height >= 0.0) or int(n) < 2:
        raise OptionError(f"arc_path needs height >= 0 and n >= 2, got height={height!r}, n={n!r}")
    s = np.linspace(0.0, 1.0, int(n))[:, None]
    points = a + s * (b - a) + height * np.sin(np.pi * s) * np.array([0.0, 0.0, 1.0])
    points[[0, -1]] = a, b  # exactly, not up to sin(pi) rounding
    return points


def rotation_minimising_frames(points: np.ndarray, tangents: np.ndarray) -> np.ndarray:
    """Unit normals (k, 3), perpendicular to ``tangents`` (k, 3), that twist as little as possible.

    Double-reflection method of Wang, Juettler, Zheng and Liu, "Computation of rotation
    minimizing frames", ACM Transactions on Graphics 27(1), 2008. The first normal is
    perpendicular to the first tangent and to the coordinate axis it is least aligned with.
    """
    axis = np.eye(3)[np.argmin(np.abs(tangents[0]))]
    normals = np.empty_like(points)
    normals[0] = np.cross(tangents[0], axis) / np.linalg.norm(np.cross(tangents[0], axis))
    for k in range(len(points) - 1):
        v1 = points[k + 1] - points[k]
        c1 = v1 @ v1
        r = normals[k] - (2.0 / c1) * (v1 @ normals[k]) * v1
        t = tangents[k] - (2.0 / c1) * (v1 @ tangents[k]) * v1
        v2 = tangents[k + 1] - t
        c2 = v2 @ v2
        r = r - (2.0 / c2) * (v2 @ r) * v2 if c2 > 1e-30 else r
        r = r - (r @ tangents[k + 1]) * tangents[k + 1]
        normals[k + 1] = r / np.linalg.norm(r)
    return normals


def tube(path, radius: float, panel_size: float):
    """Closed tube of circular cross-section swept along a polyline, with flat end caps.

    Parameters
    ----------
    path : (k, 3) points of the centre line, metres (or any one unit), k >= 2. It is
        resampled by arc length (vertices turning by more than 30 degrees are kept); bends
        must be gentle compared with ``radius`` or the tube crosses itself.
    radius : tube radius, same unit
    panel_size : target triangle edge length, same unit; at least 6 vertices go around

    Returns
    -------
    vertices : (n, 3) float64; triangles : (m, 3) int64, normals outward. The cross-section
    rings follow rotation-minimising frames; each end cap is a flat disk perpendicular to
    the path's end direction, meshed in concentric rings (no slivers).
    """
    p = np.asarray(path, dtype=np.float64)
    if p.ndim != 2 or p.shape[1] != 3 or not np.isfinite(p).all():
        raise OptionError(f"tube path must be a finite (k, 3) array of points, got shape {p.shape}")
    a, h = _positive(radius, "radius"), _positive(panel_size, "panel_size")
    p = _drop_repeats(p, 1e-9 * max(np.ptp(p, axis=0).max(), a))
    if len(p) < 2:
        raise OptionError("tube path has fewer than two distinct points; give the wire's start and end")
    n = max(6, int(np.rint(2.0 * np.pi * a / h)))
    spacing = 2.0 * np.pi * a / n * _SQRT3_2
    p = _resample(p, spacing, closed=False)
    tangents = np.gradient(p, axis=0)
    tangents /= np.linalg.norm(tangents, axis=1, keepdims=True)
    u = rotation_minimising_frames(p, tangents)
    v = np.cross(tangents, u)
    n_cap = max(1, int(np.rint(a / spacing)))
    cap_radii = a * np.arange(n_cap) / n_cap                      # 0 (the centre) .. inner rings
    cap_sizes = np.maximum(3, np.rint(n * np.arange(n_cap) / n_cap)).astype(np.int64)
    cap_sizes[0] = 1
    ends = np.r_[np.zeros(n_cap, int), np.arange(len(p)), np.full(n_cap, len(p) - 1)]
    radii = np.r_[cap_radii, np.full(len(p), a), cap_radii[::-1]]
    sizes = np.r_[cap_sizes, np.full(len(p), n), cap_sizes[::-1]]
    offsets = _stagger(sizes)
    points = _ring_points(sizes, offsets, p[ends], radii, u[ends], v[ends])
    return points, _stitch_rings(sizes, offsets, closed=False)
