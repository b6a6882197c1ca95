"""Dielectrics, the ground plane and floating conductors against exact solutions.

Each check names its source; tolerances are the issue's acceptance limits.
"""

import numpy as np
import pytest

from tricharge import shapes
from tricharge.bem.capacitance import solve_capacitance
from tricharge.bem.results import FOUR_PI_EPS0
from tricharge.bem.fields import potential_at
from tricharge.bem.problem import problem_from_arrays


def _shell_problem(a, b, eps_shell, fa=10, fb=12):
    """Conductor sphere a inside a dielectric sphere b (permittivity eps_shell) in vacuum."""
    v, t, labels = shapes.combine(shapes.sphere(a, fa), shapes.sphere(b, fb))
    conductor = np.where(labels == 0, 0, -1)
    permittivity = np.where(labels == 0, eps_shell, 1.0)
    contrast = np.where(labels == 1, (1.0 - eps_shell) / (1.0 + eps_shell), 0.0)
    return problem_from_arrays(v, t, conductor, permittivity, contrast)


def test_sphere_in_a_dielectric_shell():
    """C = 4 pi eps0 / ((1/a - 1/b)/eps_r + 1/b): exact (Gauss's law with D; e.g. Griffiths,
    Introduction to Electrodynamics, ch. 4). Within 1 %."""
    a, b, eps = 1.0, 2.0, 4.0
    result = solve_capacitance(_shell_problem(a, b, eps), method="dense")
    exact = FOUR_PI_EPS0 / ((1 / a - 1 / b) / eps + 1 / b)
    assert result.capacitance[0, 0] == pytest.approx(exact, rel=0.01)


def test_energy_from_charges_and_potentials():
    """Energy check: 1/2 V^T C V equals 1/2 sum of free charge times the potential there,
    with the potential evaluated afresh from all (free and bound) charges."""
    problem = _shell_problem(1.0, 2.0, 4.0)
    result = solve_capacitance(problem, method="dense")
    sigma = result.sigma[:, 0]
    on_conductor = problem.panel_conductor == 0
    phi = potential_at(problem.panels.centroids[on_conductor], problem.panels, sigma)
    free = 4.0 * sigma[on_conductor] * problem.panels.areas[on_conductor]
    assert 0.5 * np.sum(free * phi) == pytest.approx(0.5 * result.capacitance[0, 0] * 1.0**2, rel=1e-3)


def test_floating_shell_around_a_sphere():
    """Sphere a inside a floating thick shell (inner radius b, outer c):
    C = 4 pi eps0 / (1/a - 1/b + 1/c), exact (Gauss's law). Within 1 %."""
    a, b, c = 1.0, 1.5, 2.0
    problem = _floating_shell_problem()
    result = solve_capacitance(problem, method="dense")
    assert result.conductors == ("core",) and result.floating == ("shell",)
    assert result.capacitance[0, 0] == pytest.approx(FOUR_PI_EPS0 / (1 / a - 1 / b + 1 / c), rel=0.01)


def sphere_over_plane(radius, height, terms=2000):
    """Image-charge series, docs/references.md row 6: cosh(alpha) = h/R,
    C = 4 pi eps0 R sinh(alpha) sum_{n>=1} 1/sinh(n alpha)
    (Smythe, Static and Dynamic Electricity, 3rd ed., 1968, section 5.08, from memory)."""
    alpha = np.arccosh(height / radius)
    n = np.arange(1, terms + 1)
    n = n[n * alpha < 700]  # later terms are below 1e-300 (and sinh would overflow)
    return FOUR_PI_EPS0 * radius * np.sinh(alpha) * np.sum(1.0 / np.sinh(n * alpha))


def test_series_matches_the_published_sample():
    """docs/references.md sample: R = 1, h = 1.5 gives C / (4 pi eps0) = 1.5353705088."""
    assert sphere_over_plane(1.0, 1.5) / FOUR_PI_EPS0 == pytest.approx(1.5353705088, rel=1e-9)


@pytest.mark.parametrize("gap", [pytest.param(0.1, marks=pytest.mark.slow), 1.0, 10.0])
def test_sphere_above_a_grounded_plane(gap):
    """Gap / radius from 0.1 to 10, within 1 % of the image series."""
    radius = 1.0
    height = radius + gap
    frequency = 20 if gap < 0.5 else 12
    v, t = shapes.sphere(radius, frequency, center=(0.0, 0.0, height))
    problem = problem_from_arrays(v, t, np.zeros(len(t), np.int64), ground_z=0.0)
    result = solve_capacitance(problem, method="dense")
    assert result.reference == "ground plane"
    assert result.capacitance[0, 0] == pytest.approx(sphere_over_plane(radius, height), rel=0.01)


def _floating_shell_problem():
    inner = shapes.sphere(1.5, 12)
    shell = shapes.combine(shapes.sphere(2.0, 12), (inner[0], inner[1][:, ::-1]))[:2]
    v, t, labels = shapes.combine(shapes.sphere(1.0, 10), shell)
    return problem_from_arrays(v, t, labels, floating=[False, True], names=("core", "shell"))


@pytest.mark.parametrize("case", ["dielectric shell", pytest.param("floating shell", marks=pytest.mark.slow),
                                  pytest.param("sphere over plane", marks=pytest.mark.slow)])
def test_fast_and_dense_agree(case):
    """The matrix-free path reproduces the stored one within 1e-4 relative."""
    if case == "dielectric shell":
        problem = _shell_problem(1.0, 2.0, 4.0, 8, 12)
    elif case == "floating shell":
        problem = _floating_shell_problem()
    else:
        v, t = shapes.sphere(1.0, 16, center=(0.0, 0.0, 1.1))
        problem = problem_from_arrays(v, t, np.zeros(len(t), np.int64), ground_z=0.0)
    dense = solve_capacitance(problem, method="dense")
    fast = solve_capacitance(problem, method="fast", tol=1e-7)
    assert fast.method == "fast" and fast.converged
    np.testing.assert_allclose(fast.capacitance, dense.capacitance, rtol=1e-4)


def test_sphere_in_an_unbounded_medium():
    """C = 4 pi eps0 eps_r a (exact; e.g. Jackson, Classical Electrodynamics, 3rd ed., ch. 4, chapter from memory).
    Within 0.5 %; the background medium is one setting of the model."""
    from tricharge import Model, solve
    from tricharge.model import Conductor, Medium

    v, t = shapes.sphere(1.0, 12)
    model = Model(v, t, np.zeros(len(t), np.int64), ("ball",), (Conductor("ball", ("ball",)),),
                  media=(Medium("oil", 2.2),), background="oil")
    assert solve(model).capacitance[0, 0] == pytest.approx(FOUR_PI_EPS0 * 2.2, rel=0.005)
