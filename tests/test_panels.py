"""Panel geometry, Dunavant quadrature and input validation."""

import numpy as np
import pytest

from tricharge.bem.panels import QUADRATURE_RULES, make_panels
from tricharge.errors import MeshError
from tricharge.mesh import connected_components, merge_vertices

RIGHT = np.array([[0.0, 0, 0], [2, 0, 0], [0, 1, 0]])


def test_geometry_of_a_right_triangle():
    p = make_panels(RIGHT, [[0, 1, 2]])
    assert p.areas == pytest.approx([1.0])
    np.testing.assert_allclose(p.normals, [[0, 0, 1]])
    np.testing.assert_allclose(p.centroids, [[2 / 3, 1 / 3, 0]])
    assert p.sizes == pytest.approx([np.sqrt(5.0)])
    flipped = make_panels(RIGHT, [[0, 2, 1]])
    np.testing.assert_allclose(flipped.normals, [[0, 0, -1]])


@pytest.mark.parametrize("degree", sorted(QUADRATURE_RULES))
def test_dunavant_rules_integrate_monomials_exactly(degree):
    """On the unit right triangle, integral of x^a y^b = a! b! / (a + b + 2)! (exact)."""
    from math import factorial

    panels = make_panels([[0.0, 0, 0], [1, 0, 0], [0, 1, 0]], [[0, 1, 2]])
    points, weights = panels.quadrature(degree)
    x, y = points[0, :, 0], points[0, :, 1]
    for a in range(degree + 1):
        for b in range(degree + 1 - a):
            exact = factorial(a) * factorial(b) / factorial(a + b + 2)
            assert np.sum(weights[0] * x**a * y**b) == pytest.approx(exact, rel=1e-12, abs=1e-14), (a, b)


def test_dunavant_rules_are_not_exact_one_degree_higher():
    """Guards the test above: a rule of degree d must miss some monomial of degree d + 1."""
    from math import factorial

    panels = make_panels([[0.0, 0, 0], [1, 0, 0], [0, 1, 0]], [[0, 1, 2]])
    for degree in QUADRATURE_RULES:
        points, weights = panels.quadrature(degree)
        x, y = points[0, :, 0], points[0, :, 1]
        d = degree + 1
        errors = [abs(np.sum(weights[0] * x**a * y**(d - a)) - factorial(a) * factorial(d - a) / factorial(d + 2))
                  for a in range(d + 1)]
        assert max(errors) > 1e-8, degree


def test_rejects_empty_mesh():
    with pytest.raises(MeshError, match="part.stl: the mesh has no triangles"):
        make_panels(np.zeros((0, 3)), np.zeros((0, 3), int), source="part.stl")


def test_rejects_zero_area_triangle_and_names_it():
    v = np.array([[0.0, 0, 0], [1, 0, 0], [2, 0, 0], [0, 1, 0]])
    with pytest.raises(MeshError, match=r"lead\.msh: 1 degenerate .* first is #1 near \(1, 0, 0\) m"):
        make_panels(v, [[0, 1, 3], [0, 1, 2]], source="lead.msh")


def test_rejects_repeated_vertex():
    with pytest.raises(MeshError, match="degenerate"):
        make_panels(RIGHT, [[0, 1, 1]])


def test_rejects_nan_coordinates():
    v = RIGHT.copy()
    v[2, 1] = np.nan
    with pytest.raises(MeshError, match="NaN or infinite"):
        make_panels(v, [[0, 1, 2]])


def test_rejects_out_of_range_index():
    with pytest.raises(MeshError, match=r"indices must lie in 0\.\.2, found 0\.\.3"):
        make_panels(RIGHT, [[0, 1, 3]])


def test_rejects_wrong_shapes():
    with pytest.raises(MeshError, match=r"vertices must have shape \(n, 3\)"):
        make_panels(np.zeros((3, 2)), [[0, 1, 2]])
    with pytest.raises(MeshError, match=r"triangles must have shape \(m, 3\)"):
        make_panels(RIGHT, [[0, 1, 2, 0]])
    with pytest.raises(MeshError, match="must be integers"):
        make_panels(RIGHT, [[0.0, 1.0, 2.0]])


def test_merge_vertices_joins_near_duplicates_only():
    v = np.array([[0, 0, 0], [1, 0, 0], [0, 1, 0], [1, 1e-12, 0], [0, 1, 0], [1, 1, 0], [5, 5, 5]], float)
    t = np.array([[0, 1, 2], [3, 5, 4]])
    merged_v, merged_t = merge_vertices(v, t, 1e-9)
    assert len(merged_v) == 4  # the unused vertex is dropped, two pairs merged
    np.testing.assert_array_equal(merged_t, [[0, 1, 2], [1, 3, 2]])


def test_connected_components_numbered_by_lowest_triangle():
    t = np.array([[3, 4, 5], [0, 1, 2], [4, 5, 6], [1, 2, 7]])
    np.testing.assert_array_equal(connected_components(t), [0, 1, 0, 1])


def test_rejects_absurd_coordinates_before_they_overflow():
    with pytest.raises(MeshError, match=r"coordinates reach 2e\+200 m, beyond any real device"):
        make_panels(RIGHT * 1e200, [[0, 1, 2]])
