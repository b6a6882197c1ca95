"""Dense path benchmark: assembly, LU factorisation, memory and accuracy against N.

Prints figures; it never passes or fails. Each panel count runs in a fresh process so
its peak resident memory is its own. Run from the repository root:

    python bench/dense.py                 # N from ~1.3k to ~11.5k, then the CLI check
    python bench/dense.py --sizes 8 16    # sphere frequencies (panels = 20 f^2)

Columns: panels; assembly seconds; ratio of assembly to a bare ``1/cdist`` fill of the
same N x N matrix (the cheapest possible dense fill, measured in the same process);
LU factorisation seconds; peak resident memory (GiB) and the matrix alone (8 N^2
bytes); relative error of the sphere capacitance against 4 pi eps0 R (Jackson, 3rd
ed., ch. 1). Then the end-to-end ``tricharge solve`` on a ~5,000-panel sphere STL
(target: under 10 s on 2 cores).
"""

from __future__ import annotations

import argparse
import json
import resource
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np


def one_size(frequency: int) -> dict:
    import scipy.linalg
    from scipy.spatial.distance import cdist

    from tricharge import shapes
    from tricharge.bem.results import FOUR_PI_EPS0
    from tricharge.bem.operators import DenseSingleLayer
    from tricharge.bem.panels import make_panels

    panels = make_panels(*shapes.sphere(1.0, frequency))
    t0 = time.perf_counter()
    baseline = cdist(panels.centroids, panels.centroids)
    with np.errstate(divide="ignore"):
        np.divide(1.0, baseline, out=baseline)
    t_baseline = time.perf_counter() - t0
    del baseline
    t0 = time.perf_counter()
    op = DenseSingleLayer(panels)
    t_assembly = time.perf_counter() - t0
    t0 = time.perf_counter()
    lu = scipy.linalg.lu_factor(op.matrix, check_finite=False)
    t_lu = time.perf_counter() - t0
    sigma = scipy.linalg.lu_solve(lu, np.ones(len(panels)))
    capacitance = FOUR_PI_EPS0 * float(sigma @ panels.areas)
    return {
        "panels": len(panels), "assembly_s": t_assembly, "baseline_s": t_baseline, "lu_s": t_lu,
        "peak_gib": resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 2**20,
        "matrix_gib": 8 * len(panels) ** 2 / 2**30,
        "error": capacitance / FOUR_PI_EPS0 - 1.0,
    }


def cli_check(frequency: int = 16) -> tuple[int, float, str]:
    import trimesh

    from tricharge import shapes

    with tempfile.TemporaryDirectory() as tmp:
        path = Path(tmp) / "sphere.stl"
        v, t = shapes.sphere(0.01, frequency)
        trimesh.Trimesh(v, t, process=False).export(path)
        t0 = time.perf_counter()
        proc = subprocess.run([sys.executable, "-m", "tricharge", "solve", str(path), "--quiet",
                               "--json", str(Path(tmp) / "r.json")], capture_output=True, text=True)
        elapsed = time.perf_counter() - t0
        status = "ok" if proc.returncode == 0 else f"exit {proc.returncode}: {proc.stderr.strip()}"
        return len(t), elapsed, status


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    parser.add_argument("--sizes", type=int, nargs="*", default=[8, 12, 16, 20, 24],
                        help="sphere frequencies (panels = 20 f^2)")
    parser.add_argument("--one", type=int, help=argparse.SUPPRESS)
    args = parser.parse_args()
    if args.one:
        print(json.dumps(one_size(args.one)))
        return
    print(f"{'panels':>8} {'assembly s':>11} {'vs cdist':>9} {'LU s':>7} {'peak GiB':>9} {'matrix GiB':>11} "
          f"{'C error':>9}")
    for f in args.sizes:
        out = subprocess.run([sys.executable, __file__, "--one", str(f)], capture_output=True, text=True, check=True)
        r = json.loads(out.stdout)
        print(f"{r['panels']:>8} {r['assembly_s']:>11.2f} {r['assembly_s'] / r['baseline_s']:>8.1f}x "
              f"{r['lu_s']:>7.2f} {r['peak_gib']:>9.2f} {r['matrix_gib']:>11.2f} {r['error']:>+9.2e}", flush=True)
    n, elapsed, status = cli_check()
    print(f"\nend to end: tricharge solve on a {n}-panel sphere STL: {elapsed:.1f} s ({status}); target < 10 s")


if __name__ == "__main__":
    main()
