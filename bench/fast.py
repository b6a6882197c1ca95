"""Fast path benchmark: time, memory, iterations and accuracy from 10k to 1M panels.

Prints figures; it never passes or fails. Each case runs in a fresh process so its
peak resident memory is its own. Run from the repository root:

    python bench/fast.py                      # sphere and cube, 10k to 100k panels
    python bench/fast.py --max 1000000        # all the way to 1M (long: see README)
    python bench/fast.py --shapes cube --max 30000

Columns: panels; total seconds of the capacitance solve (near field + preconditioner +
GMRES); the near-field build and preconditioner set-up; GMRES iterations; the time of
one bare ``fmm3dpy`` evaluation on the same points, charges and precision, measured in
the same process; the overhead ratio total / (iterations x bare FMM), target <= 2;
peak resident memory; and the capacitance error against the reference: the sphere
4 pi eps0 R (Jackson, Classical Electrodynamics, 3rd ed., ch. 1) and the unit cube
0.6606782 x 4 pi eps0 a (Hwang & Mascagni, J. Appl. Phys. 95, 3798, 2004).
"""

from __future__ import annotations

import argparse
import json
import resource
import subprocess
import sys
import time

import numpy as np

#: (shape, parameter, approximate panels): sphere frequency f gives 20 f^2 panels,
#: cube divisions n give 12 n^2.
CASES = [("sphere", 22), ("sphere", 39), ("sphere", 71), ("sphere", 122), ("sphere", 224),
         ("cube", 29), ("cube", 50), ("cube", 91), ("cube", 158), ("cube", 289)]
REFERENCE = {"sphere": 1.0, "cube": 0.6606782}  # capacitance / (4 pi eps0 x 1 m)


def panel_count(shape: str, parameter: int) -> int:
    return 20 * parameter**2 if shape == "sphere" else 12 * parameter**2


def one_case(shape: str, parameter: int, tol: float) -> dict:
    from tricharge import shapes
    from tricharge.bem import fmm
    from tricharge.bem.capacitance import capacitance_matrix
    from tricharge.bem.results import FOUR_PI_EPS0
    from tricharge.bem.panels import make_panels

    mesh = shapes.sphere(1.0, parameter) if shape == "sphere" else shapes.cube(1.0, parameter)
    panels = make_panels(*mesh)
    stages = {}

    def progress(stage, done, total):  # the near field starts at once, so its start is t0
        stages.setdefault(stage, time.perf_counter())

    t0 = time.perf_counter()
    result = capacitance_matrix(panels, np.zeros(len(panels), np.int64), ["body"], method="fast", tol=tol,
                                progress=progress)
    total = time.perf_counter() - t0
    charges = np.random.default_rng(0).normal(size=len(panels))
    t1 = time.perf_counter()
    fmm.multipole_sums(panels.centroids, charges[:, None], None, fmm.fmm_precision(tol), False)
    bare = time.perf_counter() - t1
    return {
        "shape": shape, "panels": len(panels), "total_s": total,
        "near_s": stages.get("preconditioner", t0) - t0,
        "preconditioner_s": stages.get("iterations", t0) - stages.get("preconditioner", t0),
        "iterations": result.iterations, "bare_fmm_s": bare,
        "peak_gib": resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 2**20,
        "error": result.capacitance[0, 0] / FOUR_PI_EPS0 / REFERENCE[shape] - 1.0,
        "converged": result.converged,
    }


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    parser.add_argument("--max", type=int, default=110_000, help="largest panel count to run")
    parser.add_argument("--shapes", nargs="*", default=["sphere", "cube"])
    parser.add_argument("--tol", type=float, default=1e-6)
    parser.add_argument("--one", nargs=2, help=argparse.SUPPRESS)
    args = parser.parse_args()
    if args.one:
        print(json.dumps(one_case(args.one[0], int(args.one[1]), args.tol)))
        return
    print(f"{'shape':>6} {'panels':>9} {'total s':>8} {'near s':>7} {'precond s':>9} {'iters':>5} "
          f"{'bare FMM s':>10} {'overhead':>8} {'peak GiB':>8} {'C error':>9}")
    for shape, parameter in CASES:
        if shape not in args.shapes or panel_count(shape, parameter) > args.max:
            continue
        proc = subprocess.run([sys.executable, __file__, "--one", shape, str(parameter), "--tol", str(args.tol)],
                              capture_output=True, text=True)
        if proc.returncode != 0:
            print(f"{shape:>6} {panel_count(shape, parameter):>9} failed: {proc.stderr.strip().splitlines()[-1]}")
            continue
        r = json.loads(proc.stdout)
        ratio = r["total_s"] / (max(r["iterations"], 1) * r["bare_fmm_s"])
        print(f"{r['shape']:>6} {r['panels']:>9,} {r['total_s']:>8.1f} {r['near_s']:>7.1f} {r['preconditioner_s']:>9.1f} "
              f"{r['iterations']:>5} {r['bare_fmm_s']:>10.2f} {ratio:>7.1f}x {r['peak_gib']:>8.2f} "
              f"{r['error']:>+9.2e}{'' if r['converged'] else '  NOT CONVERGED'}", flush=True)


if __name__ == "__main__":
    main()
