"""Sweep benchmark: the same variants run serially and on a local Dask cluster.

Prints figures; it never passes or fails. Run from the repository root with the sweep
extra installed (pip install -e ".[sweep]"):

    python bench/sweep.py [--variants 8] [--workers 2]

The variants move one pin of the header demo (3,208 panels) in even steps. Measured in
the same run: the serial wall time (one process, the solver free to use every core), the
Dask wall time on `--workers` single-threaded worker processes, their ratio, and the
overhead per variant on Dask: the workers' busy time (the variants' wall time on Dask
times the workers) less the time the variants spent solving there (each record's own
seconds), over the variants: scheduling, sending tasks and results, saving, and idle
workers at the end. The solve time per variant on one thread and in the serial run is
printed too (a single-threaded solve is slower than one on every core).
"""

from __future__ import annotations

import argparse
import tempfile
import time
from pathlib import Path

import numpy as np

from tricharge.io.sweepfile import read_sweep
from tricharge.sweep.run import Store, dask_mapper, local_cluster, run_sweep

DEMO = Path(__file__).resolve().parents[1] / "meshes" / "demo_header.msh"


def sweep_file(folder: Path, variants: int, method: str) -> Path:
    path = folder / "sweep.toml"
    path.write_text(f'model = "{DEMO.as_posix()}"\nunit = "mm"\n\n'
                    f'[sweep]\nmethod = "{method}"\n\n'
                    '[parameters.shift]\nmove = ["pin1"]\ndirection = [0, 0, 1]\n'
                    f'from = 0.0\nto = 0.1\nsteps = {variants}\n')
    return path


def timed(function, *args, **kwargs):
    t0 = time.perf_counter()
    out = function(*args, **kwargs)
    return out, time.perf_counter() - t0


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--variants", type=int, default=8)
    parser.add_argument("--workers", type=int, default=2)
    parser.add_argument("--method", choices=["dense", "fast"], default="dense")
    args = parser.parse_args()
    with tempfile.TemporaryDirectory() as scratch:
        folder = Path(scratch)
        sweep = read_sweep(sweep_file(folder, args.variants, args.method))
        serial, serial_s = timed(run_sweep, sweep, Store(folder / "serial"))
        t0 = time.perf_counter()
        with local_cluster(args.workers) as client:
            started_s = time.perf_counter() - t0
            parallel, run_s = timed(run_sweep, sweep, Store(folder / "dask"), mapper=dask_mapper(client))
        dask_s = time.perf_counter() - t0
    differ = max(float(np.max(np.abs(np.subtract(a["maxwell"], b["maxwell"])) / np.max(np.abs(a["maxwell"]))))
                 for a, b in zip(serial, parallel))
    solving = sum(r["seconds"] for r in parallel)
    overhead = (run_s * args.workers - solving) / args.variants
    print(f"{args.variants} variants of the header demo (3,208 panels), {args.method} solves")
    print(f"serial (one process, all cores):   {serial_s:7.1f} s  ({serial_s / args.variants:.2f} s per variant)")
    print(f"Dask, {args.workers} workers x 1 thread:      {dask_s:7.1f} s  (cluster start {started_s:.1f} s, "
          f"variants {run_s:.1f} s)")
    print(f"speed-up serial / Dask:            {serial_s / dask_s:7.2f}x")
    print(f"solve per variant: {solving / args.variants:.2f} s on one thread (Dask), "
          f"{sum(r['seconds'] for r in serial) / args.variants:.2f} s on every core (serial)")
    print(f"overhead per variant on Dask:      {overhead:7.2f} s (scheduling, transfer, saving, idle workers)")
    print(f"largest difference from the serial matrices: {differ:.1e} of the largest entry "
          "(one thread against two: rounding)")


if __name__ == "__main__":
    main()
