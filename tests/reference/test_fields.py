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


@pytest.mark.parametrize("gap, frequency, peak", [pytest.param(0.1, 20, 10.67574867, marks=pytest.mark.slow),
                                                  (1.0, 12, 1.77028119)])
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


@pytest.mark.slow
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


def _sampled(model, voltages):
    from tricharge.pipeline import solve_field

    return solve_field(model, voltages)


def _radial_lines(vertices, triangles, count: int = 40):
    """Unit directions through vertices, through panel centroids, and at random."""
    centroids = vertices[triangles[:count]].mean(axis=1)
    directions = np.vstack([vertices[triangles[:count, 0]], centroids,
                            np.random.default_rng(7).normal(size=(count, 3))])
    return directions / np.linalg.norm(directions, axis=1)[:, None]


def test_field_along_radii_of_a_sphere_up_to_its_surface_and_inside():
    """Sphere of radius R at potential V: E = V R / r^2, radial, outside; potential V and
    no field inside (exact; Jackson, Classical Electrodynamics, 3rd ed., 1999, ch. 1).
    Along radial lines from 1.001 R to 10 R, through vertices (where the piecewise-constant
    layer's own field is singular), centroids and random directions: within 1 % at
    2,880 panels (measured worst 0.5 %, half of it the solve's own discretisation error),
    the first point included; and points inside are marked as such."""
    from tricharge import Model
    from tricharge.bem.evaluation import INSIDE, NEAR

    radius, volts = 0.5, 1000.0
    v, t = shapes.sphere(radius, 12)
    result = _sampled(Model.from_arrays(v, t), {"c1": volts})
    directions = _radial_lines(v, t)
    radii = radius * np.r_[1.001, 1.003, 1.01, 1.03, 1.1, 1.3, 2.0, 5.0, 10.0]
    points = (directions[:, None, :] * radii[None, :, None]).reshape(-1, 3)
    samples = result.sample(points)
    r = np.linalg.norm(points, axis=1)
    exact = volts * radius / r**2
    np.testing.assert_allclose(np.linalg.norm(samples.field, axis=1), exact, rtol=0.01)
    radial = np.einsum("pd,pd->p", samples.field, points / r[:, None]) / np.linalg.norm(samples.field, axis=1)
    assert radial.min() > 0.997  # within 4 degrees: a flat panel tilts up to h / 2R = 3 degrees from the radius
    np.testing.assert_allclose(samples.potential, volts * radius / r, rtol=0.005)
    assert (samples.where[r < radius * 1.02] == NEAR).all()  # the first points are near the surface
    inside = result.sample(directions * radius * 0.7)
    assert (inside.where == INSIDE).all() and (inside.potential == volts).all() and not inside.field.any()


def test_near_surface_error_falls_as_the_square_of_the_panel_size():
    """The near-surface field converges as fast as the solve (about O(h^2) on a smooth
    body, docs/references.md): the worst error within half a panel of a sphere's surface
    falls at least 3x when the panel size halves (4x for exact O(h^2))."""
    from tricharge import Model

    worst = []
    for frequency in (8, 16):
        v, t = shapes.sphere(1.0, frequency)
        result = _sampled(Model.from_arrays(v, t), {"c1": 1.0})
        h = result.problem.panels.sizes.mean()
        points = _radial_lines(v, t) * (1.0 + 0.05 * h)
        e = np.linalg.norm(result.sample(points).field, axis=1)
        worst.append(np.abs(e * np.linalg.norm(points, axis=1) ** 2 - 1).max())
    assert worst[0] / worst[1] > 3.0, worst


@pytest.mark.slow
def test_field_across_the_gap_of_concentric_spheres():
    """Sphere a at V inside the cavity (radius b) of a grounded thick shell: in the gap
    E = V / (r^2 (1/a - 1/b)) (Gauss's law, docs/references.md row 7); inside the sphere
    and inside the shell's metal, the conductor's potential and no field. Within 1 %
    across the whole gap, both surfaces included (worst measured 0.5 %)."""
    from tricharge import Model
    from tricharge.bem.evaluation import INSIDE

    a, b, outer, volts = 1.0, 2.0, 2.5, 100.0
    cavity_v, cavity_t = shapes.sphere(b, 16)
    v, t, labels = shapes.combine(shapes.sphere(a, 12), shapes.sphere(outer, 12), (cavity_v, cavity_t[:, ::-1]))
    model = Model.from_arrays(v, t, np.where(labels == 2, 1, labels), ("core", "shell"))
    result = _sampled(model, {"core": volts, "shell": 0.0})
    directions = _radial_lines(v, t, 20)
    radii = np.r_[1.001, np.linspace(1.05, 1.95, 10), 1.996]  # the cavity's flat panels lie 0.0015 inside r = b
    points = (directions[:, None, :] * radii[None, :, None]).reshape(-1, 3)
    samples = result.sample(points)
    r = np.linalg.norm(points, axis=1)
    np.testing.assert_allclose(np.linalg.norm(samples.field, axis=1), volts / (r**2 * (1 / a - 1 / b)), rtol=0.01)
    metal = result.sample(np.vstack([directions * 0.5, directions * 2.2]))
    assert (metal.where == INSIDE).all() and not metal.field.any()
    np.testing.assert_array_equal(metal.potential, np.r_[np.full(len(directions), volts), np.zeros(len(directions))])
