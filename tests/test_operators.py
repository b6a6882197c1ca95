"""Dense single-layer operator, near-pair search and the linear solvers."""

import numpy as np
import pytest
from scipy.sparse.linalg import LinearOperator, aslinearoperator

from tricharge import shapes
from tricharge.bem.integrals import triangle_potential
from tricharge.bem.nearfield import NearFieldPolicy, near_pairs
from tricharge.bem.operators import DenseSingleLayer, StoredMatrix, assemble_single_layer
from tricharge.bem.panels import make_panels
from tricharge.bem.solvers import solve_linear
from tricharge.errors import SolverError

GEOMETRIES = {
    "sphere": lambda: shapes.sphere(1.0, 6),
    "graded cube": lambda: shapes.cube(1.0, 8, graded=True),
    "disk": lambda: shapes.disk(1.0, 10),
    "close plates": lambda: shapes.combine(shapes.plate((1, 1), (10, 10)),
                                           shapes.plate((1, 1), (10, 10), center=(0, 0, 0.05)))[:2],
}


def _all_closed_form(panels):
    n = len(panels)
    i, j = np.meshgrid(np.arange(n), np.arange(n), indexing="ij")
    return triangle_potential(panels.centroids[i.ravel()], panels.corners[j.ravel()]).reshape(n, n)


@pytest.mark.parametrize("name", GEOMETRIES)
def test_dense_matrix_matches_all_closed_form(name):
    """Every entry within 2e-4 relative; the charge for 1 V within 2e-6 of the all-exact one."""
    panels = make_panels(*GEOMETRIES[name]())
    exact = _all_closed_form(panels)
    matrix = assemble_single_layer(panels.centroids, panels)
    assert np.max(np.abs(matrix - exact) / exact) < 2e-4
    ones = np.ones(len(panels))
    q_exact = np.linalg.solve(exact, ones) @ panels.areas
    q = np.linalg.solve(matrix, ones) @ panels.areas
    assert q == pytest.approx(q_exact, rel=2e-6)


def test_coarser_policy_is_less_accurate():
    """Guards the test above: a one-point far rule misses the 2e-4 entry tolerance."""
    panels = make_panels(*GEOMETRIES["graded cube"]())
    exact = _all_closed_form(panels)
    coarse = assemble_single_layer(panels.centroids, panels, NearFieldPolicy(1.0, 2.0, far_degree=1))
    assert np.max(np.abs(coarse - exact) / exact) > 2e-4


def test_policy_validation():
    with pytest.raises(ValueError, match="closed_form_within <= near_within"):
        NearFieldPolicy(closed_form_within=3.0, near_within=2.0)
    with pytest.raises(ValueError, match="degrees must be among"):
        NearFieldPolicy(near_degree=3)


def test_near_pairs_match_brute_force_on_a_graded_mesh():
    panels = make_panels(*shapes.cube(1.0, 8, graded=True))
    targets = np.random.default_rng(0).uniform(-0.7, 0.7, size=(300, 3))
    i, j, rel = near_pairs(targets, panels, 3.0)
    d = np.linalg.norm(targets[:, None, :] - panels.centroids[None], axis=2) / panels.sizes[None]
    expected = set(zip(*np.nonzero(d < 3.0)))
    assert set(zip(i.tolist(), j.tolist())) == expected
    np.testing.assert_allclose(rel, d[i, j])


def test_dense_operator_is_a_linear_operator():
    panels = make_panels(*shapes.sphere(1.0, 3))
    op = DenseSingleLayer(panels)
    assert isinstance(op, LinearOperator) and op.shape == (len(panels),) * 2
    x = np.random.default_rng(2).normal(size=(len(panels), 2))
    np.testing.assert_allclose(op.matvec(x[:, 0]), op.matrix @ x[:, 0])
    np.testing.assert_allclose(op.matmat(x), op.matrix @ x)


def test_gmres_path_agrees_with_lu():
    """Any LinearOperator without a stored matrix goes to GMRES; both give the same charges."""
    panels = make_panels(*shapes.cube(1.0, 6))
    op = DenseSingleLayer(panels)
    rhs = np.ones((len(panels), 1))
    direct = solve_linear(op, rhs)
    iterative = solve_linear(aslinearoperator(op.matrix), rhs, tol=1e-10)
    assert direct.method == "lu" and iterative.method == "gmres"
    assert iterative.converged and 0 < iterative.iterations < 100
    np.testing.assert_allclose(iterative.x, direct.x, rtol=1e-7)
    assert direct.residual < 1e-12


def test_gmres_non_convergence_raises_with_partial_result():
    panels = make_panels(*shapes.cube(1.0, 6))
    op = aslinearoperator(DenseSingleLayer(panels).matrix)
    with pytest.raises(SolverError, match="did not reach the tolerance 1e-12") as info:
        solve_linear(op, np.ones(len(panels)), tol=1e-12, maxiter=1, restart=2)
    assert info.value.partial.converged is False
    quiet = solve_linear(op, np.ones(len(panels)), tol=1e-12, maxiter=1, restart=2, raise_on_failure=False)
    assert not quiet.converged and quiet.residual > 1e-12


def test_singular_system_is_reported():
    matrix = np.ones((3, 3))
    with pytest.raises(SolverError, match="singular"):
        solve_linear(StoredMatrix(matrix), np.ones(3))
