"""Closed-form triangle integrals against brute-force adaptive quadrature.

The closed forms (Wilton et al., IEEE Trans. AP 32(3), 1984; Graglia, IEEE Trans. AP
41(10), 1993) are checked against two independent computations:

* scipy's adaptive 2-D quadrature (dblquad) of 1/|x - y| over the triangle, for points
  off the triangle;
* a polar decomposition around the point's projection, integrated analytically in the
  radius and adaptively in the angle, which stays accurate on and very near the panel.
"""

import numpy as np
import pytest
from scipy import integrate

from tricharge.bem.integrals import point_rule_field, point_rule_potential, triangle_field, triangle_potential
from tricharge.bem.panels import make_panels

TRI = np.array([[0.1, -0.2, 0.3], [1.3, 0.1, 0.2], [0.2, 0.9, 0.6]])


def _frame(tri):
    e1 = tri[1] - tri[0]
    e1 /= np.linalg.norm(e1)
    n = np.cross(tri[1] - tri[0], tri[2] - tri[0])
    n /= np.linalg.norm(n)
    return e1, np.cross(n, e1), n


def dblquad_potential(x, tri):
    """Adaptive 2-D quadrature over the parameter square mapped onto the triangle."""
    a, b, c = tri
    jac = np.linalg.norm(np.cross(b - a, c - a))

    def f(v, u):
        y = a + u * (b - a) + v * (c - a)
        return 1.0 / np.linalg.norm(x - y)

    return jac * integrate.dblquad(f, 0, 1, 0, lambda u: 1 - u, epsabs=1e-13, epsrel=1e-11)[0]


def dblquad_field(x, tri):
    a, b, c = tri
    jac = np.linalg.norm(np.cross(b - a, c - a))
    out = []
    for k in range(3):
        def f(v, u, k=k):
            d = x - (a + u * (b - a) + v * (c - a))
            return d[k] / np.linalg.norm(d) ** 3

        out.append(jac * integrate.dblquad(f, 0, 1, 0, lambda u: 1 - u, epsabs=1e-12, epsrel=1e-10)[0])
    return np.array(out)


def polar_potential(x, tri):
    """Sum over the three signed sub-triangles (projection, v_i, v_i+1); exact in r, adaptive in angle."""
    e1, e2, n = _frame(tri)
    h = abs(np.dot(x - tri[0], n))
    p2 = np.array([[np.dot(v - x, e1), np.dot(v - x, e2)] for v in tri])  # vertices relative to projection
    total = 0.0
    for i in range(3):
        a, b = p2[i], p2[(i + 1) % 3]
        cross = a[0] * b[1] - a[1] * b[0]
        if abs(cross) < 1e-15:
            continue  # projection on this edge's line: the sub-triangle has no area
        ta, tb = np.arctan2(a[1], a[0]), np.arctan2(b[1], b[0])
        span = (tb - ta + np.pi) % (2 * np.pi) - np.pi
        edge = b - a
        normal = np.array([edge[1], -edge[0]]) / np.linalg.norm(edge)
        dist = abs(np.dot(a, normal))
        phi_n = np.arctan2(normal[1], normal[0]) if np.dot(a, normal) > 0 else np.arctan2(-normal[1], -normal[0])

        def g(theta, dist=dist, phi_n=phi_n):
            rmax = dist / np.cos(theta - phi_n)
            return np.sqrt(rmax**2 + h**2) - h

        val = integrate.quad(g, ta, ta + span, epsabs=1e-14, epsrel=1e-12, limit=200)[0]
        total += val * np.sign(cross) * np.sign(span)
    return total


def _pts_in_frame(tri, coords):
    e1, e2, n = _frame(tri)
    return [tri[0] + a * e1 + b * e2 + c * n for a, b, c in coords]


FAR_AND_NEAR = _pts_in_frame(TRI, [(0.5, 0.3, 0.4), (0.5, 0.3, -0.05), (3.0, -2.0, 1.5), (-0.4, -0.3, 0.2),
                                   (0.6, -0.05, 0.02), (12.0, 7.0, -9.0)])
IN_PLANE = _pts_in_frame(TRI, [(0.5, 0.3, 0.0), (2.5, 0.2, 0.0), (-0.7, -0.4, 0.0), (0.6, -0.3, 0.0)])
NEAR_EDGE = _pts_in_frame(TRI, [(0.6, 1e-4, 1e-5), (0.6, -1e-6, 0.0), (0.6, 1e-7, 0.0), (0.0, 0.0, 1e-3)])


@pytest.mark.parametrize("x", FAR_AND_NEAR, ids=lambda x: np.array2string(x, precision=2))
def test_potential_matches_dblquad_off_the_panel(x):
    assert triangle_potential(x[None], TRI[None])[0] == pytest.approx(dblquad_potential(x, TRI), rel=1e-9)


@pytest.mark.parametrize("x", FAR_AND_NEAR + IN_PLANE + NEAR_EDGE, ids=lambda x: np.array2string(x, precision=2))
def test_potential_matches_polar_integration(x):
    assert triangle_potential(x[None], TRI[None])[0] == pytest.approx(polar_potential(x, TRI), rel=1e-9)


def test_self_term_at_centroid():
    c = TRI.mean(axis=0)
    assert triangle_potential(c[None], TRI[None])[0] == pytest.approx(polar_potential(c, TRI), rel=1e-10)


def test_points_on_edge_lines_and_vertices_are_finite():
    """The pitfall recorded in docs/measured.md: in-plane points on the line of an edge gave NaN."""
    a, b, c = TRI
    points = np.array([a + 1.7 * (b - a), a - 0.3 * (b - a), 0.5 * (a + b), a, b + 2 * (b - c), c])
    values = triangle_potential(points, np.repeat(TRI[None], len(points), axis=0))
    assert np.all(np.isfinite(values))
    for x, v in zip(points, values):
        assert v == pytest.approx(polar_potential(x, TRI), rel=1e-8)


@pytest.mark.parametrize("x", FAR_AND_NEAR[:4], ids=lambda x: np.array2string(x, precision=2))
def test_field_matches_dblquad(x):
    np.testing.assert_allclose(triangle_field(x[None], TRI[None])[0], dblquad_field(x, TRI), rtol=1e-8, atol=1e-10)


@pytest.mark.parametrize("x", FAR_AND_NEAR + IN_PLANE[1:], ids=lambda x: np.array2string(x, precision=2))
def test_field_is_minus_gradient_of_potential(x):
    h = 1e-6
    grad = [(triangle_potential((x + h * e)[None], TRI[None])[0] - triangle_potential((x - h * e)[None], TRI[None])[0])
            / (2 * h) for e in np.eye(3)]
    np.testing.assert_allclose(triangle_field(x[None], TRI[None])[0], -np.array(grad), rtol=1e-6, atol=1e-7)


def test_field_jumps_by_4pi_across_the_panel():
    """Just above and below the panel the normal field is +-2 pi (sigma / 2 eps0 in SI units)."""
    _, _, n = _frame(TRI)
    c = TRI.mean(axis=0)
    up, down = triangle_field(np.array([c + 1e-9 * n, c - 1e-9 * n]), np.repeat(TRI[None], 2, axis=0))
    assert np.dot(up, n) == pytest.approx(2 * np.pi, rel=1e-6)
    assert np.dot(down, n) == pytest.approx(-2 * np.pi, rel=1e-6)
    on = triangle_field(c[None], TRI[None])[0]
    assert abs(np.dot(on, n)) < 1e-12  # principal value on the panel


def test_point_rules_converge_to_closed_form_far_away():
    panels = make_panels(TRI, [[0, 1, 2]])
    x = TRI.mean(axis=0) + np.array([4.0, 3.0, 2.0])
    exact_phi = triangle_potential(x[None], TRI[None])[0]
    exact_e = triangle_field(x[None], TRI[None])[0]
    errors = []
    for degree in (1, 2, 4, 5):
        qp, qw = panels.quadrature(degree)
        errors.append(abs(point_rule_potential(x[None], qp, qw)[0] / exact_phi - 1))
        field_error = np.linalg.norm(point_rule_field(x[None], qp, qw)[0] - exact_e) / np.linalg.norm(exact_e)
        assert field_error < 3e-3
    assert errors[0] < 1e-3 and errors[-1] < 1e-7
    assert errors == sorted(errors, reverse=True)


def test_vectorised_over_many_pairs():
    rng = np.random.default_rng(1)
    corners = rng.normal(size=(7, 3, 3))
    points = rng.normal(size=(7, 3)) * 2
    batch = triangle_potential(points, corners)
    single = [triangle_potential(points[k:k + 1], corners[k:k + 1])[0] for k in range(7)]
    np.testing.assert_allclose(batch, single, rtol=1e-14)
    assert batch[3] == pytest.approx(dblquad_potential(points[3], corners[3]), rel=1e-8)
