"""Exports: SPICE checked with a real simulator, matrix files and VTU read back, matrix
reductions proved against direct solves, atomic writes."""

import json
import os
import re
import shutil
import subprocess

import meshio
import numpy as np
import pytest
import trimesh

from tricharge import Model, shapes, solve
from tricharge.bem.capacitance import solve_voltages
from tricharge.bem.results import ground_conductors, merge_conductors
from tricharge.cli import main
from tricharge.errors import TrichargeError
from tricharge.io.spice import legal_names, spice_value, subcircuit
from tricharge.pipeline import problem_of


def _three_bodies():
    return shapes.combine(shapes.cube(1.0, 4), shapes.sphere(0.6, 5, center=(1.8, 0, 0)),
                          shapes.cube(0.8, 4, center=(0.2, 1.7, 0.3)))


@pytest.fixture(scope="module")
def solved(tmp_path_factory):
    """A three-conductor mesh solved through the CLI with every export."""
    folder = tmp_path_factory.mktemp("export")
    v, t, _ = _three_bodies()
    mesh = folder / "trio.stl"
    trimesh.Trimesh(v, t, process=False).export(mesh)
    files = {k: folder / f"trio.{k}" for k in ("json", "cir", "csv", "npz", "vtu")}
    assert main(["solve", str(mesh), "--unit", "mm", "-q", "--method", "dense", "--json", str(files["json"]),
                 "--spice", str(files["cir"]), "--csv", str(files["csv"]), "--npz", str(files["npz"]),
                 "--vtu", str(files["vtu"])]) == 0
    return folder, files, json.loads(files["json"].read_text())


def _ngspice_or_skip():
    if shutil.which("ngspice") is None:
        if os.environ.get("TRICHARGE_REQUIRE_NGSPICE"):
            pytest.fail("ngspice is required here (TRICHARGE_REQUIRE_NGSPICE is set) but not installed")
        pytest.skip("ngspice not installed: apt-get install -y ngspice")


def test_ngspice_recovers_the_maxwell_matrix(solved):
    """Drive one port at a time with 1 V AC at 1 MHz, the others at 0 V; the port currents
    give a column of the Maxwell matrix, C_jk = -Im(I_j) / omega (docs/measured.md)."""
    _ngspice_or_skip()
    folder, files, data = solved
    maxwell = np.array(data["capacitance_matrix"])
    ports = re.search(r"^\.subckt (\S+) (.*)$", files["cir"].read_text(), re.M)
    name, nodes = ports.group(1), ports.group(2).split()
    k = len(nodes) - 1
    omega = 2 * np.pi * 1e6
    recovered = np.zeros((k, k))
    for drive in range(k):
        sources = "\n".join(f"V{j + 1} p{j + 1} 0 DC 0 AC {1 if j == drive else 0}" for j in range(k))
        bench = (f"* bench\n.include {files['cir']}\nX1 {' '.join(f'p{j + 1}' for j in range(k))} 0 {name}\n"
                 f"{sources}\n.control\nset numdgt=15\nac lin 1 1e6 1e6\n"
                 f"print {' '.join(f'imag(i(v{j + 1}))' for j in range(k))}\nquit 0\n.endc\n.end\n")
        path = folder / f"bench{drive}.cir"
        path.write_text(bench)
        run = subprocess.run(["ngspice", "-b", str(path)], capture_output=True, text=True, timeout=60)
        assert run.returncode == 0, run.stdout + run.stderr
        for j in range(k):
            value = re.search(rf"imag\(i\(v{j + 1}\)\) = (\S+)", run.stdout).group(1)
            recovered[j, drive] = -float(value) / omega
    np.testing.assert_allclose(recovered, maxwell, rtol=1e-6)


def test_csv_npz_and_vtu_load_back(solved):
    _, files, data = solved
    maxwell = np.array(data["capacitance_matrix"])
    header = files["csv"].read_text().splitlines()[0].split(",")
    assert header == ["maxwell_F"] + data["conductors"]
    table = np.genfromtxt(files["csv"], delimiter=",", skip_header=1, usecols=range(1, len(header)))
    np.testing.assert_allclose(table, maxwell, rtol=1e-11)
    stored = np.load(files["npz"])
    np.testing.assert_array_equal(stored["maxwell"], maxwell)
    assert stored["conductors"].tolist() == data["conductors"] and str(stored["reference"]) == "infinity"
    mutual = stored["mutual"]
    np.testing.assert_allclose(np.diag(mutual), maxwell.sum(axis=1), rtol=1e-12)
    mesh = meshio.read(files["vtu"])
    assert len(mesh.cells_dict["triangle"]) == data["panels"]
    from tricharge import load

    model = load(files["json"].with_suffix(".stl"), unit="mm")
    result = solve(model, method="dense")  # the same solve, in-process
    np.testing.assert_allclose(mesh.cell_data["area_m2"][0], result.panel_areas, rtol=1e-15)
    np.testing.assert_array_equal(mesh.cell_data["conductor"][0], result.panel_conductor)
    for k, name in enumerate(data["conductors"]):
        np.testing.assert_allclose(mesh.cell_data[f"sigma_C_per_m2_{name}_at_1V"][0], result.sigma[:, k], rtol=1e-12)
    np.testing.assert_allclose(mesh.points, model.vertices, rtol=1e-15)


def test_spice_header_names_and_values(solved):
    _, files, data = solved
    text = files["cir"].read_text()
    assert "sha256" in text and "unit mm" in text and "method dense" in text and f"{data['panels']} panels" in text
    assert text.rstrip().endswith(".ends trio")
    assert spice_value(2.3e-14) == "23f" and spice_value(1e-12) == "1p" and spice_value(4e-19) == "4e-19"
    nodes, notes = legal_names(["lead 1", "2nd", "gnd", "a", "A"])
    assert nodes == ["lead_1", "n2nd", "gnd_net", "a", "A_2"] and len(notes) == 4


def test_dropping_weak_couplings_is_reported():
    mutual = np.array([[2.0, 1.0, 0.005], [1.0, 3.0, 0.5], [0.005, 0.5, 1.0]]) * 1e-12
    circuit = subcircuit(mutual, ["a", "b", "c"], drop_below=0.01)
    assert circuit.dropped == 1 and circuit.dropped_total == pytest.approx(5e-15)
    assert "a c" not in circuit.text and "1 coupling below 0.01 of their row total left out: 5fF" in circuit.text


def test_negative_capacitance_is_refused_not_written():
    mutual = np.array([[2.0, -0.1], [-0.1, 1.0]]) * 1e-12
    with pytest.raises(TrichargeError, match="negative capacitance .* between a and b"):
        subcircuit(mutual, ["a", "b"])
    tiny = np.array([[2.0, -1e-20], [-1e-20, 1.0]]) * 1e-12  # numerical noise becomes 0
    assert "C1 a b" not in subcircuit(tiny, ["a", "b"]).text


def _model():
    v, t, labels = _three_bodies()
    return Model.from_arrays(v, t, labels, ("a", "b", "c"))


def test_grounding_equals_a_direct_solve():
    """Hold c at 0 V: the Maxwell matrix among a and b, by a direct solve with those
    boundary conditions (a at 1 V, b and c at 0 V; then b at 1 V)."""
    model = _model()
    reduced, names = ground_conductors(solve(model, method="dense").capacitance, ("a", "b", "c"), ["c"])
    problem = problem_of(model)
    direct = np.column_stack([solve_voltages(problem, v).free_charge[:2] for v in ([1, 0, 0], [0, 1, 0])])
    assert names == ("a", "b")
    np.testing.assert_allclose(reduced, 0.5 * (direct + direct.T), rtol=1e-6)


def test_merging_equals_a_direct_solve():
    """Tie a and c into one net: the same as solving with a and c as one conductor."""
    model = _model()
    merged, names = merge_conductors(solve(model, method="dense").capacitance, ("a", "b", "c"), {"ac": ["a", "c"]})
    v, t, labels = _three_bodies()
    joined = solve(Model.from_arrays(v, t, np.where(labels == 2, 0, labels), ("ac", "b")), method="dense")
    assert names == ("ac", "b")
    np.testing.assert_allclose(merged, joined.capacitance, rtol=1e-6)


def test_reference_conductor_and_cli_reductions(tmp_path, capsys):
    v, t, _ = _three_bodies()
    mesh = tmp_path / "trio.stl"
    trimesh.Trimesh(v, t, process=False).export(mesh)
    out = tmp_path / "r.json"
    assert main(["solve", str(mesh), "-q", "--method", "dense", "--reference", "c3", "--merge", "big=c1,c2",
                 "--json", str(out)]) == 0
    data = json.loads(out.read_text())
    assert data["conductors"] == ["big"] and data["reference"] == "c3"
    assert main(["solve", str(mesh), "-q", "--reference", "plane"]) == 2
    assert "does not fit this model" in capsys.readouterr().err
    assert main(["solve", str(mesh), "-q", "--merge", "x=c1,c9"]) == 2
    assert "no conductor named c9" in capsys.readouterr().err


def test_failed_run_leaves_existing_outputs_alone(tmp_path):
    target = tmp_path / "keep.csv"
    target.write_text("previous result\n")
    assert main(["solve", str(tmp_path / "missing.stl"), "--csv", str(target)]) == 2
    assert target.read_text() == "previous result\n"
    assert sorted(p.name for p in tmp_path.iterdir()) == ["keep.csv"]


def test_pyvista_reads_the_surface_and_section_files(solved, tmp_path):
    """ParaView's reader library (through pyvista) gets the same numbers back."""
    import pyvista

    _, files, data = solved
    surface = pyvista.read(files["vtu"])
    reference = meshio.read(files["vtu"])
    assert surface.n_cells == data["panels"]
    for name in reference.cell_data:
        np.testing.assert_array_equal(np.asarray(surface.cell_data[name]), reference.cell_data[name][0])
    hv = os.path.join(os.path.dirname(__file__), "..", "meshes", "demo_hv.toml")
    image, samples = tmp_path / "s.vti", tmp_path / "s.csv"
    assert main(["field", hv, "-q", "--section", "x=0", "--grid", "9", "--vtk", str(image),
                 "--samples", str(samples)]) == 0
    grid = pyvista.read(image)
    assert tuple(grid.dimensions) == (1, 9, 9)
    table = np.genfromtxt(samples, delimiter=",", skip_header=1, usecols=(4,))
    np.testing.assert_allclose(np.asarray(grid.point_data["potential_V"]), table, rtol=1e-8)


def test_every_geometry_file_is_in_metres_and_records_the_users_unit(tmp_path):
    """The section image and the surface files overlay in a viewer: both in metres, both
    saying which unit the user worked in."""
    import pyvista

    hv = os.path.join(os.path.dirname(__file__), "..", "meshes", "demo_hv.toml")
    section, surface, capacitance = tmp_path / "s.vti", tmp_path / "f.vtu", tmp_path / "c.vtu"
    assert main(["field", hv, "-q", "--section", "y=0", "--grid", "5", "--vtk", str(section),
                 "--vtu", str(surface)]) == 0
    assert main(["solve", hv, "-q", "--vtu", str(capacitance)]) == 0
    grids = [pyvista.read(p) for p in (section, surface, capacitance)]
    for grid in grids:
        assert float(grid.field_data["metres_per_unit"][0]) == pytest.approx(1e-3)
    image, mesh = np.array(grids[0].bounds).reshape(3, 2), np.array(grids[1].bounds).reshape(3, 2)
    size = mesh[:, 1] - mesh[:, 0]
    assert np.all(image[[0, 2], 0] >= mesh[[0, 2], 0] - 0.21 * size[[0, 2]])  # the section spans the model + 20 %
    assert np.all(image[[0, 2], 1] <= mesh[[0, 2], 1] + 0.21 * size[[0, 2]])
