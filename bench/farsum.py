"""Far-field sums: the compiled direct sum against the multipole library, by size.

Prints figures; it never passes or fails. Run from the repository root:

    python bench/farsum.py [--sizes 2000,5000,10000,16000,30000,60000]

For N random points summed onto themselves (the fast operator's far field: every panel's
charge at every panel), with one density and no gradient, one with gradients (the
general system's normal-D rows), and five with gradients (five conductors in one pass):
seconds of the compiled direct sum (bem/fmm.direct_sums, all cores) and of one
fmm3dpy pass at the precision the solver asks for at tol 1e-6 (1e-4), their ratio, and
the largest difference relative to the largest value. The size where the ratio crosses
1 sets ``DIRECT_LIMIT`` in bem/fmm.py (in source-target interactions, N^2 here).
"""

from __future__ import annotations

import argparse
import time

import numpy as np

from tricharge.bem import fmm
from tricharge.bem.fmm import direct_sums


def best_of(repeats: int, function, *args):
    times, out = [], None
    for _ in range(repeats):
        t0 = time.perf_counter()
        out = function(*args)
        times.append(time.perf_counter() - t0)
    return out, min(times)


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--sizes", default="2000,5000,10000,16000,30000,60000")
    args = parser.parse_args()
    rng = np.random.default_rng(0)
    direct_sums(np.zeros((2, 3)) + [[0, 0, 0], [1, 0, 0]], np.ones((2, 1)), np.zeros((1, 3)) + 2, True)  # compile
    print(f"{'N':>7} {'densities':>9} {'gradient':>8} {'direct s':>9} {'multipole s':>11} {'ratio':>6} {'difference':>10}")
    for n in (int(s) for s in args.sizes.split(",")):
        repeats = 3 if n <= 16_000 else 1
        for k, gradient in ((1, False), (1, True), (5, True)):
            points, q = rng.normal(size=(n, 3)), rng.normal(size=(n, k))
            (phi, _), direct_s = best_of(repeats, direct_sums, points, q, points, gradient)
            (phi_m, _), multipole_s = best_of(repeats, fmm.multipole_sums, points, q, None, 1e-4, gradient)
            difference = np.abs(phi - phi_m).max() / np.abs(phi).max()
            print(f"{n:7,d} {k:9d} {gradient!s:>8} {direct_s:9.3f} {multipole_s:11.3f} "
                  f"{multipole_s / direct_s:6.2f} {difference:10.1e}", flush=True)
    print(f"DIRECT_LIMIT now: {fmm.DIRECT_LIMIT:.2g} interactions (N = {fmm.DIRECT_LIMIT ** 0.5:,.0f} onto itself)")


if __name__ == "__main__":
    main()
