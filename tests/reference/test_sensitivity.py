"""Sensitivities of capacitances to moving parts, from one solve, against exact derivatives
of published series and against central differences of full solves.

The formula (tricharge/bem/sensitivity.py): dC_ij = integral of sigma_i sigma_j / eps dn dA
over the moving surfaces (the pressure sigma^2 / (2 eps) on a conductor, Jackson,
Classical Electrodynamics, 3rd ed., 1999, section 1.11, from memory). The exact
derivatives are central differences of the series themselves (smooth functions, step
1e-6: accurate to about 1e-9), not of any simulation.
"""

import numpy as np
import pytest

from tricharge import Model, shapes
from tricharge.bem.results import FOUR_PI_EPS0
from tricharge.pipeline import sensitivity, solve

from test_dielectrics import sphere_over_plane
from test_two_spheres import two_sphere_series


def _pair(c, a=1.0, b=0.6, frequency=12):
    v, t, labels = shapes.combine(shapes.sphere(a, frequency), shapes.sphere(b, frequency, center=(c, 0, 0)))
    return Model.from_arrays(v, t, labels, ("a", "b"))


def test_two_spheres_moving_along_and_across_their_axis():
    """Sphere b (radius 0.6) 2.5 from sphere a (radius 1): the derivative of every entry
    with respect to moving b along the axis equals the derivative of the bispherical series
    (Smythe, Static and Dynamic Electricity, 3rd ed., 1968, section 5.08, from memory;
    docs/references.md row 5) within 2 % (measured 0.5-0.7 %, about the solve's own error
    at 2,880 panels per sphere); across the axis the derivative is zero by symmetry."""
    c, h = 2.5, 1e-6
    model = _pair(c)
    sens = sensitivity(model, solve(model))
    b = sens.parts.index("b")
    exact = FOUR_PI_EPS0 * (two_sphere_series(1.0, 0.6, c + h) - two_sphere_series(1.0, 0.6, c - h)) / (2 * h)
    np.testing.assert_allclose(sens.translation[b, 0], exact, rtol=0.02)
    assert np.abs(sens.translation[b, 1:]).max() < 1e-3 * np.abs(exact).max()


def test_a_sphere_rising_over_a_grounded_plane():
    """dC/dh of a sphere over a grounded plane against the derivative of the image series
    (Smythe 1968 section 5.08; Maxwell 1873; docs/references.md row 6) at gap/radius 1,
    within 2 % (measured 0.37 %)."""
    from tricharge.model import Conductor

    radius, height, h = 1.0, 2.0, 1e-6
    v, t = shapes.sphere(radius, 14, center=(0.0, 0.0, height))
    model = Model(v, t, np.zeros(len(t), np.int64), ("ball",), (Conductor("ball", ("ball",)),), ground_z=0.0)
    sens = sensitivity(model, solve(model))
    exact = (sphere_over_plane(radius, height + h) - sphere_over_plane(radius, height - h)) / (2 * h)
    assert sens.translation[0, 2, 0, 0] == pytest.approx(exact, rel=0.02)
    assert abs(sens.translation[0, 0, 0, 0]) < 1e-3 * abs(exact)


def test_growing_a_sphere():
    """C = 4 pi eps0 R (Jackson 1999 ch. 1), so growing the surface outward by dR adds
    4 pi eps0 dR: within 1 % at 2,880 panels (measured 0.08 %)."""
    model = Model.from_arrays(*shapes.sphere(1.0, 12))
    sens = sensitivity(model, solve(model))
    assert sens.growth[0, 0, 0] == pytest.approx(FOUR_PI_EPS0, rel=0.01)


def _finite_difference(build, step):
    return (solve(build(step)).capacitance - solve(build(-step)).capacitance) / (2 * step)


def test_parallel_sheets_against_central_differences():
    """Two coaxial thin disks 0.3 apart (sheets: each face counts with its own charge):
    moving the upper one along the axis, against central differences of full solves
    (no published value; our own solver both ways). Within 2 % (measured below 1e-4)."""
    def build(dz):
        v, t, labels = shapes.combine(shapes.disk(1.0, 10), shapes.disk(1.0, 10, center=(0, 0, 0.3 + dz)))
        return Model.from_arrays(v, t, labels, ("lower", "upper"))

    model = build(0.0)
    sens = sensitivity(model, solve(model))
    np.testing.assert_allclose(sens.translation[sens.parts.index("upper"), 2], _finite_difference(build, 1e-3),
                               rtol=0.02)


@pytest.mark.slow
def test_a_bond_wire_of_the_package_demo_against_central_differences():
    """The package demo (mold, substrate, plane, floating paddle): moving wire2 up, every
    entry of the matrix against central differences of two full solves (our own solver
    both ways; no published value). Within 3 % on the entries it changes by more than
    0.1 % per 10 um of movement (measured: up to 2.2 %). Where a gap is narrower than the
    panels around it the one-solve derivative is less exact: for the floating paddle, whose
    panels are wider than its gap to the pads, 8-10 % (measured; see README)."""
    from pathlib import Path

    import tricharge

    path = Path(__file__).resolve().parents[2] / "meshes" / "demo_package.toml"
    model = tricharge.load(path)
    sens = sensitivity(model, solve(model))
    wire = model.surfaces.index("wire2")
    moving = np.isin(model.triangles, np.unique(model.triangles[model.surface_index == wire]))

    def build(dz):
        from dataclasses import replace

        vertices = model.vertices.copy()
        vertices[np.unique(model.triangles[model.surface_index == wire]), 2] += dz
        return replace(model, vertices=vertices)

    assert moving.any()
    fd = _finite_difference(build, 2e-6)
    computed = sens.translation[sens.parts.index("wire2"), 2]
    matters = np.abs(fd) * 1e-5 > 1e-3 * np.abs(solve(model).capacitance)
    np.testing.assert_allclose(computed[matters], fd[matters], rtol=0.03)
