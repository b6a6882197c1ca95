"""Error-estimate benchmark: refinement studies on the unit cube against its published
capacitance, C = 0.6606782 x 4 pi eps0 (Hwang & Mascagni, "Electrical capacitance of
the unit cube", J. Appl. Phys. 95, 3798, 2004).

Prints figures; it never passes or fails. Run from the repository root:

    python bench/accuracy.py

1. Uniform studies (three levels, 4x panels per level) from several starting meshes:
   panels, seconds, extrapolated error, estimate, whether the estimate covers the
   error, and the cost against one solve on the finest mesh and on the starting mesh,
   both measured in the same run. Target: within 0.05%, correct error bar, < 60 s.
2. Adaptive refinement to 0.5%: panels, seconds, true error and estimate; then the
   uniform mesh (single solve) that reaches the same true error, from a sequence of
   uniform cubes measured in the same run.
"""

from __future__ import annotations

import time

import numpy as np

from tricharge import shapes
from tricharge.bem.capacitance import solve_capacitance
from tricharge.bem.results import FOUR_PI_EPS0
from tricharge.bem.convergence import adaptive_study, uniform_study
from tricharge.bem.problem import problem_from_arrays

REFERENCE = 0.6606782 * FOUR_PI_EPS0


def cube_problem(divisions: int):
    v, t = shapes.cube(1.0, divisions)
    return problem_from_arrays(v, t, np.zeros(len(t), np.int64))


def timed(function, *args, **kwargs):
    t0 = time.perf_counter()
    out = function(*args, **kwargs)
    return out, time.perf_counter() - t0


def uniform_table() -> None:
    print("Uniform studies, unit cube (3 levels):")
    print(f"{'panels':>22} {'seconds':>8} {'error':>9} {'estimate':>9} {'covers':>6} {'x finest':>9} {'x start':>8}")
    for divisions in (4, 6, 8):
        study, seconds = timed(uniform_study, cube_problem(divisions), 3)
        value, estimate = study.result.capacitance[0, 0], study.result.error_estimate[0, 0]
        error = value / REFERENCE - 1
        _, start = timed(solve_capacitance, cube_problem(divisions))
        _, finest = timed(solve_capacitance, cube_problem(4 * divisions))
        levels = "/".join(str(n) for n in study.panels)
        print(f"{levels:>22} {seconds:8.1f} {error:+9.4%} {estimate / REFERENCE:9.4%} "
              f"{'yes' if abs(error) * REFERENCE <= estimate else 'NO':>6} {seconds / finest:9.2f} "
              f"{seconds / start:8.1f}")


def adaptive_table() -> None:
    print("\nAdaptive refinement to 0.5%, unit cube:")
    study, seconds = timed(adaptive_study, cube_problem(4), 0.005)
    value, estimate = study.result.capacitance[0, 0], study.result.error_estimate[0, 0]
    error = abs(value / REFERENCE - 1)
    finest_error = abs(study.matrices[-1, 0, 0] / REFERENCE - 1)
    print(f"  levels {' -> '.join(str(n) for n in study.panels)} panels, {seconds:.1f} s, {study.stop}")
    print(f"  extrapolated error {error:.4%}, estimate {estimate / REFERENCE:.4%}; "
          f"finest adaptive single solve {finest_error:.4%}")
    print("  uniform meshes, single solve:")
    needed = {}
    for divisions in (8, 12, 16, 20, 24, 32, 40, 48):
        result, t = timed(solve_capacitance, cube_problem(divisions))
        e = abs(result.capacitance[0, 0] / REFERENCE - 1)
        print(f"    {result.n_panels:7d} panels {t:6.1f} s error {e:.4%}")
        for name, target in (("extrapolated", error), ("finest", finest_error)):
            if e <= target and name not in needed:
                needed[name] = result.n_panels
    for name, target in (("extrapolated", error), ("finest", finest_error)):
        got = needed.get(name)
        print(f"  same true error as the adaptive {name} value ({target:.4%}): uniform needs "
              + (f"{got:,} panels" if got else "more than 27,648 panels")
              + f"; adaptive used {study.panels[-1]:,}")


if __name__ == "__main__":
    uniform_table()
    adaptive_table()
