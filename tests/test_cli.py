"""The command line, called in-process through ``main([...])``."""

import json
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest
import trimesh

from tricharge import shapes
from tricharge.cli import main

DATA_HV = Path(__file__).resolve().parents[1] / "meshes" / "demo_hv.toml"


def _sphere_stl(tmp_path, radius=10.0, frequency=4):
    path = tmp_path / "ball.stl"
    trimesh.Trimesh(*shapes.sphere(radius, frequency), process=False).export(path)
    return path


def test_solve_prints_the_matrix_and_writes_json(tmp_path, capsys):
    out = tmp_path / "ball.json"
    assert main(["solve", str(_sphere_stl(tmp_path)), "--unit", "mm", "--json", str(out)]) == 0
    text = capsys.readouterr().out
    assert "Capacitance matrix, Maxwell form" in text and "(values in pF)" in text
    assert "320 panels" in text and "c1 - infinity" in text
    data = json.loads(out.read_text())
    assert data["conductors"] == ["c1"] and data["panels"] == 320  # stable keys of docs/design.md
    # 10 mm sphere: 4 pi eps0 * 0.01 m = 1.1127 pF; this coarse mesh is 1.3% low
    assert data["capacitance_matrix"][0][0] == pytest.approx(1.11265e-12, rel=0.02)
    assert data["unit"] == "mm" and data["method"] == "dense" and data["checks"]["problems"] == []
    assert not list(tmp_path.glob("*.tmp"))


def test_unit_option_scales_the_result(tmp_path):
    path = _sphere_stl(tmp_path)
    results = {}
    for unit in ("mm", "in"):
        out = tmp_path / f"{unit}.json"
        assert main(["solve", str(path), "--unit", unit, "--json", str(out), "--quiet"]) == 0
        results[unit] = json.loads(out.read_text())["capacitance_matrix"][0][0]
    assert results["in"] / results["mm"] == pytest.approx(25.4, rel=1e-9)


def test_demo_matrix_is_physical_and_mirror_symmetric(tmp_path, capsys):
    """Regression of our own demo (no published value): checks pass, pin1 and pin3 are mirror images."""
    out = tmp_path / "demo.json"
    assert main(["demo", "header", "--json", str(out)]) == 0
    assert "pin1" in capsys.readouterr().out
    data = json.loads(out.read_text())
    c = np.array(data["capacitance_matrix"])
    assert data["conductors"] == ["pin1", "pin2", "pin3", "shield"]
    assert data["checks"]["problems"] == []
    assert c[0, 0] == pytest.approx(c[2, 2], rel=1e-4)
    assert abs(c[0, 2]) < abs(c[0, 1])  # the far pin couples less than the neighbour
    np.testing.assert_allclose(np.array(data["mutual_matrix"]).diagonal(), c.sum(axis=1), rtol=1e-12)


@pytest.mark.parametrize("setup, args, message", [
    (None, ["solve", "{tmp}/missing.msh"], "missing.msh: file not found"),
    ("part.xyz", ["solve", "{tmp}/part.xyz"], "unknown mesh format '.xyz'"),
    ("bad.msh", ["solve", "{tmp}/bad.msh"], "bad.msh: not a readable Gmsh file"),
    ("empty.stl", ["solve", "{tmp}/empty.stl"], "empty.stl: the mesh has no triangles"),
    ("degenerate.stl", ["solve", "{tmp}/degenerate.stl"], "1 degenerate (zero-area) triangles"),
    ("ball", ["solve", "{tmp}/ball.stl", "--unit", "furlong"], "Invalid value for '--unit'"),
    ("ball", ["solve", "{tmp}/ball.stl", "--json", "{tmp}/no/such/dir/out.json"], "does not exist"),
    ("ball", ["solve", "{tmp}/ball.stl", "--accuracy", "5", "--json", "{tmp}/o.json"], "write a percentage like 0.5%"),
    ("ball", ["solve", "{tmp}/ball.stl", "--accuracy", "1%", "--levels", "3", "--json", "{tmp}/o.json"],
     "--levels and --accuracy are two ways"),
    ("ball", ["solve", "{tmp}/ball.stl", "--accuracy", "1%", "--max-panels", "300", "--json", "{tmp}/o.json"],
     "panel budget 300 is not above the model's 320 panels"),
    ("ball", ["solve", "{tmp}/ball.stl", "--levels", "5"], "Invalid value for '--levels'"),
])
@pytest.mark.smoke
def test_bad_input_gives_one_line_and_exit_2(tmp_path, capsys, setup, args, message):
    contents = {
        "part.xyz": "1 2 3",
        "bad.msh": "this is not a mesh",
        "empty.stl": "solid x\nendsolid x\n",
        "degenerate.stl": "solid x\nfacet normal 0 0 1\nouter loop\nvertex 0 0 0\nvertex 1 0 0\nvertex 2 0 0\n"
                          "endloop\nendfacet\nendsolid x\n",
    }
    if setup == "ball":
        _sphere_stl(tmp_path)
    elif setup:
        (tmp_path / setup).write_text(contents[setup])
    code = main([a.format(tmp=tmp_path) for a in args])
    err = capsys.readouterr().err
    assert code == 2
    assert err.count("\n") == 1 and err.startswith("tricharge: error: ") and message in err
    assert "Traceback" not in err
    assert not list(tmp_path.rglob("*.json"))


@pytest.mark.smoke
def test_console_script_exit_status_and_no_traceback(tmp_path):
    """The module entry point exits 2 on bad input, like the installed script."""
    proc = subprocess.run([sys.executable, "-m", "tricharge", "solve", str(tmp_path / "none.stl")],
                          capture_output=True, text=True)
    assert proc.returncode == 2
    assert proc.stderr.strip() == f"tricharge: error: {tmp_path / 'none.stl'}: file not found; check the path"


def test_version_and_help(capsys):
    assert main(["--version"]) == 0
    assert "tricharge, version" in capsys.readouterr().out
    assert main(["solve", "--help"]) == 0
    assert "--unit" in capsys.readouterr().out


def test_inspect_shows_parts_media_and_interfaces(capsys):
    assert main(["demo", "package", "--inspect"]) == 0
    out = capsys.readouterr().out
    assert "5 conductors, 3 interfaces, 7,876 panels" in out
    assert "ground plane: z = 0 mm; background medium: air" in out and "mold 3.9" in out and "board 4.4" in out
    assert "net1" in out and "lead1, wire1, pad1" in out and "3.3 V, in mold" in out
    assert "mold_skin (interface)" in out and "mold | air" in out
    assert "floating" in out and "no errors: the model can be solved" in out


def test_inspect_open_sheet_and_warnings(tmp_path, capsys):
    path = tmp_path / "sheet.stl"
    v = np.array([[0, 0, 0], [1, 0, 0], [0.5, 0.02, 0]], float)
    trimesh.Trimesh(v, [[0, 1, 2]], process=False).export(path)
    assert main(["inspect", str(path)]) == 0
    out = capsys.readouterr().out
    assert "open (thin sheet)" in out and "warnings:" in out and "needle triangles" in out


def test_inspect_broken_model_prints_table_and_one_error_line(tmp_path, capsys):
    big, small = shapes.cube(2.0, 4), shapes.sphere(0.3, 2)
    path = tmp_path / "nested.stl"
    v, t, _ = shapes.combine(big, small)
    trimesh.Trimesh(v, t, process=False).export(path)
    assert main(["inspect", str(path)]) == 2
    captured = capsys.readouterr()
    assert "c1" in captured.out and "errors:" in captured.out
    assert captured.err.count("\n") == 1 and "conductor 'c2' lies inside conductor 'c1'" in captured.err


@pytest.mark.smoke
def test_default_demo_solves(capsys):
    assert main(["demo", "-q"]) == 0
    assert capsys.readouterr().out == ""


def test_field_command_reports_hot_spots_margins_and_cautions(tmp_path, capsys):
    out = tmp_path / "field.json"
    code = main(["field", str(DATA_HV), "--volts", "hv=30kV", "--withstand", "air=3kV/mm", "--top", "2",
                 "--json", str(out)])
    text = capsys.readouterr().out
    assert code == 0
    assert "30 kV" in text and "Highest surface fields" in text and "kV/mm" in text
    assert "utilisation factor E_mean/E_max" in text and "air: peak" in text
    assert "Cautions for high-voltage use" in text and "qualified engineer" in text
    data = json.loads(out.read_text())
    assert data["potentials_V"] == [30000.0, 0.0]
    spots = [s for s in data["hot_spots"] if s["part"] == "hv"]
    assert len(spots) == 2 and spots[0]["field_V_per_m"] >= spots[1]["field_V_per_m"]
    assert spots[0]["location_m"][2] < 0.045  # the peak is at the rod's tip (z = 35 mm), not its top


@pytest.mark.parametrize("args, message", [
    (["--volts", "hv"], "--volts 'hv': write NAME=VALUE"),
    (["--volts", "hx=3kV"], "no conductor named hx; the model has hv, ground"),
    (["--volts", "hv=3 kA"], "cannot read '3 kA' as V"),
    (["--withstand", "air=3 kV/in"], "--withstand air: cannot read '3 kV/in'"),
    (["--withstand", "oil=3kV/mm"], "no medium named oil"),
])
def test_field_command_bad_options(capsys, args, message):
    assert main(["field", str(DATA_HV)] + args) == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and message in err


def test_field_needs_a_voltage_for_every_driven_conductor(tmp_path, capsys):
    path = tmp_path / "ball.stl"
    trimesh.Trimesh(*shapes.sphere(1.0, 4), process=False).export(path)
    assert main(["field", str(path)]) == 2
    assert "conductor 'c1' has no voltage; give one with --volts c1=VALUE" in capsys.readouterr().err
    assert main(["field", str(path), "--volts", "c1=1kV", "-q"]) == 0


def test_field_samples_probe_line_and_section(tmp_path, capsys):
    import csv
    import xml.etree.ElementTree as ElementTree

    samples, image = tmp_path / "s.csv", tmp_path / "s.vti"
    code = main(["field", str(DATA_HV), "-q", "--probe", "0,0,95", "--probe", "0,0,20",
                 "--line", "0,0,5.5:0,0,34.5:12", "--section", "y=0", "--grid", "21",
                 "--samples", str(samples), "--vtk", str(image)])
    assert code == 0, capsys.readouterr().err
    rows = list(csv.DictReader(samples.open()))
    assert [r["kind"] for r in rows].count("line") == 12 and [r["kind"] for r in rows].count("section") == 21 * 21
    inside_rod = rows[0]  # (0, 0, 95) mm is inside the 50 kV rod: the potential there is the rod's
    assert float(inside_rod["potential_V"]) == pytest.approx(50e3, rel=0.005)
    gap = [float(r["potential_V"]) for r in rows if r["kind"] == "line"]
    assert gap == sorted(gap) and 0 < gap[0] < gap[-1] < 50e3  # rising from the disk to the rod
    root = ElementTree.parse(image).getroot()
    assert root.find("ImageData").get("WholeExtent") == "0 20 0 0 0 20"
    arrays = {a.get("Name"): len(a.text.split()) for a in root.find("ImageData/Piece/PointData").iter("DataArray")}
    assert arrays == {"potential_V": 441, "E_V_per_m": 3 * 441, "E_magnitude_V_per_m": 441, "where": 441}


@pytest.mark.parametrize("args, message", [
    (["--vtk", "{tmp}/x.vti"], "--vtk writes the plane section: give --section too"),
    (["--probe", "1,2,3"], "samples asked for but no output"),
    (["--probe", "1,2", "--samples", "{tmp}/s.csv"], "--probe '1,2': expected 3 numbers"),
    (["--section", "w=3", "--samples", "{tmp}/s.csv"], "write AXIS=VALUE with AXIS x, y or z"),
    (["--line", "0,0,0", "--samples", "{tmp}/s.csv"], "write X0,Y0,Z0:X1,Y1,Z1"),
])
def test_field_sampling_options_fail_cleanly(tmp_path, capsys, args, message):
    assert main(["field", str(DATA_HV)] + [a.format(tmp=tmp_path) for a in args]) == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and message in err
    assert list(tmp_path.iterdir()) == []


@pytest.mark.slow
def test_field_json_carries_samples_and_refinement(tmp_path):
    out = tmp_path / "f.json"
    assert main(["field", str(DATA_HV), "-q", "--probe", "0,0,20", "--refine-peaks", "--vtk", str(tmp_path / "x.vti"),
                 "--section", "z=20", "--grid", "5", "--json", str(out)]) == 0
    data = json.loads(out.read_text())
    assert [s["kind"] for s in data["samples"]].count("probe") == 1 and len(data["samples"]) == 1 + 25
    assert {r["part"] for r in data["peak_refinement"]} == {"hv", "ground"}


def test_field_vtu_reads_back(tmp_path):
    import meshio

    out = tmp_path / "f.vtu"
    assert main(["field", str(DATA_HV), "-q", "--vtu", str(out)]) == 0
    mesh = meshio.read(out)
    magnitude = mesh.cell_data["E_magnitude_V_per_m"][0]
    assert len(magnitude) == 5400 and set(np.unique(mesh.cell_data["part"][0])) == {0, 1}
    assert 5e6 < magnitude.max() < 2e7  # the rod tip at 50 kV, as the report says (9.2 kV/mm)


def test_levels_give_value_plus_minus_estimate_in_table_and_json(tmp_path, capsys):
    """Two spheres of 10 mm, three levels: every cell reads value ± estimate, the JSON has
    an error_estimate of the matrix's shape, and the coarse level's error is inside it
    (4 pi eps0 R bounds: series of Smythe 1968 section 5.08, see reference tests)."""
    path = tmp_path / "pair.stl"
    v, t, _ = shapes.combine(shapes.sphere(10.0, 2), shapes.sphere(10.0, 2, center=(25.0, 0, 0)))
    trimesh.Trimesh(v, t, process=False).export(path)
    out = tmp_path / "pair.json"
    assert main(["solve", str(path), "--unit", "mm", "--levels", "3", "--json", str(out)]) == 0
    text = capsys.readouterr().out
    assert "extrapolated ± estimated error" in text and text.count(" ± ") >= 4 + 3
    assert "Refinement study (uniform): panels 160 -> 640 -> 2,560" in text
    data = json.loads(out.read_text())
    c, e = np.array(data["capacitance_matrix"]), np.array(data["error_estimate"])
    assert e.shape == c.shape == (2, 2) and np.all(e > 0) and np.all(e < 0.02 * np.abs(c))
    assert data["refinement_study"]["panels_per_level"] == [160, 640, 2560]
    assert "Richardson" in data["error_estimate_method"]
    np.testing.assert_allclose(np.array(data["mutual_error_estimate"]).diagonal(), e.sum(axis=1))
    # the matrix is the extrapolation, not any one level
    assert not np.any(np.isclose(c, np.array(data["refinement_study"]["matrices_per_level"]), rtol=1e-9,
                                  atol=0))


def test_single_solve_says_error_not_estimated(tmp_path, capsys):
    out = tmp_path / "ball.json"
    assert main(["solve", str(_sphere_stl(tmp_path)), "--json", str(out)]) == 0
    assert "add --levels 3 or --accuracy 0.5%" in capsys.readouterr().out
    data = json.loads(out.read_text())
    assert data["error_estimate"] is None and data["error_estimate_method"].startswith("none")


def test_accuracy_option_refines_adaptively(tmp_path, capsys):
    out = tmp_path / "cube.json"
    path = tmp_path / "cube.stl"
    trimesh.Trimesh(*shapes.cube(10.0, 3), process=False).export(path)
    assert main(["solve", str(path), "--unit", "mm", "--accuracy", "2%", "--json", str(out)]) == 0
    text = capsys.readouterr().out
    assert "Refinement study (adaptive)" in text and "accuracy reached" in text
    data = json.loads(out.read_text())
    assert data["refinement_study"]["stop"] == "accuracy reached"
    assert data["error_estimate"][0][0] <= 0.02 * data["capacitance_matrix"][0][0]


def test_solve_prints_and_saves_sensitivities(tmp_path, capsys):
    """Two spheres: the coupling grows as sphere b moves towards a (-x) and the JSON holds
    every derivative in both forms, in F/m."""
    path = tmp_path / "pair.stl"
    v, t, _ = shapes.combine(shapes.sphere(10.0, 4), shapes.sphere(6.0, 4, center=(25.0, 0, 0)))
    trimesh.Trimesh(v, t, process=False).export(path)
    out = tmp_path / "pair.json"
    assert main(["solve", str(path), "--unit", "mm", "--sensitivity", "--json", str(out)]) == 0
    text = capsys.readouterr().out
    assert "Largest sensitivities" in text and "per 0.1 mm of a part moving" in text
    data = json.loads(out.read_text())["sensitivity"]
    assert data["parts"] == ["c1", "c2"] and data["unit"] == "F/m"
    coupling_along_x = np.array(data["translation_mutual"])[1, 0, 0, 1]
    assert coupling_along_x < 0  # moving c2 away (+x) weakens the coupling
    np.testing.assert_allclose(np.array(data["translation_maxwell"])[1, 0], np.array(data["translation_maxwell"])[1, 0].T)
