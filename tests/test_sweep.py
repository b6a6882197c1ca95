"""Sweeps: variants equal direct solves of the same models, on one process or on Dask;
a lost worker loses nothing; an interrupted sweep resumes; failures are recorded;
hostile sweep files are refused before any variant runs."""

import json
import os
import signal
import threading
import time
from pathlib import Path

import numpy as np
import pytest
import trimesh

from tricharge import shapes
from tricharge.cli import main
from tricharge.io.sweepfile import read_sweep
from tricharge.pipeline import solve
from tricharge.sweep.run import Store, run_sweep
from tricharge.sweep.variants import apply, base_model, check_sweep


def _two_balls(folder: Path, frequency: int = 3) -> Path:
    v, t, _ = shapes.combine(shapes.sphere(1.0, frequency), shapes.sphere(0.5, frequency, center=(3.0, 0, 0)))
    trimesh.Trimesh(v, t, process=False).export(folder / "pair.stl")
    return folder / "pair.stl"


def _sweep_file(folder: Path, body: str, name: str = "sweep.toml", frequency: int = 3) -> Path:
    _two_balls(folder, frequency)
    (folder / name).write_text('model = "pair.stl"\nunit = "m"\n' + body)
    return folder / name


GRID = """
[parameters.gap]
move = ["c2"]
direction = [1, 0, 0]
values = [0.0, 0.5, 1.0]

[parameters.size]
scale = ["c1"]
values = [0.9, 1.1]
"""


def test_variants_equal_direct_solves_of_the_same_models(tmp_path):
    sweep = read_sweep(_sweep_file(tmp_path, GRID))
    check_sweep(sweep)
    records = run_sweep(sweep, Store(tmp_path / "out"))
    assert [r["status"] for r in records] == ["done"] * 6
    for record in records:
        model = apply(base_model(sweep, record["values"]), sweep, record["values"])
        np.testing.assert_array_equal(record["maxwell"], solve(model).capacitance)
    gaps = [r["maxwell"][0][1] for r in records if r["values"]["size"] == 0.9]
    assert -gaps[0] > -gaps[1] > -gaps[2]  # the coupling weakens as c2 moves away


@pytest.mark.smoke
def test_the_command_runs_a_small_sweep_on_a_local_cluster(tmp_path, capsys):
    """The default way: `tricharge sweep` on a local Dask cluster (one worker here), the
    same matrices as a serial run in this process."""
    pytest.importorskip("distributed", reason="the sweep extra (dask.distributed) is not installed")
    path = _sweep_file(tmp_path, "[parameters.gap]\nmove = [\"c2\"]\ndirection = [1, 0, 0]\nvalues = [0.0, 1.0]\n")
    serial = run_sweep(read_sweep(path), Store(tmp_path / "serial"))
    assert main(["sweep", str(path), "--out", str(tmp_path / "dask"), "--workers", "1", "-q"]) == 0
    for record in serial:
        saved = json.loads((tmp_path / "dask" / "variants" / f"{record['index']:06d}.json").read_text())
        np.testing.assert_allclose(saved["maxwell"], record["maxwell"], rtol=1e-12)
    assert (tmp_path / "dask" / "table.csv").read_text().count("\n") > 2


@pytest.mark.slow
def test_a_dask_sweep_equals_the_serial_one_and_survives_a_lost_worker(tmp_path):
    """Two worker processes; one is killed while variants run. Every variant is saved
    exactly once, and the matrices equal a serial run's to the last digits (the workers'
    linear algebra runs on one thread, the serial run's on two: rounding may differ in the
    sixteenth digit)."""
    pytest.importorskip("distributed")
    from tricharge.sweep.run import dask_mapper, local_cluster

    sweep = read_sweep(_sweep_file(tmp_path, GRID, frequency=10))  # about 2 s per variant here
    serial = run_sweep(sweep, Store(tmp_path / "serial"))
    store = Store(tmp_path / "dask")
    killed = []
    with local_cluster(2) as client:
        pids = list(client.run(os.getpid).values())
        killer = threading.Thread(target=_kill_after_first_save, args=(store, pids[0], killed))
        killer.start()
        records = run_sweep(sweep, store, mapper=dask_mapper(client))
        killer.join()
    assert killed and killed[0] < 6  # a worker died while variants were still running
    saves = (tmp_path / "dask" / "saved.log").read_text().split()
    assert sorted(int(k) for k in saves[::2]) == list(range(6))  # each variant saved once
    for a, b in zip(serial, records):
        assert a["values"] == b["values"]
        np.testing.assert_allclose(a["maxwell"], b["maxwell"], rtol=1e-12)


def _kill_after_first_save(store, pid, killed):
    log = store.folder / "saved.log"
    for _ in range(6000):
        if log.exists() and log.read_text().strip():
            os.kill(pid, signal.SIGKILL)
            killed.append(len(log.read_text().split()) // 2)
            return
        time.sleep(0.01)


def test_an_interrupted_sweep_resumes_without_redoing_saved_variants(tmp_path):
    sweep = read_sweep(_sweep_file(tmp_path, GRID))
    store = Store(tmp_path / "out")

    def interrupted(function, tasks):
        for k, task in enumerate(tasks):
            if k == 2:
                raise KeyboardInterrupt
            yield function(task)

    with pytest.raises(KeyboardInterrupt):
        run_sweep(sweep, store, mapper=interrupted)
    ran = []

    def counting(function, tasks):
        for task in tasks:
            ran.append(task.index)
            yield function(task)

    records = run_sweep(sweep, store, mapper=counting)
    assert ran == [2, 3, 4, 5] and len(records) == 6


def test_a_failing_variant_is_recorded_and_the_sweep_goes_on(tmp_path):
    """Moving c2 into c1 makes the two cross: that variant fails with the model's own
    message, the others are solved."""
    sweep = read_sweep(_sweep_file(tmp_path, """
[parameters.gap]
move = ["c2"]
direction = [-1, 0, 0]
values = [0.0, 2.0, 0.5]
"""))
    records = run_sweep(sweep, Store(tmp_path / "out"))
    assert [r["status"] for r in records] == ["done", "failed", "done"]
    assert "touch" in records[1]["error"] or "cross" in records[1]["error"]


def test_random_samples_are_reproducible_by_seed(tmp_path):
    body = """
[sweep]
samples = 5
seed = 11

[parameters.wobble]
move = ["c2"]
direction = [0, 1, 0]
normal = { mean = 0.0, sd = 0.1 }
"""
    first = read_sweep(_sweep_file(tmp_path, body)).variants()
    again = read_sweep(_sweep_file(tmp_path, body, "again.toml")).variants()
    assert first == again and len(first) == 5 and len({v["wobble"] for v in first}) == 5


def test_a_builder_of_the_users_makes_each_variant(tmp_path, capsys):
    (tmp_path / "my_shapes.py").write_text(
        "from tricharge import Model, shapes\n"
        "def build(values):\n"
        "    v, t, labels = shapes.combine(shapes.sphere(1.0, 3), shapes.sphere(1.0, 3, center=(values['d'], 0, 0)))\n"
        "    return Model.from_arrays(v, t, labels, ('left', 'right'))\n")
    (tmp_path / "sweep.toml").write_text('builder = "my_shapes:build"\n[parameters.d]\nvalues = [3.0, 4.0]\n')
    assert main(["sweep", str(tmp_path / "sweep.toml"), "--out", str(tmp_path / "out"), "--serial", "-q"]) == 0
    rows = (tmp_path / "out" / "table.csv").read_text().splitlines()
    assert rows[0].startswith("variant,d,quantity") and any(",left,right," in r for r in rows)


@pytest.mark.parametrize("body, message", [
    ("[parameters.gap]\nmove = [\"c9\"]\ndirection = [1, 0, 0]\nvalues = [1.0]\n", "names part 'c9'"),
    ("[parameters.gap]\nmove = [\"c2\"]\ndirection = [1, 0, 0]\nvalues = []\n", "must be a non-empty list"),
    ("[parameters.gap]\nmove = [\"c2\"]\ndirection = [1, 0, 0]\nfrom = 0.0\nto = 1.0\nsteps = 0\n",
     "'parameters.gap.steps' must be a whole number"),
    ("[parameters.gap]\nmove = [\"c2\"]\ndirections = [1, 0, 0]\nvalues = [1.0]\n",
     "unknown key 'parameters.gap.directions'; did you mean 'direction'?"),
    ("[parameters.gap]\nmove = [\"c2\"]\nvalues = [1.0]\n", "give direction"),
    ("[parameters.eps]\npermittivity = \"oil\"\nvalues = [2.0]\n", "names medium 'oil'"),
    ("[parameters.v]\nvolts = \"c1\"\nvalues = [\"12 kA\"]\n", "cannot read '12 kA' as V"),
    ("builder = \"no_such_module:build\"\n[parameters.d]\nvalues = [1.0]\n", "cannot be imported"),
    ("builder = \"os.system('ls')\"\n[parameters.d]\nvalues = [1.0]\n", "'builder' must be module:function"),
    ("[parameters.d]\nvalues = [1.0]\n", "changes nothing"),
    ("[sweep]\ncombine = \"together\"\n[parameters.a]\nmove = [\"c2\"]\ndirection = [1, 0, 0]\nvalues = [1.0]\n"
     "[parameters.b]\nscale = [\"c1\"]\nvalues = [1.0, 2.0]\n", "needs the same number of values"),
    ("[parameters.a]\nscale = [\"c1\"]\nnormal = { mean = 1.0, sd = 0.1 }\n", "needs samples = N"),
    ("[sweep]\ncombine = \"grid\"\n[parameters.a]\nscale = [\"c1\"]\nnormal = { mean = 1.0, sd = 0.1 }\n",
     "set sweep.combine = \"random\""),
    ("[parameters.a]\nscale = [\"c1\"]\nvalues = [0.0]\n", "scales by a factor <= 0"),
    ("[parameters]\n", "needs at least one parameter"),
    ("[parameters.a]\nscale = [\"c1\"]\nvalues = [[[[[[1]]]]]]\n", "must be a number"),
])
def test_hostile_sweep_files_are_refused_before_any_variant(tmp_path, capsys, body, message):
    path = _sweep_file(tmp_path, body)
    assert main(["sweep", str(path), "--out", str(tmp_path / "out"), "--serial"]) == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and message in err, err
    assert not (tmp_path / "out").exists()


def test_the_sweep_table_and_page(tmp_path):
    path = _sweep_file(tmp_path, GRID)
    page = tmp_path / "sweep.html"
    assert main(["sweep", str(path), "--out", str(tmp_path / "out"), "--serial", "-q", "--html", str(page)]) == 0
    rows = (tmp_path / "out" / "table.csv").read_text().splitlines()
    assert rows[0] == "variant,gap,size,quantity,a,b,value,unit,status,error"
    assert len(rows) == 1 + 6 * 6  # 6 variants x (3 Maxwell + 3 mutual entries)
    assert page.read_text().count("data:image/png;base64,") == 2
    saved = json.loads((tmp_path / "out" / "variants" / "000000.json").read_text())
    assert saved["values"] == {"gap": 0.0, "size": 0.9} and saved["status"] == "done"


def test_the_example_sweep_file_is_valid():
    """meshes/sweep_package.toml, shown in the README: read and checked (not solved)."""
    sweep = read_sweep(Path(__file__).resolve().parents[1] / "meshes" / "sweep_package.toml")
    check_sweep(sweep)
    assert len(sweep.variants()) == 6 and {p.name for p in sweep.parameters} == {"mold_eps", "sag"}
