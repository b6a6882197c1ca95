"""Running a sweep: one task per variant through any ``map``-like function, each result
saved the moment it arrives, so an interrupted sweep resumes where it stopped.

``run_sweep(sweep, store, mapper=map)`` runs serially; ``dask_mapper(client)`` runs the same
tasks on a Dask cluster (each variant one task, retried when a worker is lost), yielding
results as they complete; :func:`local_cluster` starts a cluster on this machine.
A variant that fails records its error and the sweep goes on.
"""

from __future__ import annotations

import json
import os
import time
from contextlib import contextmanager
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from ..names import printable
from .spec import Sweep


@dataclass(frozen=True)
class Task:
    """One variant to run: the sweep, its index and its parameter values (picklable)."""

    sweep: Sweep
    index: int
    values: dict


def run_variant(task: Task) -> dict:
    """Solve one variant; never raises for a bad variant: the error is the record.

    Returns {index, values, status ("done" or "failed"), seconds, and either error or the
    results: conductors, maxwell, mutual (farads), reference, method, panels, unit (the
    model's length unit), and with
    fields: potentials, peaks per part (V/m), margins}.
    """
    from ..errors import TrichargeError
    from ..pipeline import solve, solve_field
    from .variants import apply, base_model

    start = time.perf_counter()
    record = {"index": task.index, "values": task.values}
    options = dict(task.sweep.options)
    try:
        model = apply(base_model(task.sweep, task.values), task.sweep, task.values)
        result = solve(model, method=options.get("method", "auto"), tol=options.get("tol", 1e-6),
                       levels=options.get("levels", 1))
        record.update(status="done", conductors=list(result.conductors), maxwell=result.capacitance.tolist(),
                      mutual=result.mutual.tolist(), reference=result.reference, method=result.method,
                      panels=result.n_panels, unit=model.unit)
        if options.get("fields"):
            field = solve_field(model, method=options.get("method", "auto"), withstand=options.get("withstand"))
            peaks = {}
            for spot in field.spots:
                part = field.parts[spot.group]
                peaks[part] = max(peaks.get(part, 0.0), spot.field)
            record.update(potentials=dict(zip(field.conductors, field.potentials.tolist())), peaks=peaks,
                          margins={m: w / e for m, e, w in field.margins})
    except (TrichargeError, ValueError, MemoryError, OSError) as exc:
        record.update(status="failed", error=printable(exc))
    record["seconds"] = time.perf_counter() - start
    return record


class Store:
    """A sweep's results folder: ``variants/NNNNNN.json`` per finished variant (written
    atomically, never twice), and ``saved.log``, one line per save."""

    def __init__(self, folder):
        self.folder = Path(folder)
        self.variants = self.folder / "variants"

    def prepare(self) -> None:
        self.variants.mkdir(parents=True, exist_ok=True)

    def path(self, index: int) -> Path:
        return self.variants / f"{index:06d}.json"

    def finished(self, variants: list[dict]) -> dict[int, dict]:
        """Saved records of ``variants`` (index -> record); a saved record whose values are
        not this sweep's is an error (the folder belongs to another sweep)."""
        from ..errors import InputFileError

        out = {}
        for index, values in enumerate(variants):
            path = self.path(index)
            if not path.is_file():
                continue
            try:
                record = json.loads(path.read_text(encoding="utf-8"))
            except (ValueError, OSError):
                continue  # unreadable: run the variant again
            if record.get("values") != json.loads(json.dumps(values)):
                raise InputFileError(f"{printable(self.folder)}: holds results of another sweep (variant {index} had "
                                     "other values); give the sweep its own --out folder")
            out[index] = record
        return out

    def save(self, record: dict) -> None:
        from ..io.files import write_text

        write_text(self.path(record["index"]), json.dumps(record, indent=1) + "\n")
        with open(self.folder / "saved.log", "a", encoding="utf-8") as log:
            log.write(f"{record['index']} {record['status']}\n")


def run_sweep(sweep: Sweep, store: Store, *, mapper=map, progress=None) -> list[dict]:
    """Run every variant of ``sweep`` not yet in ``store`` through ``mapper(function,
    tasks)`` (``map``, an executor's ``map``, :func:`dask_mapper`), saving each record as it
    arrives; returns all records in variant order. ``progress(done, failed, remaining)``."""
    variants = sweep.variants()
    store.prepare()
    records = store.finished(variants)
    tasks = [Task(sweep, k, values) for k, values in enumerate(variants) if k not in records]
    report = progress or (lambda done, failed, remaining: None)

    def tally():
        failed = sum(r["status"] == "failed" for r in records.values())
        report(len(records) - failed, failed, len(variants) - len(records))

    tally()
    for record in mapper(run_variant, tasks):
        store.save(record)
        records[record["index"]] = record
        tally()
    return [records[k] for k in sorted(records)]


def dask_mapper(client, *, retries: int = 2):
    """A ``map``-like function running each task on ``client``'s cluster (retried up to
    ``retries`` times when a worker is lost) and yielding results as they complete."""
    from distributed import as_completed

    def mapper(function, tasks):
        tasks = list(tasks)
        if not tasks:
            return
        futures = client.map(function, tasks, retries=retries, pure=False, key=[f"variant-{t.index}-{os.getpid()}"
                                                                               for t in tasks])
        for future in as_completed(futures):
            yield future.result()
    return mapper


#: Threads each solver library may use inside one worker process: one, so that workers
#: sized to the cores do not oversubscribe them (common practice, no source).
SINGLE_THREAD = {"OMP_NUM_THREADS": "1", "OPENBLAS_NUM_THREADS": "1", "MKL_NUM_THREADS": "1",
                 "NUMBA_NUM_THREADS": "1"}


@contextmanager
def local_cluster(workers: int | None = None, *, search_path=()):
    """A Dask client on a cluster of worker processes on this machine: loopback only, no
    dashboard, one worker per core (or ``workers``), one thread each, solver libraries
    single-threaded, scratch space in a temporary folder removed afterwards;
    ``search_path`` folders are put on the workers' PYTHONPATH (for builders)."""
    import tempfile

    import dask
    from distributed import Client, LocalCluster

    count = workers or os.cpu_count() or 1
    env = dict(SINGLE_THREAD)
    path = os.pathsep.join([*map(str, search_path), os.environ.get("PYTHONPATH", "")]).strip(os.pathsep)
    if path:
        env["PYTHONPATH"] = path
    with tempfile.TemporaryDirectory(prefix="tricharge-dask-") as scratch, \
            dask.config.set({"temporary-directory": scratch}):
        cluster = LocalCluster(n_workers=count, threads_per_worker=1, processes=True, host="127.0.0.1",
                               dashboard_address=None, env=env)
        try:
            with Client(cluster) as client:
                yield client
        finally:
            cluster.close()


def as_array(records: list[dict], key: str) -> np.ndarray:
    """(V, K, K) of a matrix key ("maxwell" or "mutual") over the finished records."""
    return np.array([r[key] for r in records if r["status"] == "done"])
