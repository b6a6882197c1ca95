"""Shape generators of tricharge.shapes: closed, outward, well-shaped and on the intended surface."""

import numpy as np
import pytest
from scipy.spatial import cKDTree

from tricharge import shapes
from tricharge.errors import OptionError

from helpers import observed_order


# --- mesh measures (units of the input; shapes as in the package convention) ----------

def aspect_ratios(v, t):
    """(m,) longest edge squared / (2 area) * sqrt(3)/2 of each triangle: 1 for equilateral."""
    c = v[t]
    e = np.roll(c, -1, axis=1) - c
    longest2 = (e**2).sum(axis=2).max(axis=1)
    area = 0.5 * np.linalg.norm(np.cross(e[:, 0], -e[:, 2]), axis=1)
    return longest2 / (2.0 * area) * np.sqrt(3.0) / 2.0


def signed_volume(v, t):
    c = v[t]
    return np.einsum("ij,ij->i", c[:, 0], np.cross(c[:, 1], c[:, 2])).sum() / 6.0


def surface_area(v, t):
    c = v[t]
    return 0.5 * np.linalg.norm(np.cross(c[:, 1] - c[:, 0], c[:, 2] - c[:, 0]), axis=1).sum()


def assert_closed_and_consistent(v, t):
    """Every directed edge appears once and its reverse once: closed, oriented, manifold edges."""
    edges = t[:, [0, 1, 1, 2, 2, 0]].reshape(-1, 2)
    code = edges[:, 0] * len(v) + edges[:, 1]
    reverse = edges[:, 1] * len(v) + edges[:, 0]
    assert len(np.unique(code)) == len(code), "a directed edge is used twice (inconsistent orientation)"
    assert np.array_equal(np.sort(code), np.sort(reverse)), "an edge lacks its opposite (surface not closed)"
    assert set(np.unique(t)) == set(range(len(v))), "unused vertices"
    assert len(cKDTree(v).query_pairs(1e-9 * np.ptp(v, axis=0).max())) == 0, "coincident vertices"


def _sphere(radius, h):
    return shapes.revolve(shapes.arc_rz((0.0, 0.0), radius, -np.pi / 2, np.pi / 2), h)


BODIES = {
    "sphere": lambda: _sphere(1.0, 0.15),
    "torus": lambda: shapes.torus(2.0, 0.5, 0.12, center=(1.0, -2.0, 0.5)),
    "capsule": lambda: shapes.capsule(0.5, 3.0, 0.12),
    "flat rod": lambda: shapes.rod(0.5, 2.0, 0.12, rounded=(False, True)),
    "rounded disk": lambda: shapes.rounded_disk(2.0, 0.5, 0.15),
    "cone": lambda: shapes.revolve([[0, 0], [1, 0], [0, 1.5]], 0.1),
    "straight tube": lambda: shapes.tube([[0, 0, 0], [0, 0, 1]], 0.1, 0.02),
    "bond wire": lambda: shapes.tube(shapes.arc_path([0, 0, 0], [1, 0.2, -0.3], 0.3), 0.025, 0.02),
    "fat helix tube": lambda: shapes.tube(_helix(1.0, 0.5, 400), 0.15, 0.03),
}


def _helix(radius, pitch, n):
    s = np.linspace(0.0, 2.0 * np.pi, n)
    return np.column_stack([radius * np.cos(s), radius * np.sin(s), pitch * s / (2 * np.pi)])


@pytest.mark.parametrize("name", BODIES)
def test_bodies_are_closed_outward_and_well_shaped(name):
    v, t = BODIES[name]()
    assert v.dtype == np.float64 and t.dtype == np.int64 and v.shape[1] == 3 and t.shape[1] == 3
    assert_closed_and_consistent(v, t)
    assert signed_volume(v, t) > 0.0
    worst = aspect_ratios(v, t).max()
    assert worst < 2.5, f"{name}: worst aspect ratio {worst:.2f}"


@pytest.mark.parametrize("make", [lambda: _sphere(1.0, 10.0), lambda: shapes.torus(2.0, 0.5, 50.0),
                                  lambda: shapes.tube([[0, 0, 0], [0, 0.1, 0.05]], 0.3, 5.0)],
                         ids=["sphere", "torus", "tube"])
def test_panels_larger_than_the_body_still_give_a_closed_outward_body(make):
    v, t = make()
    assert_closed_and_consistent(v, t)
    assert signed_volume(v, t) > 0.0 and len(t) >= 8


@pytest.mark.parametrize("name", ["sphere", "torus", "capsule", "rounded disk"])
def test_normals_point_away_from_the_body(name):
    """Each panel's normal points away from the nearest point of the body's core (axis or circle)."""
    v, t = BODIES[name]()
    c = v[t].mean(axis=1)
    n = np.cross(v[t[:, 1]] - v[t[:, 0]], v[t[:, 2]] - v[t[:, 0]])
    if name == "torus":
        c = c - [1.0, -2.0, 0.5]
        rho = np.hypot(c[:, 0], c[:, 1])
        core = np.column_stack([2.0 * c[:, 0] / rho, 2.0 * c[:, 1] / rho, 0 * rho])
    elif name == "rounded disk":
        rho = np.hypot(c[:, 0], c[:, 1])
        scale = np.minimum(rho, 1.75) / rho
        core = np.column_stack([c[:, 0] * scale, c[:, 1] * scale, 0 * rho])
    else:
        half = {"sphere": 0.0, "capsule": 1.0}[name]
        core = np.column_stack([0 * c[:, 0], 0 * c[:, 0], np.clip(c[:, 2], -half, half)])
    assert (np.einsum("ij,ij->i", n, c - core) > 0).all()


def test_sphere_volume_area_and_vertices():
    radius = 1.5
    sizes, errors = [0.3, 0.15, 0.075], []
    for h in sizes:
        v, t = _sphere(radius, h)
        np.testing.assert_allclose(np.linalg.norm(v, axis=1), radius, rtol=1e-6)
        errors.append(signed_volume(v, t) / (4 / 3 * np.pi * radius**3) - 1)
        assert surface_area(v, t) == pytest.approx(4 * np.pi * radius**2, rel=0.02)
    assert abs(errors[-1]) < 0.003
    assert observed_order(sizes, errors) == pytest.approx(2.0, abs=0.3), errors


def test_torus_volume_area_and_vertices():
    big, small = 2.0, 0.5
    v, t = shapes.torus(big, small, 0.1, center=(1.0, -2.0, 0.5))
    x = v - [1.0, -2.0, 0.5]
    np.testing.assert_allclose(np.hypot(np.hypot(x[:, 0], x[:, 1]) - big, x[:, 2]), small, rtol=1e-6)
    assert signed_volume(v, t) == pytest.approx(2 * np.pi**2 * big * small**2, rel=0.01)
    assert surface_area(v, t) == pytest.approx(4 * np.pi**2 * big * small, rel=0.005)


def test_capsule_volume_area_and_vertices():
    a, length = 0.5, 3.0
    v, t = shapes.capsule(a, length, 0.08, center=(0.0, 1.0, 2.0))
    x = v - [0.0, 1.0, 2.0]
    axis_point = np.column_stack([0 * x[:, 0], 0 * x[:, 0], np.clip(x[:, 2], -(length / 2 - a), length / 2 - a)])
    np.testing.assert_allclose(np.linalg.norm(x - axis_point, axis=1), a, rtol=1e-6)
    straight = length - 2 * a
    assert signed_volume(v, t) == pytest.approx(np.pi * a**2 * straight + 4 / 3 * np.pi * a**3, rel=0.01)
    assert surface_area(v, t) == pytest.approx(2 * np.pi * a * straight + 4 * np.pi * a**2, rel=0.005)
    assert np.ptp(x[:, 2]) == pytest.approx(length)


def test_flat_rod_keeps_its_rim_and_has_a_flat_base():
    a, length = 0.5, 2.0
    v, t = shapes.rod(a, length, 0.1, rounded=(False, True))
    base = np.isclose(v[:, 2], -length / 2, rtol=0, atol=1e-12)
    rim = base & np.isclose(np.hypot(v[:, 0], v[:, 1]), a, rtol=1e-12)
    assert rim.sum() >= 25 and base.sum() > rim.sum()   # the rim circle is kept, the base is filled
    straight = length - a
    assert signed_volume(v, t) == pytest.approx(np.pi * a**2 * straight + 2 / 3 * np.pi * a**3, rel=0.01)


def test_rounded_disk_volume_area_and_vertices():
    radius, thickness = 2.0, 0.5
    v, t = shapes.rounded_disk(radius, thickness, 0.08)
    inner, rho = radius - thickness / 2, thickness / 2
    r = np.hypot(v[:, 0], v[:, 1])
    np.testing.assert_allclose(np.hypot(np.maximum(r - inner, 0.0), v[:, 2]), rho, rtol=1e-6)
    volume = np.pi * inner**2 * thickness + 2 * np.pi * (inner + 4 * rho / (3 * np.pi)) * np.pi * rho**2 / 2
    area = 2 * np.pi * inner**2 + 2 * np.pi * (inner + 2 * rho / np.pi) * np.pi * rho
    assert signed_volume(v, t) == pytest.approx(volume, rel=0.01)
    assert surface_area(v, t) == pytest.approx(area, rel=0.005)


def test_revolve_is_independent_of_profile_direction_and_panel_size_is_respected():
    profile = np.array([[0, 0], [1, 0], [1, 2], [0, 2]], float)
    v1, t1 = shapes.revolve(profile, 0.1)
    v2, t2 = shapes.revolve(profile[::-1], 0.1)
    assert signed_volume(v1, t1) == pytest.approx(signed_volume(v2, t2)) and signed_volume(v1, t1) > 0
    edges = np.linalg.norm(v1[t1] - np.roll(v1[t1], 1, axis=1), axis=2)
    assert 0.07 < np.median(edges) < 0.13


def test_straight_tube_lies_on_its_cylinder_with_flat_caps():
    a, length = 0.1, 1.0
    v, t = shapes.tube([[0, 0, 0], [0, 0, 0.4], [0, 0, length]], a, 0.02)
    r = np.hypot(v[:, 0], v[:, 1])
    side = (v[:, 2] > 1e-12) & (v[:, 2] < length - 1e-12)
    np.testing.assert_allclose(r[side], a, rtol=1e-9)
    assert np.all(r <= a * (1 + 1e-9))
    assert np.isclose(v[:, 2], 0.0, atol=1e-12).sum() > 31   # cap 0 holds its rim and inner rings
    n = round(2 * np.pi * a / 0.02)
    polygon = n / 2 * a**2 * np.sin(2 * np.pi / n)
    assert signed_volume(v, t) == pytest.approx(polygon * length, rel=0.005)


def test_curved_tube_lies_on_the_swept_surface():
    """A tube along a quarter circle of radius 1 lies on the torus around that circle."""
    s = np.linspace(0.0, np.pi / 2, 2000)
    path = np.column_stack([np.cos(s), np.sin(s), 0 * s])
    a = 0.1
    v, t = shapes.tube(path, a, 0.02)
    end_caps = (np.abs(v[:, 1]) < 2e-3) | (np.abs(v[:, 0]) < 2e-3)   # end planes tilt by half a ring step
    distance = np.hypot(np.hypot(v[:, 0], v[:, 1]) - 1.0, v[:, 2])
    np.testing.assert_allclose(distance[~end_caps], a, rtol=1e-4)
    assert np.all(distance <= a * (1 + 1e-4))
    assert signed_volume(v, t) == pytest.approx(np.pi * a**2 * np.pi / 2, rel=0.02)


def test_rotation_minimising_frames_do_not_twist_on_a_plane_curve():
    s = np.linspace(0.0, np.pi, 200)
    points = np.column_stack([s, np.sin(s), 0 * s])
    tangents = np.gradient(points, axis=0)
    tangents /= np.linalg.norm(tangents, axis=1, keepdims=True)
    normals = shapes.rotation_minimising_frames(points, tangents)
    np.testing.assert_allclose(np.linalg.norm(normals, axis=1), 1.0, rtol=1e-12)
    np.testing.assert_allclose(np.einsum("ij,ij->i", normals, tangents), 0.0, atol=1e-12)
    np.testing.assert_allclose(normals[:, 2], normals[0, 2], atol=1e-12)  # keeps its angle to the plane
    assert abs(normals[0, 2]) in (0.0, 1.0)


def test_rotation_minimising_frames_turn_against_the_torsion_of_a_helix():
    """Relative to the Frenet frame, a rotation-minimising normal turns by minus the torsion
    times arc length; for the helix (R cos s, R sin s, c s), s in [0, 2 pi], that is
    -2 pi c / sqrt(R^2 + c^2) (differential geometry of space curves)."""
    big, c = 1.0, 0.4
    s = np.linspace(0.0, 2.0 * np.pi, 4001)
    points = np.column_stack([big * np.cos(s), big * np.sin(s), c * s])
    tangents = np.column_stack([-big * np.sin(s), big * np.cos(s), c + 0 * s]) / np.hypot(big, c)
    frenet_n = np.column_stack([-np.cos(s), -np.sin(s), 0 * s])
    frenet_b = np.cross(tangents, frenet_n)
    u = shapes.rotation_minimising_frames(points, tangents)
    angle = np.unwrap(np.arctan2(np.einsum("ij,ij->i", u, frenet_b), np.einsum("ij,ij->i", u, frenet_n)))
    assert angle[-1] - angle[0] == pytest.approx(-2 * np.pi * c / np.hypot(big, c), abs=1e-4)


def test_arc_path_rises_above_the_chord():
    start, end = np.array([0.0, 0.0, 1.0]), np.array([2.0, 1.0, 0.0])
    p = shapes.arc_path(start, end, 0.3, 41)
    assert p.shape == (41, 3)
    np.testing.assert_allclose(p[[0, -1]], [start, end])
    np.testing.assert_allclose(p[20], (start + end) / 2 + [0, 0, 0.3])
    chord = start + np.linspace(0, 1, 41)[:, None] * (end - start)
    assert np.all(p[1:-1, 2] > chord[1:-1, 2]) and np.allclose(p[:, :2], chord[:, :2])


@pytest.mark.parametrize("call, match", [
    (lambda: shapes.revolve([[0, 0], [1, 0], [0, 1]], -0.1), "panel_size must be a positive length"),
    (lambda: shapes.revolve([[0, 0], [1, 0]], 0.1), r"finite \(k, 2\) array"),
    (lambda: shapes.revolve([[0, 0], [-1, 0], [0, 1]], 0.1), "r = -1 < 0"),
    (lambda: shapes.revolve([[0, 0], [1, 0], [1, 1]], 0.1), "must start and end on the axis"),
    (lambda: shapes.revolve([[0, 0], [1, 0], [1, 1], [0, 0]], 0.1), "closed loop touching the z axis"),
    (lambda: shapes.revolve([[0, 0], [1, 0], [0, 1], [1, 2], [0, 3]], 0.1), "touches the z axis between"),
    (lambda: shapes.revolve([[0, 0], [1, 1], [0, 0.0]], 0.1), "closed loop touching"),
    (lambda: shapes.revolve([[0, 0], [1, 1], [1, 0], [0, 1]], 0.1), "encloses no area"),
    (lambda: shapes.torus(1.0, 1.0, 0.1), "minor_radius 1 must be below major_radius 1"),
    (lambda: shapes.rod(1.0, 1.5, 0.1), "shorter than its rounded ends"),
    (lambda: shapes.rounded_disk(1.0, 3.0, 0.1), "exceeds its diameter"),
    (lambda: shapes.arc_path([0, 0, 0], [1, 0, 0], -0.1), "height >= 0"),
    (lambda: shapes.tube([[0, 0, 0, 1]], 0.1, 0.1), r"finite \(k, 3\) array"),
    (lambda: shapes.tube([[0, 0, 0], [0, 0, 0]], 0.1, 0.1), "fewer than two distinct points"),
    (lambda: shapes.tube([[0, 0, 0], [0, 0, 1]], 0.0, 0.1), "radius must be a positive length"),
])
def test_bad_arguments_are_reported(call, match):
    with pytest.raises(OptionError, match=match):
        call()
