"""Refinement helpers and the extrapolation arithmetic (no published values needed:
these check the algebra on sequences built to obey it; reference checks are in
tests/reference/test_convergence.py)."""

import numpy as np
import pytest

from tricharge import shapes
from tricharge.bem import convergence as cv
from tricharge.bem.capacitance import solve_capacitance
from tricharge.bem.panels import make_panels
from tricharge.bem.refinement import (onto_disk_rim, onto_ellipsoid, onto_sphere, refine_uniformly, refined_problem,
                                      split_triangles)
from tricharge.bem.problem import problem_from_arrays
from tricharge.mesh import edge_ids, edge_use, neighbour_pairs


def test_uniform_refinement_keeps_area_orientation_and_closure():
    v, t = shapes.cube(2.0, 3)
    v2, t2, parent = refine_uniformly(v, t)
    before, after = make_panels(v, t), make_panels(v2, t2)
    assert len(t2) == 4 * len(t)
    np.testing.assert_allclose(np.bincount(parent, after.areas), before.areas, rtol=1e-12)
    np.testing.assert_allclose(after.normals, before.normals[parent], atol=1e-12)
    assert np.all(edge_use(t2)[1] == 2)


@pytest.mark.parametrize("seed", [0, 1, 2])
def test_conforming_split_leaves_no_hanging_nodes(seed):
    """Random marks on a closed sphere: every edge still has exactly two triangles, each
    marked triangle is split into four (neighbours into two or three), area is conserved,
    and six rounds of it keep the worst aspect ratio bounded (3.0 measured, from 1.2)."""
    from tricharge.mesh import aspect_ratios

    v, t = shapes.sphere(1.0, 4)
    mask = np.random.default_rng(seed).random(len(t)) < 0.2
    v2, t2, parent = split_triangles(v, t, mask, conforming=True)
    assert np.all(edge_use(t2)[1] == 2)
    counts = np.bincount(parent, minlength=len(t))
    assert np.all(counts[mask] == 4) and set(np.unique(counts)) <= {1, 2, 3, 4} and 2 in counts
    np.testing.assert_allclose(make_panels(v2, t2).areas.sum(), make_panels(v, t).areas.sum(), rtol=1e-12)
    np.testing.assert_allclose(make_panels(v2, t2).normals, make_panels(v, t).normals[parent], atol=1e-12)
    rng = np.random.default_rng(seed)
    for _ in range(5):
        v2, t2, _ = split_triangles(v2, t2, rng.random(len(t2)) < 0.15, conforming=True)
    assert aspect_ratios(v2, t2).max() < 4.0 and np.all(edge_use(t2)[1] == 2)


def test_hanging_split_is_the_default():
    v, t = shapes.sphere(1.0, 2)
    mask = np.zeros(len(t), bool)
    mask[0] = True
    _, t2, _ = split_triangles(v, t, mask)
    assert len(t2) == len(t) + 3 and not np.all(edge_use(t2)[1] == 2)


def test_projections_land_on_the_exact_surfaces():
    v, t = shapes.sphere(2.0, 2, center=(1, 2, 3))
    v2, _, _ = refine_uniformly(v, t, project=onto_sphere((1, 2, 3), 2.0))
    np.testing.assert_allclose(np.linalg.norm(v2 - (1, 2, 3), axis=1), 2.0, rtol=1e-12)
    axes = np.array([3.0, 2.0, 1.0])
    v3 = onto_ellipsoid((0, 0, 0), axes)(refine_uniformly(v, t)[0], None)
    np.testing.assert_allclose(((v3 / axes) ** 2).sum(axis=1), 1.0, rtol=1e-12)
    v4, t4 = shapes.disk(1.0, 3)
    v5, _, _ = refine_uniformly(v4, t4, project=onto_disk_rim())
    r = np.hypot(v5[:, 0], v5[:, 1])
    edges, _ = edge_ids(t4)
    ends = v4[edges]  # (E, 2, 3)
    rim = np.all(np.abs(np.hypot(ends[..., 0], ends[..., 1]) - 1.0) < 1e-9, axis=1)
    assert rim.sum() == 18 and np.sum(np.abs(r - 1.0) < 1e-12) == 2 * 18  # old and new rim points
    assert np.all(r <= 1.0 + 1e-12)


def power_law(limit, a, p, sizes, b=0.0, q=0.0):
    return np.array([[[limit + a * h**p + b * h**q]] for h in sizes])


def test_richardson_recovers_limit_and_order_of_an_exact_power_law():
    sizes = 0.5 ** np.arange(3)
    e = cv.richardson(power_law(10.0, -2.0, 1.4, sizes), sizes)
    assert e.status[0, 0] == cv.EXTRAPOLATED
    assert e.order[0, 0] == pytest.approx(1.4, abs=1e-9) and e.value[0, 0] == pytest.approx(10.0, rel=1e-12)
    # the estimate is the finest level's error shrunk by one more step, or the floor
    expected = max(2.0 * 0.25**1.4 / 2**1.4, cv.FLOOR * 10.0)
    assert e.error[0, 0] == pytest.approx(expected, rel=1e-9)


def test_richardson_with_unequal_ratios():
    sizes = np.array([200.0, 520.0, 1400.0]) ** -0.5
    e = cv.richardson(power_law(3.0, 5.0, 2.3, sizes), sizes)
    assert e.order[0, 0] == pytest.approx(2.3, abs=1e-9) and e.value[0, 0] == pytest.approx(3.0, rel=1e-12)


def test_oscillating_sequence_is_not_extrapolated():
    values = np.array([[[1.0]], [[1.2]], [[1.1]]])
    e = cv.richardson(values, 0.5 ** np.arange(3))
    assert e.status[0, 0] == cv.NOT_ASYMPTOTIC and np.isnan(e.order[0, 0])
    assert e.value[0, 0] == 1.1 and e.error[0, 0] == pytest.approx(3 * 0.1)


def test_slow_sequence_is_not_extrapolated():
    sizes = 0.5 ** np.arange(3)
    e = cv.richardson(power_law(1.0, 1.0, 0.3, sizes), sizes)  # order below 0.5
    assert e.status[0, 0] == cv.NOT_ASYMPTOTIC and e.value[0, 0] == power_law(1.0, 1.0, 0.3, sizes)[-1, 0, 0]


def test_changes_below_the_solver_floor_are_settled_and_two_levels_use_the_safety_factor():
    values = np.array([[[1.0]], [[1.0 + 1e-3]], [[1.0 + 1e-3 + 1e-6]]])
    e = cv.richardson(values, 0.5 ** np.arange(3))
    assert e.status[0, 0] == cv.SETTLED and e.error[0, 0] == pytest.approx(cv.FLOOR * values[-1, 0, 0] + 1e-6)
    two = cv.richardson(values[:2], 0.5 ** np.arange(2))
    assert two.status[0, 0] == cv.TWO_LEVELS and two.error[0, 0] == pytest.approx(3e-3)


def test_richardson_rejects_bad_input():
    with pytest.raises(ValueError):
        cv.richardson(np.ones((1, 1, 1)), [1.0])
    with pytest.raises(ValueError):
        cv.richardson(np.ones((2, 1, 1)), [1.0, 2.0])


def test_study_sums_charges_back_onto_the_base_panels():
    v, t, labels = shapes.combine(shapes.sphere(1.0, 2), shapes.sphere(0.5, 2, center=(3, 0, 0)))
    study = cv.uniform_study(problem_from_arrays(v, t, labels), 2)
    r = study.result
    assert r.sigma.shape == (len(t), 2) and r.n_panels == len(t)
    np.testing.assert_array_equal(r.panel_conductor, labels)
    charges = np.array([[(r.sigma[labels == i, k] * r.panel_areas[labels == i]).sum() for k in range(2)]
                        for i in range(2)])
    np.testing.assert_allclose(0.5 * (charges + charges.T), study.matrices[-1], rtol=1e-12)  # symmetrised


def test_reductions_carry_the_error_estimate():
    v, t, labels = shapes.combine(shapes.sphere(1.0, 2), shapes.sphere(1.0, 2, center=(3, 0, 0)),
                                  shapes.sphere(1.0, 2, center=(0, 3, 0)))
    r = cv.uniform_study(problem_from_arrays(v, t, labels), 2).result
    merged = r.reduced(nets={"ab": ["c1", "c2"]})
    e = r.error_estimate
    assert merged.error_estimate[0, 0] == pytest.approx(e[:2, :2].sum())
    assert merged.error_estimate[0, 1] == pytest.approx(e[:2, 2].sum())
    grounded = r.reduced(grounded=["c2"])
    np.testing.assert_array_equal(grounded.error_estimate, e[np.ix_([0, 2], [0, 2])])
    assert "before reduction (c1, c2, c3)" in merged.study["notes"][-1] and r.study["notes"] == []


def test_adaptive_study_stops_at_the_panel_budget():
    problem = problem_from_arrays(*shapes.cube(1.0, 3), np.zeros(108, np.int64))
    study = cv.adaptive_study(problem, 1e-5, max_panels=1000)
    assert study.stop == "panel budget reached" and study.panels[-1] <= 1000
    assert "panel budget (1,000)" in study.notes[0]
    with pytest.raises(ValueError):
        cv.adaptive_study(problem, 1e-5, max_panels=200)


def test_jump_indicator_is_largest_at_edges_and_corners():
    v, t = shapes.cube(1.0, 6)
    problem = problem_from_arrays(v, t, np.zeros(len(t), np.int64))
    result = solve_capacitance(problem)
    indicator = cv.jump_indicator(problem.panels, result.sigma)
    c = np.abs(problem.panels.centroids)
    on_edge = np.sort(c, axis=1)[:, 1] > 0.5 - 1 / 6  # in a grid cell along an edge (cells 1/6 wide)
    assert indicator[on_edge].mean() > 3 * indicator[~on_edge].mean()
    marked = cv.bulk_mark(indicator)
    assert indicator[marked].sum() >= cv.BULK * indicator.sum() and indicator[marked].min() >= indicator[~marked].max()


def test_coarse_solution_carried_over_saves_iterations():
    """Warm start of the fast path from the previous level (same answer, fewer iterations;
    measured 10 -> 7 on a 12k-panel cube, 7 -> 4 on a 20k-panel sphere)."""
    problem = problem_from_arrays(*shapes.cube(1.0, 8), np.zeros(768, np.int64))
    coarse = solve_capacitance(problem, method="fast")
    fine, parent = refined_problem(problem)
    cold = solve_capacitance(fine, method="fast")
    warm = solve_capacitance(fine, method="fast", start=coarse.sigma[parent])
    assert warm.iterations < cold.iterations
    np.testing.assert_allclose(warm.capacitance, cold.capacitance, rtol=1e-5)


def test_study_reports_progress_per_level():
    stages = []
    problem = problem_from_arrays(*shapes.sphere(1.0, 2), np.zeros(80, np.int64))
    cv.uniform_study(problem, 2, progress=lambda stage, done, total: stages.append(stage))
    assert stages[0] == "level 1/2 (80 panels)" and "level 2/2 (320 panels)" in stages


@pytest.mark.slow
def test_studies_run_with_plane_dielectric_and_floating_parts():
    """A sphere in a dielectric shell over a ground plane, next to a floating sphere: both
    study kinds run (dense and fast paths), keep every panel's role, and sum the charges
    back onto the base panels."""
    core = shapes.sphere(0.5, 2, center=(0, 0, 1.5))
    shell = shapes.sphere(0.8, 2, center=(0, 0, 1.5))
    free = shapes.sphere(0.4, 2, center=(2.0, 0, 1.5))
    v, t, part = shapes.combine(core, shell, free)
    conductor = np.where(part == 0, 0, np.where(part == 2, 1, -1))
    permittivity = np.where(part == 0, 3.0, 1.0)
    contrast = np.where(part == 1, (1.0 - 3.0) / (1.0 + 3.0), 0.0)
    problem = problem_from_arrays(v, t, conductor, permittivity, contrast, floating=[False, True], ground_z=0.0)
    single = solve_capacitance(problem)
    for method in ("dense", "fast"):
        study = cv.uniform_study(problem, 3, method=method)
        assert study.result.capacitance.shape == (1, 1) and study.result.floating == ("c2",)
        assert abs(study.result.capacitance[0, 0] / single.capacitance[0, 0] - 1) < 0.05
        np.testing.assert_array_equal(study.result.panel_conductor, np.where(conductor == 0, 0, -1))
    adaptive = cv.adaptive_study(problem, 0.02, max_panels=20_000)
    assert adaptive.stop in ("accuracy reached", "panel budget reached") and len(adaptive.panels) >= 2


def test_neighbour_pairs_of_a_closed_and_an_open_mesh():
    v, t = shapes.cube(1.0, 2)
    a, b = neighbour_pairs(t)
    assert len(a) == len(t) * 3 // 2 and np.all(np.bincount(np.concatenate([a, b])) == 3)
    _, t2 = shapes.disk(1.0, 2)
    a2, _ = neighbour_pairs(t2)
    assert len(a2) == (3 * len(t2) - 12) // 2  # 12 rim edges have one triangle
