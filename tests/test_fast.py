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
from tricharge.bem.factory import make_operator
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
    # targets sitting on sources (the general system asks at the panels, not their
    # images): the library skips the coincident source as when evaluating at the sources
    at_sources, at_sources_grad = fmm.multipole_sums(sources, charges, None, 1e-6, True)
    on, on_grad = fmm.multipole_sums(sources, charges, sources[:1000], 1e-6, True)
    assert np.all(np.isfinite(on)) and np.abs(on - at_sources[:1000]).max() < 1e-6 * np.abs(on).max()
    assert np.abs(on_grad - at_sources_grad[:1000]).max() < 1e-6 * np.abs(on_grad).max()


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


@pytest.mark.smoke
def test_compiled_normal_field_kernel_matches_numpy_integrals():
    """The interface rows' near corrections (normal field, closed form within 2 panel
    sizes, Dunavant rules beyond, minus the one-point far rule) against the numpy
    integrals of the same rules, at centroids (the principal value on a panel itself)
    and at points off the surface, along tilted target normals."""
    from tricharge.bem.kernels import near_normal_field_values
    from tricharge.bem.nearfield import GENERAL_FAST_POLICY, pair_integrals

    panels = make_panels(*shapes.cube(1.0, 6, graded=True))
    rng = np.random.default_rng(5)
    targets = np.vstack([panels.centroids, panels.centroids + 0.03 * rng.normal(size=panels.centroids.shape)])
    normals = rng.normal(size=targets.shape)
    normals /= np.linalg.norm(normals, axis=1, keepdims=True)
    policy = GENERAL_FAST_POLICY
    i, j, rel = near_pairs(targets, panels, policy.corrected_within)
    compiled = near_normal_field_values(targets, normals, i, j, rel, *kernel_arrays(panels, policy), True)
    reference = np.einsum("pd,pd->p", pair_integrals(targets[i], panels, j, rel, policy, "field", minus_far=True),
                          normals[i])
    assert (rel < policy.closed_form_within).sum() > 1000 and (rel > policy.near_within).sum() > 1000
    np.testing.assert_allclose(compiled, reference, rtol=1e-11, atol=1e-12 * np.abs(reference).max())


@pytest.mark.smoke
@pytest.mark.parametrize("apart", [1e-6, 1e7])
def test_the_grid_pair_search_finds_the_pairs_the_k_d_trees_find(apart, monkeypatch):
    """The compiled grid search against the k-d tree search, as sets of (target, centre,
    distance): radii graded over four powers of two, targets inside, around and far
    outside the centres' box, and two tiny centres ``apart`` metres from each other:
    1e-6 is ten of their cubes, 1e7 too many cubes to number, so the k-d trees answer
    for that group."""
    from tricharge.bem import nearfield
    from tricharge.mesh import pairs_within

    rng = np.random.default_rng(11)
    centers = rng.uniform(-1, 1, size=(3000, 3))
    radii = 0.05 * 2.0 ** rng.uniform(0, 4, size=3000)
    centers[:2], radii[:2] = [(1.0, 0, 0), (1.0 + apart, 0, 0)], 1e-7
    targets = np.vstack([rng.uniform(-1.5, 1.5, size=(2000, 3)), [[50.0, 0, 0], [1.0 + apart, 0, 1e-8]]])
    calls = []
    monkeypatch.setattr(nearfield, "pairs_within", lambda *a: calls.append(1) or pairs_within(*a))
    found = nearfield.pairs_in_grid(targets, centers, radii)
    expected = pairs_within(targets, centers, radii)
    assert len(found[0]) == len(expected[0]) > 10_000
    assert len(calls) == (apart > 1)
    key = lambda r: np.lexsort((r[1], r[0]))  # noqa: E731
    a, b = key(found), key(expected)
    np.testing.assert_array_equal(found[0][a], expected[0][b])
    np.testing.assert_array_equal(found[1][a], expected[1][b])
    np.testing.assert_allclose(found[2][a], expected[2][b], rtol=1e-15)
    assert ((found[0] == 2001) & (found[1] == 1)).any()


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


def test_auto_picks_the_way_estimated_cheaper_and_says_why(monkeypatch):
    """A small sphere is stored (cheap, and the more accurate); an 8,000-panel one is
    matrix-free (measured for 3,920 panels: 1.3 s stored against 0.4 s, bench/auto.py);
    the choice carries its reason. A stored matrix that would not fit in memory is never
    chosen."""
    from tricharge import resources
    from tricharge.bem import cost

    small = problem_from_arrays(*shapes.sphere(1.0, 4), np.zeros(320, np.int64))
    large = problem_from_arrays(*shapes.sphere(1.0, 20), np.zeros(8000, np.int64))
    picked = {name: make_operator(problem) for name, problem in (("small", small), ("large", large))}
    assert picked["small"].method == "dense" and picked["large"].method == "fast"
    for operator in picked.values():
        seconds = operator.choice.seconds
        assert operator.choice.reason.startswith("auto: estimated ") and "stored against" in operator.choice.reason
        cheaper = min(seconds, key=seconds.get)
        assert operator.method == cheaper or seconds["dense"] <= cost.AFFORDABLE_SECONDS
    assert picked["large"].choice.seconds["dense"] > cost.AFFORDABLE_SECONDS
    assert make_operator(large, "dense").choice.reason == ""
    monkeypatch.setattr(resources, "available_memory", lambda: 1000)
    cramped = make_operator(small)
    assert cramped.method == "fast" and "would not fit in memory" in cramped.choice.reason
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
    chosen = json.loads(out.read_text())
    assert chosen["method"] == "dense" and chosen["method_reason"].startswith("auto: estimated")
    assert main(["solve", str(path), "--method", "fast", "--json", str(out), "-q"]) == 0
    given = json.loads(out.read_text())
    assert given["method"] == "fast" and given["method_reason"] == ""

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
    needed) below the measured crossover; above it the first sum goes through the
    multipole library and is timed against a direct sum over a sample of the targets,
    and later sums take the cheaper route. Every route applies the same operator, with a
    ground plane's images and a dielectric interface, so the timing never changes an
    answer beyond the multipole precision."""
    from tricharge.bem.problem import problem_from_arrays
    from tricharge.bem.system import FastSystem

    v, t, labels = shapes.combine(shapes.sphere(1.0, 6, center=(0, 0, 3.0)), shapes.sphere(2.0, 6, center=(0, 0, 3.0)))
    problem = problem_from_arrays(v, t, np.where(labels == 0, 0, -1), np.where(labels == 0, 4.0, 1.0),
                                  np.where(labels == 1, -3.0 / 5.0, 0.0), ground_z=0.0)
    x = np.random.default_rng(4).normal(size=(len(t), 2))
    below = FastSystem(problem, tol=1e-8)
    direct = below.matmat(x)
    assert below.far_route is None and not below.far_seconds  # nothing to choose below the crossover
    monkeypatch.setattr(fmm, "DIRECT_LIMIT", 0)
    monkeypatch.setattr(fmm, "MULTIPOLE_SECONDS_PER_POINT", (1.0, 1.0))  # a best case no direct sum here misses
    sure = FastSystem(problem, tol=1e-8)  # the sampled direct sum beats the library's best case: no trial
    assert np.abs(sure.matmat(x) - direct).max() < 1e-9 * np.abs(direct).max()
    assert sure.far_route == "direct" and set(sure.far_seconds) == {"direct"}
    monkeypatch.setattr(fmm, "MULTIPOLE_SECONDS_PER_POINT", (0.0, 0.0))
    system = FastSystem(problem, tol=1e-8)
    multipole = system.matmat(x)
    assert np.abs(direct - multipole).max() < 1e-6 * np.abs(direct).max()
    assert set(system.far_seconds) == {"multipole", "direct"} and min(system.far_seconds.values()) > 0
    assert system.far_route == min(system.far_seconds, key=system.far_seconds.get)
    for route in ("direct", "multipole"):
        system.far_route = route
        assert np.abs(system.matmat(x) - direct).max() < 1e-6 * np.abs(direct).max(), route


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


def test_compiled_sparse_product_equals_scipys():
    """The near corrections and local inverses are applied by a compiled CSR product over
    all cores; it must give scipy's product, for one column and several."""
    from scipy import sparse

    from tricharge.bem.sums import csr_times

    matrix = sparse.random(300, 200, density=0.05, format="csr", random_state=3)
    x = np.random.default_rng(5).normal(size=(200, 4))
    np.testing.assert_allclose(csr_times(matrix, x), matrix @ x, rtol=1e-12, atol=1e-14)
    np.testing.assert_allclose(csr_times(matrix, x[:, 1]), matrix @ x[:, 1], rtol=1e-12, atol=1e-14)
    wide = matrix.copy()
    wide.indices, wide.indptr = wide.indices.astype(np.int64), wide.indptr.astype(np.int64)
    np.testing.assert_allclose(csr_times(wide, x), matrix @ x, rtol=1e-12, atol=1e-14)
    np.testing.assert_allclose(csr_times(matrix.tocoo(), x), matrix @ x, rtol=1e-12, atol=1e-14)


def test_the_coarse_solve_on_one_thread_equals_lapacks():
    """The coarse level's LU solve is compiled on one thread (LAPACK's spinning threads
    slowed the far sums after it); it must give LAPACK's answer, pivoting included."""
    import scipy.linalg

    from tricharge.bem.coarse import lu_solve_serial

    rng = np.random.default_rng(7)
    matrix = rng.normal(size=(120, 120))
    matrix[:, 0] *= 1e-3  # pivoting matters
    b = rng.normal(size=(120, 3))
    factors = scipy.linalg.lu_factor(matrix)
    np.testing.assert_allclose(lu_solve_serial(*factors, b), scipy.linalg.lu_solve(factors, b), rtol=1e-9, atol=1e-12)
    np.testing.assert_allclose(matrix @ lu_solve_serial(*factors, b), b, atol=1e-9)
