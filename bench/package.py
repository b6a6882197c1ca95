"""Package-model benchmark: the general system (dielectrics, ground plane, a floating part)
on the invented package demo and on its uniform refinements.

Prints figures; it never passes or fails. Run from the repository root:

    python bench/package.py [--levels 2] [--dense-too]

For each level (0: the demo's 7,876 panels; 1: 31,504; 2: 126,016): the fast solve's
seconds split into set-up (near field and preconditioner) and GMRES, its iterations and
seconds per iteration, one bare far-field sum over the same charges (the operator's
floor: every iteration needs one), and net1's self capacitance (Maxwell form). Below
50,000 panels also the operator applied to the preconditioner's output (what an
iteration costs besides GMRES's own bookkeeping) and its ratio to the bare sum, both as
medians of nine rounds taken in turns: single timings of a few tenths of a second vary
by 1.5x here.
With --dense-too, the dense solve of level 0 in the same run.
"""

from __future__ import annotations

import argparse
import time
from pathlib import Path

import numpy as np

from tricharge.bem import fmm
from tricharge.bem.capacitance import solve_capacitance
from tricharge.bem.factory import make_operator, make_preconditioner
from tricharge.bem.refinement import refined_problem
from tricharge.io.modelfile import load
from tricharge.pipeline import problem_of

DEMO = Path(__file__).resolve().parents[1] / "meshes" / "demo_package.toml"


def median_seconds(works: dict, runs: int) -> dict:
    """Median seconds of each callable in ``works`` over ``runs`` rounds, the callables
    taking turns within each round (so a slow spell of the machine hits all of them), each
    round starting with the next one (the first of a round measured up to 30 % slower)."""
    seconds = {name: [] for name in works}
    names = list(works)
    for round_ in range(runs):
        for name in names[round_ % len(names):] + names[: round_ % len(names)]:
            t0 = time.perf_counter()
            works[name]()
            seconds[name].append(time.perf_counter() - t0)
    return {name: float(np.median(values)) for name, values in seconds.items()}


def far_sum_works(problem, columns: int) -> dict:
    """One bare far-field sum of ``columns`` densities over the panels and their images as
    the fast general system does it at this size: the potential at conductor panels and
    the gradient at interface panels, summed directly ("direct"), and above the crossover
    also one multipole pass with gradients at the panels ("multipole"); the operator
    times both at its first sum and keeps the cheaper."""
    panels = problem.panels
    points = np.vstack([panels.centroids, problem.images.centroids]) if problem.images is not None else panels.centroids
    charges = np.random.default_rng(0).normal(size=(len(points), columns))
    conductor = problem.is_conductor_panel

    def direct():
        fmm.direct_sums(points, charges, panels.centroids[conductor], False)
        fmm.direct_sums(points, charges, panels.centroids[~conductor], True)

    works = {"direct": direct}
    if not fmm.direct_is_cheaper(len(points), len(panels)):
        works["multipole"] = lambda: fmm.multipole_sums(points, charges, panels.centroids, fmm.fmm_precision(1e-6),
                                                        True)
    return works


def bare_and_applied(problem, columns: int, small: bool) -> tuple[float, str, float]:
    """(seconds of the cheaper bare far sum, its route, seconds of the operator applied to
    the preconditioner's output, NaN unless ``small``): medians of nine interleaved
    rounds when ``small``, else one round. The operator and preconditioner are built
    afresh here (the solve does not hand them out)."""
    works = far_sum_works(problem, columns)
    if small:
        operator = make_operator(problem, method="fast", columns=columns)
        preconditioner = make_preconditioner(operator)
        x = np.random.default_rng(1).normal(size=(operator.shape[0], columns))
        operator.matmat(x)  # the first application picks the far-sum route
        works["apply"] = lambda: operator.matmat(preconditioner.matmat(x))
    seconds = median_seconds(works, 9 if small else 1)
    applied = seconds.pop("apply", float("nan"))
    route = min(seconds, key=seconds.get)
    return seconds[route], route, applied


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--levels", type=int, default=2, help="refinement levels after the demo itself")
    parser.add_argument("--dense-too", action="store_true")
    args = parser.parse_args()
    problem = problem_of(load(DEMO))
    print(f"{'panels':>8} {'method':>6} {'total s':>8} {'set-up s':>8} {'GMRES s':>8} {'iter':>4} "
          f"{'s/iter':>7} {'bare sum s':>10} {'sum route':>9} {'apply s':>7} {'ratio':>5} {'C(net1) fF':>10}")
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
            bare, route, applied = (bare_and_applied(problem, len(result.conductors), len(problem.panels) < 50_000)
                                    if method == "fast" else (float("nan"), "", float("nan")))
            print(f"{len(problem.panels):8,d} {method:>6} {total:8.1f} {assembly:8.1f} {solve:8.1f} "
                  f"{result.iterations:4d} {per:7.2f} {bare:10.2f} {route:>9} {applied:7.3f} {applied / bare:5.2f} "
                  f"{result.capacitance[0, 0] * 1e15:10.3f}",
                  flush=True)


if __name__ == "__main__":
    main()
