"""Two spheres: the full 2x2 Maxwell matrix against the bispherical series.

Source: Smythe, Static and Dynamic Electricity, 3rd ed. (1968), section 5.08 (section
from memory), in the form of docs/references.md row 5, which agrees with Maxwell's
successive images to 1e-15:
    cosh U = (c^2 - a^2 - b^2) / (2ab)
    C_aa = 4 pi eps0 ab sinh U sum_{n>=0} 1 / (a sinh nU + b sinh (n+1)U)
    C_bb = the same with a and b swapped inside the sum
    C_ab = -4 pi eps0 (ab/c) sinh U sum_{n>=1} 1 / sinh nU
"""

import numpy as np
import pytest

from tricharge import shapes
from tricharge.bem.results import FOUR_PI_EPS0

from helpers import solve_shape


def two_sphere_series(a, b, c, terms=400):
    """Maxwell matrix (2, 2) in units of 4 pi eps0 (metres)."""
    u = np.arccosh((c * c - a * a - b * b) / (2 * a * b))
    n = np.arange(min(terms, int(700 / u)))  # later terms are below exp(-700): nothing, and sinh overflows
    caa = a * b * np.sinh(u) * np.sum(1.0 / (a * np.sinh(n * u) + b * np.sinh((n + 1) * u)))
    cbb = a * b * np.sinh(u) * np.sum(1.0 / (b * np.sinh(n * u) + a * np.sinh((n + 1) * u)))
    cab = -(a * b / c) * np.sinh(u) * np.sum(1.0 / np.sinh(n[1:] * u))
    return np.array([[caa, cab], [cab, cbb]])


def test_series_reproduces_the_published_sample():
    """docs/references.md sample: a = b = 1, c = 2.5 -> [[1.25302274, -0.52537346], ...]."""
    np.testing.assert_allclose(two_sphere_series(1.0, 1.0, 2.5), [[1.25302274, -0.52537346], [-0.52537346, 1.25302274]],
                               rtol=1e-8)


@pytest.mark.parametrize("a, b, c", [(1.0, 1.0, 2.5), (1.0, 0.5, 2.0)])
def test_two_spheres_matrix(a, b, c):
    """Each entry within 1%; symmetric; diagonal positive, coupling negative."""
    meshes = (shapes.sphere(a, 12, center=(0, 0, 0)), shapes.sphere(b, 12, center=(c, 0, 0)))
    v, t, labels = shapes.combine(*meshes)
    result = solve_shape(v, t, labels)
    computed = result.capacitance / FOUR_PI_EPS0
    reference = two_sphere_series(a, b, c)
    np.testing.assert_allclose(computed, reference, rtol=0.01)
    assert result.checks.passed and result.checks.asymmetry < 1e-3
    assert computed[0, 0] > 0 and computed[1, 1] > 0 and computed[0, 1] < 0
