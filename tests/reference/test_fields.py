"""Surface fields for applied voltages against exact and published values."""

import numpy as np
import pytest

from tricharge import shapes
from tricharge.bem.capacitance import solve_voltages
from tricharge.bem.fields import edge_sharpness, field_at, hot_spots, potential_at, surface_field
from tricharge.bem.panels import make_panels
from tricharge.bem.problem import problem_from_arrays

from test_dielectrics import _shell_problem


def test_sphere_surface_and_outside_field():
    """Sphere of radius R at potential V: surface field V/R on every panel, V R / r^2
    outside (exact; Jackson, Classical Electrodynamics, 3rd ed., ch. 1). Within 1 %."""
    radius, volts = 0.5, 1000.0
    v, t = shapes.sphere(radius, 12)
    problem = problem_from_arrays(v, t, np.zeros(len(t), np.int64))
    sigma = solve_voltages(problem, [volts]).sigma
    surface = surface_field(problem, sigma)
    np.testing.assert_allclose(surface.outside, volts / radius, rtol=0.01)
    direction = np.array([0.2, 0.7, -0.5]) / np.linalg.norm([0.2, 0.7, -0.5])
    for r in (1.05, 1.5, 3.0):
        e = field_at((r * radius * direction)[None], problem.panels, sigma)[0]
        assert np.linalg.norm(e) == pytest.approx(volts * radius / (r * radius) ** 2, rel=0.01)


@pytest.mark.parametrize("gap, frequency, peak", [(0.1, 20, 10.67574867), (1.0, 12, 1.77028119)])
def test_peak_field_of_a_sphere_over_a_plane(gap, frequency, peak):
    """Sphere R = 1 m at 1 V over a grounded plane: peak surface field from the image-charge
    series (docs/references.md row 9; Maxwell 1873, Smythe 1968 section 5.08). Within 2 %."""
    v, t = shapes.sphere(1.0, frequency, center=(0.0, 0.0, 1.0 + gap))
    problem = problem_from_arrays(v, t, np.zeros(len(t), np.int64), ground_z=0.0)
    surface = surface_field(problem, solve_voltages(problem, [1.0]).sigma)
    assert surface.magnitude.max() == pytest.approx(peak, rel=0.02)
    lowest = np.argmin(problem.panels.centroids[:, 2])
    assert surface.magnitude[lowest] == pytest.approx(surface.magnitude.max(), rel=0.02)


def test_normal_field_jump_at_a_dielectric_interface():
    """Across an interface the normal D is continuous: E_out / E_in = eps_in / eps_out
    (exact boundary condition). Within 2 % on every interface panel."""
    problem = _shell_problem(1.0, 2.0, 4.0, 8, 12)
    surface = surface_field(problem, solve_voltages(problem, [1.0]).sigma)
    interface = ~problem.is_conductor_panel
    np.testing.assert_allclose(surface.outside[interface] / surface.inside[interface], 4.0, rtol=0.02)
    np.testing.assert_allclose(surface.tangential[interface], 0.0, atol=0.02 * np.abs(surface.outside).max())


@pytest.mark.parametrize("plane", [False, True])
def test_potential_off_the_centroids_equals_the_applied_voltage(plane):
    """On the conductor, away from the collocation points, the potential is the applied
    voltage (exact boundary condition) within 0.5 %. (On bodies with edges the
    piecewise-constant charge misses this by up to 2.5 % on panels at the edges, where
    the true charge is singular: measured on a cube of 768 panels.)"""
    v, t = shapes.sphere(0.5, 10, center=(0.0, 0.0, 1.0))
    problem = problem_from_arrays(v, t, np.zeros(len(t), np.int64), ground_z=0.0 if plane else None)
    sigma = solve_voltages(problem, [5.0]).sigma
    corners = problem.panels.corners
    points = 0.6 * corners[:, 0] + 0.25 * corners[:, 1] + 0.15 * corners[:, 2]
    phi = potential_at(points, problem.panels, sigma, images=problem.images)
    np.testing.assert_allclose(phi, 5.0, rtol=0.005)


def test_floating_conductor_takes_its_potential():
    """A floating shell between a 1 V core and infinity: potential from the series of
    capacitors, V_shell = (1/c) / (1/a - 1/b + 1/c) (exact, Gauss's law)."""
    from test_dielectrics import _floating_shell_problem

    excitation = solve_voltages(_floating_shell_problem(), [1.0, 0.0])
    a, b, c = 1.0, 1.5, 2.0
    assert excitation.potentials[1] == pytest.approx((1 / c) / (1 / a - 1 / b + 1 / c), rel=0.01)
    assert excitation.free_charge[1] == pytest.approx(0.0, abs=1e-6 * abs(excitation.free_charge[0]))


def test_sharp_features_are_flagged():
    cube = make_panels(*shapes.cube(1.0, 6))
    sphere = make_panels(*shapes.sphere(1.0, 8))
    assert edge_sharpness(cube).max() == pytest.approx(90.0)
    assert edge_sharpness(sphere).max() < 10.0
    field = np.linalg.norm(cube.centroids, axis=1)  # largest at the corners
    spots = hot_spots(cube, field, np.zeros(len(cube), int), top=3)
    assert [s.rank for s in spots] == [1, 2, 3] and all(s.sharp for s in spots)
    distances = [np.linalg.norm(np.subtract(a.location, b.location)) for a in spots for b in spots if a is not b]
    assert min(distances) > 3 * cube.sizes.max() * 0.99  # distinct peaks, not one corner three times


def test_refinement_tells_singular_corners_from_smooth_peaks():
    """A cube corner's field is infinite in theory (edges and corners of conductors:
    Jackson, 3rd ed., section 2.11, from memory): its panel peak must grow markedly under
    refinement, while a sphere's (uniform V/R) must not."""
    import tricharge
    from tricharge.pipeline import refine_peaks, solve_field

    changes = {}
    for name, mesh in (("cube", shapes.cube(1.0, 6)), ("sphere", shapes.sphere(1.0, 8))):
        model = tricharge.Model.from_arrays(*mesh)
        result = solve_field(model, {"c1": 1.0})
        (_, before, after), = refine_peaks(result, model)
        changes[name] = after / before - 1.0
    assert changes["cube"] > 0.3 and abs(changes["sphere"]) < 0.05, changes
