"""Matrix algebra and checks of tricharge.bem.capacitance, and the field/Gauss checks."""

import numpy as np
import pytest

from tricharge import shapes
from tricharge.bem.results import FOUR_PI_EPS0, check_matrix, maxwell_from_charges, mutual_form
from tricharge.bem.fields import field_at, gauss_check, potential_at
from tricharge.bem.panels import make_panels

from helpers import solve_shape

NAMES = ["a", "b", "c"]


def test_mutual_form_puts_row_sums_on_the_diagonal():
    c = np.array([[5.0, -2.0, -1.0], [-2.0, 4.0, -0.5], [-1.0, -0.5, 3.0]])
    m = mutual_form(c)
    np.testing.assert_allclose(np.diag(m), [2.0, 1.5, 1.5])
    assert m[0, 1] == 2.0 and m[2, 1] == 0.5


def test_checks_pass_for_a_physical_matrix():
    c = np.array([[5.0, -2.0, -1.0], [-2.0, 4.0, -0.5], [-1.0, -0.5, 3.0]])
    checks = check_matrix(c, NAMES)
    assert checks.passed and checks.asymmetry == 0.0


def test_checks_report_each_violation_by_name():
    c = np.array([[5.0, 0.3, -1.0], [0.3, 4.0, -5.5], [-1.0, -5.0, 3.0]])
    checks = check_matrix(c, NAMES)
    assert checks.asymmetry == pytest.approx(0.5 / 5.0)
    assert not checks.nonpositive_offdiagonal and not checks.diagonally_dominant
    text = " | ".join(checks.problems)
    assert "positive coupling between a and b" in text
    assert "negative capacitance to the reference (row sum) on b, c" in text
    bad_diag = check_matrix(np.array([[-1.0, 0.0], [0.0, 1.0]]), ["x", "y"])
    assert "non-positive self capacitance on x" in bad_diag.problems[0]


def test_maxwell_from_charges_sums_per_conductor():
    sigma = np.array([[1.0, 0.0], [2.0, -1.0], [0.5, 3.0]])
    areas = np.array([1.0, 2.0, 4.0])
    labels = np.array([0, 0, 1])
    np.testing.assert_allclose(maxwell_from_charges(sigma, areas, labels, 2), [[5.0, -2.0], [2.0, 12.0]])


def test_sphere_field_and_potential_off_the_surface():
    """Sphere at 1 V: E = V R / r^2 and phi = V R / r outside (exact; Jackson 3rd ed., ch. 1)."""
    radius = 1.0
    result = solve_shape(*shapes.sphere(radius, 12))
    panels = make_panels(*shapes.sphere(radius, 12))
    sigma = result.sigma[:, 0]
    direction = np.array([0.3, -0.5, 0.81]) / np.linalg.norm([0.3, -0.5, 0.81])
    for r in (1.05, 1.5, 3.0):
        x = (r * direction)[None]
        e = field_at(x, panels, sigma)[0]
        assert np.linalg.norm(e) == pytest.approx(radius / r**2, rel=0.01)
        assert np.dot(e, direction) / np.linalg.norm(e) == pytest.approx(1.0, abs=1e-4)
        assert potential_at(x, panels, sigma)[0] == pytest.approx(radius / r, rel=0.01)
    np.testing.assert_allclose(potential_at(panels.centroids[:50], panels, sigma), 1.0, rtol=1e-9)


@pytest.mark.parametrize("radius", [1.05, 1.3, 2.5])
def test_gauss_law_single_sphere(radius):
    """Flux of E through a closed sphere = enclosed charge / eps0 (Gauss's law), within 1%."""
    panels = make_panels(*shapes.sphere(1.0, 10))
    sigma = solve_shape(panels.vertices, panels.triangles).sigma[:, 0]
    check = gauss_check(panels, sigma, (0.01, -0.02, 0.0), radius)
    assert abs(check.relative_error) < 0.01, check
    assert check.enclosed_charge == pytest.approx(FOUR_PI_EPS0, rel=0.01)


def test_gauss_law_around_one_of_two_conductors():
    """Only the enclosed conductor's charge counts; the other one's field has zero net flux."""
    v, t, labels = shapes.combine(shapes.sphere(1.0, 8), shapes.cube(1.0, 6, center=(3.0, 0, 0)))
    panels = make_panels(v, t)
    result = solve_shape(v, t, labels)
    sigma = result.sigma[:, 0]  # 1 V on the sphere, 0 V on the cube: the cube carries negative charge
    check = gauss_check(panels, sigma, (0, 0, 0), 1.6)
    assert abs(check.relative_error) < 0.01, check
    assert check.enclosed_charge == pytest.approx(result.capacitance[0, 0], rel=1e-6)
    around_cube = gauss_check(panels, sigma, (3.0, 0, 0), 1.2)
    assert around_cube.enclosed_charge < 0 and abs(around_cube.relative_error) < 0.01


def test_gauss_sphere_must_not_cut_panels():
    panels = make_panels(*shapes.sphere(1.0, 4))
    with pytest.raises(ValueError, match=r"the Gauss sphere \(radius 1 m\) cuts \d+ panels"):
        gauss_check(panels, np.ones(len(panels)), (0.5, 0, 0), 1.0)


def test_gauss_check_with_no_charge_inside():
    """An empty sphere encloses no charge and sees no net flux; the error is relative to the total charge."""
    panels = make_panels(*shapes.sphere(1.0, 4))
    check = gauss_check(panels, np.full(len(panels), 1e-9), (5.0, 0, 0), 1.0)
    assert check.enclosed_charge == 0.0 and abs(check.relative_error) < 1e-3
