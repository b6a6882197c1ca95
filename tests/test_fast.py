"""The fast (multipole) operator against the dense one, and the fast solve end to end."""

import json

import numpy as np
import pytest

from tricharge import shapes
from tricharge.bem import fmm
from tricharge.bem.capacitance import capacitance_matrix
from tricharge.bem.results import FOUR_PI_EPS0
from tricharge.bem.integrals import point_rule_potential, triangle_potential
from tricharge.bem.kernels import near_values
from tricharge.bem.factory import AUTO_DENSE_LIMIT, make_operator
from tricharge.bem.nearfield import FAST_POLICY, kernel_arrays, near_pairs
from tricharge.bem.operators import DenseSingleLayer, FastSingleLayer
from tricharge.bem.problem import problem_from_arrays
from tricharge.bem.panels import make_panels
from tricharge.bem.preconditioners import LocalInverse
from tricharge.bem.solvers import gmres, solve_linear

from helpers import solve_shape

CLOSE_PLATES = shapes.combine(shapes.plate((1, 1), (40, 40)), shapes.plate((1, 1), (40, 40), center=(0, 0, 0.01)))
TWO_CLOSE_SPHERES = shapes.combine(shapes.sphere(1.0, 12), shapes.sphere(1.0, 12, center=(2.1, 0, 0)))
GEOMETRIES = {
    "sphere": shapes.sphere(1.0, 14),
    "cube": shapes.cube(1.0, 20),
    "thin plates 0.01 apart": CLOSE_PLATES[:2],
    "spheres 0.1 apart": TWO_CLOSE_SPHERES[:2],
}


@pytest.mark.parametrize("name", GEOMETRIES)
def test_fast_matvec_matches_dense_with_the_same_rules(name):
    """Random vectors, 3-6k panels: the multipole operator reproduces the stored matrix
    built with the same integration rules to 1e-7 at tolerance 1e-8."""
    panels = make_panels(*GEOMETRIES[name])
    fast = FastSingleLayer(panels, tol=1e-8)
    dense = DenseSingleLayer(panels, FAST_POLICY)
    x = np.random.default_rng(3).normal(size=(len(panels), 3))
    error = np.linalg.norm(fast.matmat(x) - dense.matmat(x)) / np.linalg.norm(dense.matmat(x))
    assert error < 1e-7, error
    assert np.allclose(fast.matvec(x[:, 0]), fast.matmat(x)[:, 0])


@pytest.mark.smoke
def test_direct_and_multipole_sums_agree():
    rng = np.random.default_rng(0)
    sources, charges, targets = rng.normal(size=(3000, 3)), rng.normal(size=(3000, 2)), rng.normal(size=(2500, 3))
    for points in (None, targets):
        direct, direct_grad = fmm.direct_sums(sources, charges, sources if points is None else points, True)
        multipole, multipole_grad = fmm.multipole_sums(sources, charges, points, 1e-6, True)
        assert np.abs(direct - multipole).max() < 1e-6 * np.abs(direct).max()
        assert np.abs(direct_grad - multipole_grad).max() < 1e-6 * np.abs(direct_grad).max()


def test_dipole_sums_agree_direct_and_multipole(monkeypatch):
    """The Gauss self terms of large closed interfaces go through the multipole library's
    dipoles; its sign convention must match the direct sum's."""
    rng = np.random.default_rng(1)
    points, dipoles = rng.normal(size=(2500, 3)), rng.normal(size=(2500, 3))
    multipole = fmm.dipole_sums(points, dipoles, precision=1e-9)
    monkeypatch.setattr(fmm, "DIPOLE_DIRECT_LIMIT", 1e12)
    direct = fmm.dipole_sums(points, dipoles)
    assert np.abs(direct - multipole).max() < 1e-8 * np.abs(direct).max()


@pytest.mark.smoke
def test_compiled_kernel_matches_numpy_integrals():
    panels = make_panels(*shapes.cube(1.0, 6, graded=True))
    i, j, rel = near_pairs(panels.centroids, panels, FAST_POLICY.corrected_within)
    compiled = near_values(panels.centroids, i, j, rel, *kernel_arrays(panels, FAST_POLICY), False)
    reference = np.empty(len(i))
    closed = rel < FAST_POLICY.closed_form_within
    reference[closed] = triangle_potential(panels.centroids[i[closed]], panels.corners[j[closed]])
    near = ~closed & (rel < FAST_POLICY.near_within)
    for mask, degree in ((near, 5), (~closed & ~near, 2)):
        qp, qw = panels.quadrature(degree)
        reference[mask] = point_rule_potential(panels.centroids[i[mask]], qp[j[mask]], qw[j[mask]])
    np.testing.assert_allclose(compiled, reference, rtol=1e-12)


def test_near_field_storage_grows_linearly():
    per_panel = []
    for frequency in (10, 20):
        panels = make_panels(*shapes.sphere(1.0, frequency))
        per_panel.append(FastSingleLayer(panels).near.nnz / len(panels))
    assert per_panel[1] == pytest.approx(per_panel[0], rel=0.1)  # constant per panel: O(N) in all


@pytest.mark.parametrize("name", ["sphere", "cube", "spheres 0.1 apart"])
def test_fast_capacitance_matches_dense(name):
    """Within 1e-4 relative. The two paths differ beyond 6 panel sizes: one point per
    panel (fast) against three (dense). That difference falls as (panel size)^2; it was
    1.1e-4 on the coupling of two spheres 0.1 apart at 2,000 panels each and is about
    half that at the 2,880 used here."""
    if name == "spheres 0.1 apart":
        v, t, labels = TWO_CLOSE_SPHERES
    else:
        v, t = GEOMETRIES[name]
        labels = np.zeros(len(t), np.int64)
    panels = make_panels(v, t)
    names = [f"c{k}" for k in range(labels.max() + 1)]
    dense = capacitance_matrix(panels, labels, names, method="dense")
    fast = capacitance_matrix(panels, labels, names, method="fast", tol=1e-7)
    assert fast.method == "fast" and dense.method == "dense" and fast.converged
    np.testing.assert_allclose(fast.capacitance, dense.capacitance, rtol=1e-4)


@pytest.mark.slow
def test_fast_path_on_a_mesh_too_large_for_dense():
    """Sphere with 32,000 panels (a dense matrix would need 8 GB): C = 4 pi eps0 R
    (Jackson, Classical Electrodynamics, 3rd ed., ch. 1), within 0.05 %, closer than at
    5,120 panels (-0.08 %)."""
    result = solve_shape(*shapes.sphere(1.0, 40), method="fast")
    error = result.capacitance[0, 0] / FOUR_PI_EPS0 - 1
    assert result.method == "fast" and abs(error) < 5e-4, error


@pytest.mark.slow
def test_local_inverse_cuts_iterations():
    panels = make_panels(*shapes.cube(1.0, 24))
    operator = FastSingleLayer(panels)
    rhs = np.ones((len(panels), 1))
    plain = solve_linear(operator, rhs, tol=1e-6)
    preconditioned = solve_linear(operator, rhs, tol=1e-6, preconditioner=LocalInverse(operator))
    assert preconditioned.iterations < 0.7 * plain.iterations, (preconditioned.iterations, plain.iterations)
    charge = [float(sol.x[:, 0] @ panels.areas) for sol in (plain, preconditioned)]
    assert charge[1] == pytest.approx(charge[0], rel=1e-6)


def test_lockstep_gmres_equals_column_by_column():
    panels = make_panels(*shapes.combine(shapes.plate((1, 1), (16, 16)),
                                         shapes.plate((1, 1), (16, 16), center=(0, 0, 0.05)))[:2])
    operator = FastSingleLayer(panels)
    rng = np.random.default_rng(5)
    rhs = rng.normal(size=(len(panels), 3))
    together, iterations, _ = gmres(operator, rhs, tol=1e-8)
    for c in range(3):
        alone, _, _ = gmres(operator, rhs[:, c:c + 1], tol=1e-8)
        np.testing.assert_allclose(together[:, c], alone[:, 0], rtol=1e-5, atol=1e-7 * np.abs(alone).max())
    assert iterations.shape == (3,)


def test_auto_picks_by_panel_count():
    small = problem_from_arrays(*shapes.sphere(1.0, 6), np.zeros(720, np.int64))
    large = problem_from_arrays(*shapes.sphere(1.0, 14), np.zeros(3920, np.int64))
    assert len(small.panels) <= AUTO_DENSE_LIMIT < len(large.panels)
    assert make_operator(small).method == "dense" and make_operator(large).method == "fast"
    with pytest.raises(ValueError, match="method must be auto, dense or fast"):
        make_operator(small, "quick")


def test_progress_reports_every_stage():
    seen = []
    solve_shape(*shapes.sphere(1.0, 14), method="fast", progress=lambda stage, done, total: seen.append(stage))
    assert {"near field", "preconditioner", "iterations"} <= set(seen)


def test_cli_method_in_json_and_interrupt_leaves_nothing(tmp_path, monkeypatch, capsys):
    import trimesh

    from tricharge import pipeline
    from tricharge.cli import main

    path = tmp_path / "ball.stl"
    trimesh.Trimesh(*shapes.sphere(1.0, 14), process=False).export(path)
    out = tmp_path / "r.json"
    assert main(["solve", str(path), "--json", str(out), "-q"]) == 0
    assert json.loads(out.read_text())["method"] == "fast"
    assert main(["solve", str(path), "--method", "dense", "--json", str(out), "-q"]) == 0
    assert json.loads(out.read_text())["method"] == "dense"

    def interrupted(*args, **kwargs):
        raise KeyboardInterrupt

    monkeypatch.setattr(pipeline, "solve_capacitance", interrupted)
    fresh = tmp_path / "new.json"
    assert main(["solve", str(path), "--json", str(fresh)]) == 130
    assert "interrupted; no output was written" in capsys.readouterr().err
    assert not fresh.exists() and not list(tmp_path.glob("*.tmp"))


def test_gmres_applies_the_operator_once_per_iteration_and_reports_the_true_residual():
    """No pass is spent on residual checks: the residual of a cycle comes from its Krylov
    basis (Arnoldi relation), and it matches b - A x computed afterwards."""
    from scipy.sparse.linalg import LinearOperator

    panels = make_panels(*shapes.cube(1.0, 10))
    inner = FastSingleLayer(panels)
    calls = []

    def counted(x):
        calls.append(x.shape[1])
        return inner.matmat(x)

    operator = LinearOperator(inner.shape, matmat=counted, matvec=lambda v: counted(v.reshape(-1, 1))[:, 0],
                              dtype=np.float64)
    rhs = np.ones((len(panels), 2))
    rhs[:, 1] = panels.centroids[:, 0]
    solution = solve_linear(operator, rhs, tol=1e-6, preconditioner=LocalInverse(inner), restart=4)
    assert len(calls) == solution.iterations  # restarts included: 4 per cycle, no residual passes
    true = np.linalg.norm(inner.matmat(solution.x) - rhs, axis=0) / np.linalg.norm(rhs, axis=0)
    assert solution.residual == pytest.approx(true.max(), rel=1e-3) and solution.converged



def test_general_system_far_field_direct_and_multipole_agree(monkeypatch):
    """The general system's far field is summed directly (each sum only where it is
    needed) below the measured crossover and by the multipole library above it: both
    apply the same operator, with a ground plane's images and a dielectric interface."""
    from tricharge.bem.problem import problem_from_arrays
    from tricharge.bem.system import FastSystem

    v, t, labels = shapes.combine(shapes.sphere(1.0, 6, center=(0, 0, 3.0)), shapes.sphere(2.0, 6, center=(0, 0, 3.0)))
    problem = problem_from_arrays(v, t, np.where(labels == 0, 0, -1), np.where(labels == 0, 4.0, 1.0),
                                  np.where(labels == 1, -3.0 / 5.0, 0.0), ground_z=0.0)
    x = np.random.default_rng(4).normal(size=(len(t), 2))
    direct = FastSystem(problem, tol=1e-8).matmat(x)
    monkeypatch.setattr(fmm, "DIRECT_LIMIT", 0)
    multipole = FastSystem(problem, tol=1e-8).matmat(x)
    assert np.abs(direct - multipole).max() < 1e-6 * np.abs(direct).max()


def test_pair_search_split_over_threads_finds_the_same_pairs(monkeypatch):
    """Large pair queries run in threads over slices of the targets; the pairs (and their
    distances) are those of one query over all targets, on a graded mesh."""
    from tricharge import mesh

    panels = make_panels(*shapes.cube(1.0, 8, graded=True))
    finder = mesh.PairFinder(panels.centroids, 3.0 * panels.sizes)
    monkeypatch.setattr(mesh, "PARALLEL_QUERY", 10**9)
    one = finder.query(panels.centroids)
    monkeypatch.setattr(mesh, "PARALLEL_QUERY", 1)
    monkeypatch.setattr(mesh.os, "cpu_count", lambda: 3)
    split = finder.query(panels.centroids)
    order_one, order_split = np.lexsort(one[:2]), np.lexsort(split[:2])
    for a, b in zip(one, split):
        np.testing.assert_array_equal(a[order_one], b[order_split])
    assert len(one[0]) > len(panels)
