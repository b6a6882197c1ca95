"""Package-model benchmark: the general system (dielectrics, ground plane, a floating part)
on the invented package demo and on its uniform refinements.

Prints figures; it never passes or fails. Run from the repository root:

    python bench/package.py [--levels 2] [--dense-too]

For each level (0: the demo's 7,876 panels; 1: 31,504; 2: 126,016): the fast solve's
seconds split into set-up (near field and preconditioner) and GMRES, its iterations, the
seconds per iteration against one bare far-field sum over the same charges (the
operator's floor: every iteration needs one), and the capacitance of net1 to the ground
plane. With --dense-too, the dense solve of level 0 in the same run, and the ratio.
"""

from __future__ import annotations

import argparse
import time
from pathlib import Path

import numpy as np

from tricharge.bem import fmm
from tricharge.bem.capacitance import solve_capacitance
from tricharge.bem.refinement import refined_problem
from tricharge.io.modelfile import load
from tricharge.pipeline import problem_of

DEMO = Path(__file__).resolve().parents[1] / "meshes" / "demo_package.toml"


def bare_far_sum(problem, columns: int) -> tuple[float, str]:
    """Seconds of one far-field sum of ``columns`` densities over the panels and their
    images as the fast general system does it at this size: the potential at conductor
    panels and the gradient at interface panels, summed directly, or, above the
    crossover, the cheaper of that and one multipole pass with gradients at every
    point (the operator times both at its first sum and keeps the cheaper)."""
    panels = problem.panels
    points = np.vstack([panels.centroids, problem.images.centroids]) if problem.images is not None else panels.centroids
    charges = np.random.default_rng(0).normal(size=(len(points), columns))
    conductor = problem.is_conductor_panel
    t0 = time.perf_counter()
    fmm.direct_sums(points, charges, panels.centroids[conductor], False)
    fmm.direct_sums(points, charges, panels.centroids[~conductor], True)
    seconds = {"direct": time.perf_counter() - t0}
    if not fmm.direct_is_cheaper(len(points), len(panels)):
        t0 = time.perf_counter()
        fmm.multipole_sums(points, charges, panels.centroids, fmm.fmm_precision(1e-6), True)
        seconds["multipole"] = time.perf_counter() - t0
    route = min(seconds, key=seconds.get)
    return seconds[route], route


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--levels", type=int, default=2, help="refinement levels after the demo itself")
    parser.add_argument("--dense-too", action="store_true")
    args = parser.parse_args()
    problem = problem_of(load(DEMO))
    print(f"{'panels':>8} {'method':>6} {'total s':>8} {'set-up s':>8} {'GMRES s':>8} {'iter':>4} "
          f"{'s/iter':>7} {'bare sum s':>10} {'sum route':>9} {'C(net1) fF':>10}")
    for level in range(args.levels + 1):
        if level:
            problem, _ = refined_problem(problem)
        methods = ("fast", "dense") if (args.dense_too and level == 0) else ("fast",)
        for method in methods:
            t0 = time.perf_counter()
            result = solve_capacitance(problem, method=method)
            total = time.perf_counter() - t0
            assembly, solve = result.timings.get("assembly", 0.0), result.timings.get("solve", 0.0)
            per = solve / max(result.iterations, 1) if method == "fast" else float("nan")
            bare, route = bare_far_sum(problem, len(result.conductors)) if method == "fast" else (float("nan"), "")
            print(f"{len(problem.panels):8,d} {method:>6} {total:8.1f} {assembly:8.1f} {solve:8.1f} "
                  f"{result.iterations:4d} {per:7.2f} {bare:10.2f} {route:>9} {result.capacitance[0, 0] * 1e15:10.3f}",
                  flush=True)


if __name__ == "__main__":
    main()
