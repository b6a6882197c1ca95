"""Every user error is exit 2 with one clear line, checked before the long work: values
that are not numbers, requests too large for the machine, a missing optional library,
crafted result files; and a shielded conductor's zero capacitance is not called negative."""

import json
from pathlib import Path

import numpy as np
import pytest
import trimesh

import tricharge
from tricharge import Model, shapes
from tricharge.cli import main
from tricharge.errors import MissingDependency, OptionError, TrichargeError

HV = Path(__file__).resolve().parents[1] / "meshes" / "demo_hv.toml"


def _ball(folder, frequency=3):
    path = folder / "ball.stl"
    trimesh.Trimesh(*shapes.sphere(1.0, frequency), process=False).export(path)
    return path


def _refused(capsys, args, *fragments):
    assert main(args) == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and err.startswith("tricharge: error: ") and "Traceback" not in err, err
    for fragment in fragments:
        assert fragment in err, err


@pytest.mark.parametrize("args, message", [
    (["--probe", "nan,0,0"], "every number must be finite"),
    (["--probe", "0,inf,0"], "every number must be finite"),
    (["--line", "0,0,0:0,0,1:nan"], "every number must be finite"),
    (["--line", "0,0,0:0,0,1:1e12"], "from 2 to 1,000,000"),
    (["--line", "0,0,0:0,0,1:2.5"], "whole number"),
    (["--line", "0,0,nan:0,0,1"], "every number must be finite"),
    (["--section", "z=inf"], "every number must be finite"),
    (["--volts", "hv=1e400"], "not a usable number of V"),
    (["--volts", "hv=nan"], "cannot read 'nan' as V"),
    (["--withstand", "air=0"], "not a withstand strength"),
    (["--withstand", "air=-3kV/mm"], "not a withstand strength"),
    (["--withstand", "air=1e400"], "not a usable number"),
])
def test_impossible_numbers_are_refused_by_name(tmp_path, capsys, args, message):
    _refused(capsys, ["field", str(HV), "--samples", str(tmp_path / "s.csv")] + args, message)
    assert list(tmp_path.iterdir()) == []


def test_names_in_reductions_are_checked_before_the_solve(tmp_path, capsys, monkeypatch):
    from tricharge import pipeline

    def never(*args, **kwargs):
        raise AssertionError("solved before the options were checked")

    monkeypatch.setattr(pipeline, "solve_capacitance", never)
    v, t, _ = shapes.combine(shapes.sphere(1.0, 2), shapes.sphere(1.0, 2, center=(3, 0, 0)))
    mesh = tmp_path / "two.stl"
    trimesh.Trimesh(v, t, process=False).export(mesh)
    _refused(capsys, ["solve", str(mesh), "--merge", "n=c1,c9"], "no conductor named c9")
    _refused(capsys, ["solve", str(mesh), "--ground", "c7"], "no conductor named c7")
    _refused(capsys, ["solve", str(mesh), "--reference", "plane"], "does not fit this model")
    _refused(capsys, ["solve", str(mesh), "--merge", "c2=c1"], "a conductor outside the net has this name")
    _refused(capsys, ["field", str(mesh), "--volts", "c1=1", "--volts", "c3=2"], "no conductor named c3")


def test_python_api_errors_are_ours():
    model = Model.from_arrays(*shapes.sphere(1.0, 2))
    with pytest.raises(OptionError, match="method must be auto, dense or fast, got 'bogus'"):
        tricharge.solve(model, method="bogus")
    with pytest.raises(ValueError):  # OptionError is a ValueError too
        tricharge.solve(model, levels=0)


def test_memory_is_estimated_before_a_dense_solve(tmp_path, capsys, monkeypatch):
    monkeypatch.setenv("TRICHARGE_MEMORY_BYTES", "2e6")
    _refused(capsys, ["solve", str(_ball(tmp_path, 6)), "--method", "dense"], "a dense solve of 720 panels",
             "use --method fast")


def test_a_solve_that_cannot_fit_is_refused_before_the_geometry_checks(tmp_path, capsys, monkeypatch):
    """On millions of panels the checks take a minute; the memory refusal must not wait for
    them, for meshes and for model files alike."""
    import tricharge.model

    def no_checks(*args, **kwargs):
        raise AssertionError("the geometry checks ran before the memory check")

    monkeypatch.setattr(tricharge.model, "survey", no_checks)
    monkeypatch.setenv("TRICHARGE_MEMORY_BYTES", "2e6")
    ball = _ball(tmp_path, 6)
    (tmp_path / "ball.toml").write_text(f'mesh = "{ball.name}"\nunit = "m"\n')
    for command in ("solve", "field", "report"):
        extra = ["--html", str(tmp_path / "r.html")] if command == "report" else []
        _refused(capsys, [command, str(ball), "--method", "dense", *extra], "a dense solve of 720 panels")
    _refused(capsys, ["solve", str(tmp_path / "ball.toml"), "--method", "dense"], "ball.toml: a dense solve")


def test_memory_is_estimated_for_studies_budgets_and_samples(tmp_path, capsys, monkeypatch):
    ball = _ball(tmp_path)
    monkeypatch.setenv("TRICHARGE_MEMORY_BYTES", "1e8")
    _refused(capsys, ["solve", str(ball), "--levels", "4", "--method", "fast"], "finest level",
             "fewer refinement levels")
    _refused(capsys, ["solve", str(ball), "--accuracy", "1%", "--max-panels", "10000000"], "10,000,000 panels")
    _refused(capsys, ["field", str(ball), "--volts", "c1=1", "--line", "0,0,2:0,0,9:1000000",
                      "--samples", str(tmp_path / "s.csv")], "1,000,000 sample points")
    monkeypatch.setenv("TRICHARGE_MEMORY_BYTES", "lots")
    _refused(capsys, ["solve", str(ball)], "TRICHARGE_MEMORY_BYTES='lots'")


def test_a_budget_below_the_first_refinement_is_an_option_error(tmp_path, capsys):
    _refused(capsys, ["solve", str(_ball(tmp_path)), "--accuracy", "0.5%", "--max-panels", "200"],
             "would exceed the panel budget of 200")


def _shielded(f_core=8, f_shell=8):
    """A sphere inside the cavity of a thick spherical shell, one conductor each."""
    inner_v, inner_t = shapes.sphere(1.5, f_shell)
    v, t, labels = shapes.combine(shapes.sphere(1.0, f_core), shapes.sphere(2.0, f_shell), (inner_v, inner_t[:, ::-1]))
    return Model.from_arrays(v, t, np.where(labels == 2, 1, labels), ("core", "shield"))


def test_a_shielded_core_has_zero_capacitance_to_the_reference_within_accuracy(tmp_path):
    """Gauss's law: all field lines from the core end on the cavity wall, so the core's
    capacitance to the reference is exactly zero (elementary; a row sum of the Maxwell
    matrix). The fast path's noise makes it slightly negative: that is within the solve's
    accuracy, reported as such, and the netlist leaves the capacitor out with a note."""
    result = tricharge.solve(_shielded(12, 12), method="fast")
    row = result.capacitance[0]
    assert row.sum() < 0 and abs(row.sum()) < 2e-4 * np.abs(row).sum()  # the noise being judged
    assert result.checks.passed and result.checks.diagonally_dominant
    assert any("core - reference" in note for note in result.checks.within_accuracy)
    from tricharge.io.spice import subcircuit

    circuit = subcircuit(result.mutual, result.conductors, tolerance=result.mutual_tolerance)
    assert any("between core and ref (infinity)" in note for note in circuit.zeroed)
    assert "core ref" not in circuit.text


def test_a_negative_capacitance_beyond_the_accuracy_is_named_rightly():
    from tricharge.io.spice import subcircuit

    mutual = np.array([[-0.5, 1.0], [1.0, 2.0]]) * 1e-12
    with pytest.raises(TrichargeError, match=r"between a and ref \(infinity\), beyond the solve's accuracy"):
        subcircuit(mutual, ["a", "b"], tolerance=np.full((2, 2), 1e-15))


def _ascii_vtu(points, cell_type: int, cells, arrays: dict) -> str:
    """A VTK XML unstructured grid written by hand, so it can be as wrong as a crafted file."""
    corners = len(cells[0])
    data = "".join(f'<DataArray type="Float64" Name="{name}" format="ascii">{" ".join(map(str, values))}</DataArray>'
                   for name, values in arrays.items())
    return ('<?xml version="1.0"?><VTKFile type="UnstructuredGrid" version="0.1" byte_order="LittleEndian">'
            f'<UnstructuredGrid><Piece NumberOfPoints="{len(points)}" NumberOfCells="{len(cells)}"><Points>'
            '<DataArray type="Float64" NumberOfComponents="3" format="ascii">'
            + " ".join(str(x) for p in points for x in p) + '</DataArray></Points><Cells>'
            '<DataArray type="Int64" Name="connectivity" format="ascii">' + " ".join(str(i) for c in cells for i in c)
            + '</DataArray><DataArray type="Int64" Name="offsets" format="ascii">'
            + " ".join(str(corners * (k + 1)) for k in range(len(cells)))
            + '</DataArray><DataArray type="UInt8" Name="types" format="ascii">' + " ".join([str(cell_type)] * len(cells))
            + f'</DataArray></Cells><CellData>{data}</CellData></Piece></UnstructuredGrid></VTKFile>')


def test_view_refuses_crafted_and_empty_saved_results(tmp_path, capsys):
    points = [(0, 0, 0), (1, 0, 0), (0, 1, 0)]
    fields = ("E_magnitude_V_per_m", "sigma_free_C_per_m2")
    cases = {
        "nan.vtu": _ascii_vtu(points, 5, [(0, 1, 2)], {f: ["nan"] for f in fields}),
        "short.vtu": _ascii_vtu(points, 5, [(0, 1, 2), (0, 2, 1)], {f: [1.0] for f in fields}),
        "index.vtu": _ascii_vtu(points, 5, [(0, 1, 7)], {f: [1.0] for f in fields}),
        "lines.vtu": _ascii_vtu(points, 3, [(0, 1)], {f: [1.0] for f in fields}),
        "badpoint.vtu": _ascii_vtu([(0, 0, 0), (1, 0, 0), (0, "inf", 0)], 5, [(0, 1, 2)], {f: [1.0] for f in fields}),
    }
    for name, text in cases.items():
        (tmp_path / name).write_text(text)
        _refused(capsys, ["view", str(tmp_path / name), "--png", str(tmp_path / "x.png")], name)
    assert not (tmp_path / "x.png").exists()


def test_a_missing_picture_library_is_found_before_solving(tmp_path, capsys, monkeypatch):
    from tricharge import extras, pipeline

    monkeypatch.setattr(extras, "missing", lambda extra: ["pyvista"])
    monkeypatch.setattr(pipeline, "solve_field", lambda *a, **k: pytest.fail("solved before the check"))
    _refused(capsys, ["view", str(HV), "--png", str(tmp_path / "x.png")], "tricharge view needs pyvista",
             "pip install")
    _refused(capsys, ["report", str(HV), "--html", str(tmp_path / "r.html")], "tricharge report needs pyvista")
    with pytest.raises(MissingDependency, match="charts needs pyvista"):
        extras.require("viz", "charts")


def test_the_install_hint_fits_a_checkout(monkeypatch):
    from tricharge import extras

    monkeypatch.setattr(extras, "_installed_from", lambda: ("/home/me/tricharge", True))
    assert extras.install_hint("viz") == 'pip install -e "/home/me/tricharge[viz]"'
    monkeypatch.setattr(extras, "_installed_from", lambda: (None, False))
    assert extras.install_hint("viz") == 'pip install "tricharge[viz]"'


def test_json_provenance_is_shared_and_complete(tmp_path):
    ball = _ball(tmp_path)
    for command, extra in (("solve", []), ("field", ["--volts", "c1=1"])):
        out = tmp_path / f"{command}.json"
        assert main([command, str(ball), "-q", "--unit", "mm", "--json", str(out)] + extra) == 0
        data = json.loads(out.read_text())
        assert data["format_version"] == 2 and data["command"] == command and data["unit"] == "mm"
        assert data["relative_permittivities"] == {"vacuum": 1.0} and data["json_units"]["length"] == "m"
        assert data["inputs"][0]["file"] == str(ball) and len(data["input_sha256"]) == 64
