"""How good the cost estimates of ``auto`` are: estimated and measured seconds of the
stored (dense) and matrix-free (fast) solves of a few problems, in one run.

Prints figures; it never passes or fails. Run from the repository root:

    python bench/auto.py

The problems: conductors alone (a sphere, a graded cube, the header demo) and the
general system (a sphere in a dielectric shell over a ground plane, the package demo).
For each: panels, the near pairs the fast operator corrects (counted on a sample), each
way's estimate and its measured seconds, what ``auto`` picks and which was faster, and the
fast solve's set-up and GMRES seconds, iterations and right-hand sides. The
rates in bem/cost.py were fitted to these figures.
"""

from __future__ import annotations

import time
from pathlib import Path

import numpy as np

from tricharge import shapes
from tricharge.bem import cost
from tricharge.bem.capacitance import solve_capacitance
from tricharge.bem.nearfield import FAST_POLICY, GENERAL_FAST_POLICY
from tricharge.bem.problem import problem_from_arrays
from tricharge.io.modelfile import load
from tricharge.pipeline import problem_of

MESHES = Path(__file__).resolve().parents[1] / "meshes"


def problems():
    yield "sphere", problem_from_arrays(*shapes.sphere(1.0, 14), np.zeros(3920, np.int64))
    v, t = shapes.cube(1.0, 24, graded=True)
    yield "graded cube", problem_from_arrays(v, t, np.zeros(len(t), np.int64))
    yield "header demo", problem_of(load(MESHES / "demo_header.msh", unit="mm"))
    v, t, labels = shapes.combine(shapes.sphere(1.0, 12, center=(0, 0, 3.0)), shapes.sphere(2.0, 16, center=(0, 0, 3.0)))
    yield "sphere in a shell over a plane", problem_from_arrays(
        v, t, np.where(labels == 0, 0, -1), np.where(labels == 0, 4.0, 1.0), np.where(labels == 1, -3.0 / 5.0, 0.0),
        ground_z=0.0)
    yield "package demo", problem_of(load(MESHES / "demo_package.toml"))


def main() -> None:
    solve_capacitance(problem_from_arrays(*shapes.sphere(1.0, 4), np.zeros(320, np.int64)), method="fast")  # compile
    print(f"{'problem':>31} {'panels':>7} {'near pairs':>11} {'dense est':>9} {'dense s':>8} {'fast est':>9} "
          f"{'fast s':>7} {'auto':>6} {'faster':>6} {'set-up':>6} {'GMRES':>6} {'iter':>4} {'rhs':>3}")
    for name, problem in problems():
        columns = int((~problem.floating).sum())
        estimate = cost.estimate_seconds(problem, columns)
        policy = FAST_POLICY if problem.conductors_only else GENERAL_FAST_POLICY
        pairs = cost.near_pairs_estimate(problem, policy.corrected_within)
        measured, results = {}, {}
        for method in ("dense", "fast"):
            t0 = time.perf_counter()
            results[method] = solve_capacitance(problem, method=method)
            measured[method] = time.perf_counter() - t0
        fast = results["fast"]
        chosen = cost.choose(problem, columns).method
        faster = min(measured, key=measured.get)
        print(f"{name:>31} {len(problem.panels):7,d} {pairs:11,.0f} {estimate['dense']:9.2f} {measured['dense']:8.2f} "
              f"{estimate['fast']:9.2f} {measured['fast']:7.2f} {chosen:>6} {faster:>6} "
              f"{fast.timings['assembly']:6.2f} {fast.timings['solve']:6.2f} {fast.iterations:4d} {columns:3d}", flush=True)


if __name__ == "__main__":
    main()
