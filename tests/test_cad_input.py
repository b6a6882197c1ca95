"""CAD input (STEP, IGES, BREP through gmsh): names carried to the JSON and the SPICE
ports, the mesh written back, options checked, hostile files refused in one line."""

import json

import numpy as np

import pytest

from tricharge.cli import main

from cadfiles import gmsh_or_skip, write_step

gmsh_or_skip()


def _pair(tmp_path, names=("pin_a", "pin_b")):
    return write_step(tmp_path / "pair.step", lambda occ: (occ.addSphere(0, 0, 0, 1.0), occ.addBox(2, -0.5, -0.5, 1, 1, 1)),
                      names)


@pytest.mark.smoke
def test_names_from_the_cad_file_reach_the_json_and_the_spice_ports(tmp_path, capsys):
    step = _pair(tmp_path)
    assert main(["solve", str(step), "--unit", "mm", "--json", str(tmp_path / "r.json"),
                 "--spice", str(tmp_path / "r.cir"), "-q"]) == 0
    result = json.loads((tmp_path / "r.json").read_text())
    assert result["conductors"] == ["pin_a", "pin_b"]
    netlist = (tmp_path / "r.cir").read_text()
    assert "pin_a" in netlist and "pin_b" in netlist
    # STEP carries millimetres: the ball of radius 1 mm is read as such whatever --unit says
    assert 0.09e-12 < result["capacitance_matrix"][0][0] < 0.13e-12


def test_unnamed_solids_get_stable_names_and_the_mesh_can_be_written(tmp_path, capsys):
    step = _pair(tmp_path, names=())
    out = tmp_path / "made.msh"
    assert main(["inspect", str(step), "--unit", "mm", "--mesh-out", str(out), "--panel-size", "0.25"]) == 0
    shown = capsys.readouterr().out
    assert "c1" in shown and "c2" in shown
    assert main(["inspect", str(out), "--unit", "mm"]) == 0  # read back, same names
    again = capsys.readouterr().out
    assert "c1" in again and "c2" in again


def test_a_smaller_panel_size_makes_more_panels(tmp_path, capsys):
    step = write_step(tmp_path / "ball.step", lambda occ: occ.addSphere(0, 0, 0, 1.0))
    counts = []
    for size in ("0.25mm", "0.125mm"):
        assert main(["solve", str(step), "--panel-size", size, "--json", str(tmp_path / f"{size}.json"), "-q"]) == 0
        counts.append(json.loads((tmp_path / f"{size}.json").read_text())["panels"])
    assert counts[1] > 2.5 * counts[0], counts


def test_panels_across_a_small_gap(tmp_path, capsys):
    """Two 1 mm cubes 0.1 mm apart, panel size 0.5 mm: with --across-gaps 3 the panels on
    the facing faces are no larger than about a third of the gap."""
    from tricharge.io.cad import meshing
    from tricharge.io.cadmesh import Meshing
    from tricharge.io.modelfile import load

    step = write_step(tmp_path / "gap.step", lambda occ: (occ.addBox(0, 0, 0, 1, 1, 1), occ.addBox(1.1, 0, 0, 1, 1, 1)))
    sizes = []
    for across in (0, 3):
        with meshing(Meshing(panel_size=0.5e-3, across_gaps=across, edge_grading=1.0)):
            model = load(step)
        c = model.vertices[model.triangles]
        facing = (abs(c[:, :, 0] - 1.0e-3) < 1e-9).all(axis=1)
        edges = ((c[facing] - c[facing][:, [1, 2, 0]]) ** 2).sum(axis=2) ** 0.5
        sizes.append(edges.max())
    assert sizes[1] < 0.06e-3 < sizes[0], sizes


@pytest.mark.parametrize("content, message", [
    (b"", "is empty"),
    (b"ISO-10303-21;\nHEADER;\nFILE_DESCRIPTION(", "not a readable CAD file"),
    (b"solid nonsense\nthis is no CAD at all\n", "not a readable CAD file"),
])
def test_hostile_cad_files_end_in_one_line(tmp_path, capsys, content, message):
    path = tmp_path / "part.step"
    path.write_bytes(content)
    assert main(["solve", str(path)]) == 2
    err = capsys.readouterr().err.strip()
    assert message in err and len(err.splitlines()) == 1, err


def test_a_cad_file_without_solids_is_refused(tmp_path, capsys):
    def sheet(occ):
        occ.addRectangle(0, 0, 0, 1, 1)
    path = write_step(tmp_path / "sheet.step", sheet)
    assert main(["solve", str(path)]) == 2
    err = capsys.readouterr().err.strip()
    assert "no solid" in err and len(err.splitlines()) == 1, err


def test_a_truncated_step_file_is_refused(tmp_path, capsys):
    whole = _pair(tmp_path).read_bytes()
    path = tmp_path / "cut.step"
    path.write_bytes(whole[: len(whole) // 2])
    assert main(["solve", str(path)]) == 2
    err = capsys.readouterr().err.strip()
    assert len(err.splitlines()) == 1 and "cut.step" in err, err


def test_mesh_out_never_replaces_an_input_and_needs_cad(tmp_path, capsys):
    step = _pair(tmp_path)
    assert main(["solve", str(step), "--mesh-out", str(step)]) == 2
    assert "write a Gmsh .msh file" in capsys.readouterr().err
    assert main(["inspect", str(step), "--mesh-out", str(tmp_path / "m.msh")]) == 0
    capsys.readouterr()
    assert main(["solve", str(tmp_path / "m.msh"), "--mesh-out", str(tmp_path / "n.msh")]) == 2
    assert "--mesh-out is for CAD input (.step .stp .iges .igs .brep); this input is a mesh already" in \
        capsys.readouterr().err
    assert main(["solve", str(tmp_path / "m.msh"), "--panel-size", "1mm", "--across-gaps", "2"]) == 2
    assert "--panel-size and --across-gaps are for CAD input" in capsys.readouterr().err
    assert main(["solve", str(step), "--panel-size", "-1"]) == 2
    assert "positive length" in capsys.readouterr().err


# -- what the reader refuses, at the library level ------------------------------------

def _load(path, **settings):
    from tricharge.io.cad import meshing
    from tricharge.io.cadmesh import Meshing
    from tricharge.io.modelfile import load

    with meshing(Meshing(**settings)):
        return load(path, check=False)


def test_touching_conductors_are_refused(tmp_path):
    from tricharge.errors import MeshError

    step = write_step(tmp_path / "touch.step", lambda occ: (occ.addBox(0, 0, 0, 1, 1, 1), occ.addBox(1, 0, 0, 1, 1, 1)),
                      ["left", "right"])
    with pytest.raises(MeshError, match=r"left and right touch \(they share a face\) near \(0\.001, 0\.0005, 0\.0005\) m"):
        _load(step)


def test_overlapping_conductors_are_refused(tmp_path):
    from tricharge.errors import MeshError

    step = write_step(tmp_path / "over.step", lambda occ: (occ.addSphere(0, 0, 0, 1), occ.addSphere(1, 0, 0, 1)))
    with pytest.raises(MeshError, match="c1 and c2 overlap near"):
        _load(step)


def test_a_panel_size_that_makes_too_many_panels_is_refused(tmp_path):
    from tricharge.errors import MeshError

    step = write_step(tmp_path / "ball.step", lambda occ: occ.addSphere(0, 0, 0, 1.0))
    with pytest.raises(MeshError, match="more than 20,000,000; give a larger panel size"):
        _load(step, panel_size=1e-8)


def test_missing_gmsh_is_one_line_with_the_install_command(tmp_path, monkeypatch):
    from tricharge.errors import MissingDependency

    step = _pair(tmp_path)
    monkeypatch.setattr("tricharge.extras.missing", lambda extra: ["gmsh"] if extra == "cad" else [])
    with pytest.raises(MissingDependency, match=r"reading CAD files .* needs gmsh, which is not installed: pip install .*\[cad\]"):
        _load(step)


def test_gmsh_without_its_system_libraries_names_them(tmp_path, monkeypatch):
    import builtins
    import sys

    from tricharge.errors import InputFileError

    real = builtins.__import__

    def fake(name, *args, **kwargs):
        if name == "gmsh":
            raise OSError("libGLU.so.1: cannot open shared object file")
        return real(name, *args, **kwargs)

    monkeypatch.delitem(sys.modules, "gmsh")
    monkeypatch.setattr(builtins, "__import__", fake)
    from tricharge.io.cadsession import gmsh_session

    with pytest.raises(InputFileError, match="gmsh cannot load .*libGLU.*apt-get install libglu1-mesa"):
        gmsh_session()


def test_gmsh_failures_while_meshing_and_joining_are_one_line(tmp_path, monkeypatch):
    import gmsh

    from tricharge.errors import MeshError

    ball = write_step(tmp_path / "ball.step", lambda occ: occ.addSphere(0, 0, 0, 1.0))
    pair = _pair(tmp_path)

    def boom(*args, **kwargs):
        raise Exception("Some internal failure\nwith a second line")

    with monkeypatch.context() as patch:
        patch.setattr(gmsh.model.mesh, "generate", boom)
        with pytest.raises(MeshError, match=r"gmsh could not mesh the surfaces \(Some internal failure with a second"):
            _load(ball)
    with monkeypatch.context() as patch:
        patch.setattr(gmsh.model.mesh, "generate", lambda dim: None)
        with pytest.raises(MeshError, match="gmsh made no triangles of the CAD faces"):
            _load(ball)
    with monkeypatch.context() as patch:
        patch.setattr(gmsh.model.occ, "fragment", boom)
        with pytest.raises(MeshError, match=r"gmsh could not join the solids \(Some internal failure"):
            _load(pair)


@pytest.mark.parametrize("settings, message", [
    (dict(panel_size=-1.0), "the panel size must be a positive length"),
    (dict(per_radian=0.0), "panels per radian must be between 0.1 and 100"),
    (dict(across_gaps=101), "panels across gaps must be between 0 and 100"),
    (dict(edge_grading=2.0), r"edge grading \(a fraction of the panel size; 1: none\) must be between 0.01 and 1"),
])
def test_meshing_settings_are_checked(settings, message):
    from tricharge.errors import OptionError
    from tricharge.io.cadmesh import Meshing

    with pytest.raises(OptionError, match=message):
        Meshing(**settings).checked()


@pytest.mark.parametrize("value, message", [("abc", "cannot read 'abc' as a length"), ("2 km", "cannot read"),
                                            ("-1mm", "must be a positive length"), (0, "must be a positive length")])
def test_panel_sizes_are_lengths(value, message):
    from tricharge.errors import OptionError
    from tricharge.io.cadmesh import parse_length

    with pytest.raises(OptionError, match=message):
        parse_length(value, "mm", "--panel-size")
    assert parse_length("0.5mm", "m", "x") == pytest.approx(5e-4) and parse_length(2, "mm", "x") == pytest.approx(2e-3)


@pytest.mark.parametrize("table, message", [
    ("meshing = 3", "'meshing' must be a table of panel_size"),
    ("[meshing]\nsize = 1", "unknown key 'meshing.size'; valid keys are panel_size"),
    ("[meshing]\nper_radian = 'x'", "'meshing.per_radian' is x; give panels per radian, a number from 0.1 to 100"),
    ("[meshing]\npanel_size = 'big'", "'meshing.panel_size': cannot read 'big' as a length"),
])
def test_the_model_files_meshing_table_is_checked(tmp_path, table, message):
    from tricharge.errors import OptionError
    from tricharge.io.modelfile import load

    write_step(tmp_path / "ball.step", lambda occ: occ.addSphere(0, 0, 0, 1.0))
    model = tmp_path / "m.toml"
    model.write_text(f'mesh = "ball.step"\nunit = "mm"\n{table}\n')
    with pytest.raises(OptionError, match=message):
        load(model)


def test_the_model_files_meshing_table_is_used_and_the_command_line_wins(tmp_path, capsys):
    write_step(tmp_path / "ball.step", lambda occ: occ.addSphere(0, 0, 0, 1.0))
    model = tmp_path / "m.toml"
    model.write_text('mesh = "ball.step"\nunit = "mm"\n[meshing]\npanel_size = 0.5\n')
    counts = []
    for extra in ([], ["--panel-size", "0.25mm"]):
        assert main(["solve", str(model), "--json", str(tmp_path / f"{len(extra)}.json"), "-q", *extra]) == 0
        counts.append(json.loads((tmp_path / f"{len(extra)}.json").read_text())["panels"])
    assert 100 < counts[0] < 300 and counts[1] > 2.5 * counts[0], counts


def test_bodies_touching_each_other_get_an_interface_between_their_media(tmp_path):
    """Core conductor in an inner coat in an outer coat (three concentric balls): the
    faces of the two coats that touch become the interface coat1@coat2 with the inner
    coat's medium inside; the core touches coat1's medium; coat1 has no faces of its own.
    (The capacitance of this layered sphere is checked in tests/reference/test_cad.py.)"""
    from tricharge.io.modelfile import load

    write_step(tmp_path / "layers.step", lambda occ: [occ.addSphere(0, 0, 0, r) for r in (1.0, 2.0, 3.0)],
               ["core", "coat1", "coat2"])
    model = tmp_path / "m.toml"
    model.write_text('mesh = "layers.step"\nunit = "mm"\n[media]\nin = 2.0\nout = 3.0\n[meshing]\npanel_size = 1.0\n'
                     '[interfaces.coat1]\ninside = "in"\noutside = "out"\n'
                     '[interfaces.coat2]\ninside = "out"\noutside = "vacuum"\n')
    m = load(model)
    interfaces = {i.name: i for i in m.interfaces}
    assert m.conductor_names == ("core",) and m.conductors[0].surfaces == ("core@coat1",)
    assert m.conductor_media == {"core@coat1": "in"}
    assert (interfaces["coat1@coat2"].inside, interfaces["coat1@coat2"].outside) == ("in", "out")
    assert "coat1" not in interfaces and interfaces["coat2"].surfaces == ("coat2",)  # coat1 lies wholly in coat2
    assert not m.problems


@pytest.mark.smoke
def test_iges_and_brep_files_are_read(tmp_path, capsys):
    """IGES carries its unit like STEP (its faces are sewn into solids); BREP carries
    none, so --unit says what it is. A cube of side 1 mm: 0.6607 x 4 pi eps0 x 1 mm =
    73.5 fF (Hwang & Mascagni 2004, as in tests/reference/test_single_bodies.py), within
    3 % on the default coarse mesh."""
    gmsh = gmsh_or_skip()
    from tricharge.io.cadsession import quiet_output

    for name in ("cube.iges", "cube.brep"):
        gmsh.model.add(name)
        gmsh.option.setString("Geometry.OCCTargetUnit", "MM")
        gmsh.model.occ.addBox(0, 0, 0, 1, 1, 1)
        gmsh.model.occ.synchronize()
        try:
            with quiet_output():
                gmsh.write(str(tmp_path / name))
        except Exception as exc:  # gmsh 4.11 writes no IGES (it reads it)
            pytest.skip(f"this gmsh ({gmsh.__version__}) cannot write {name}: {exc}")
        finally:
            gmsh.model.remove()
    for name, unit in (("cube.iges", "m"), ("cube.brep", "mm")):
        out = tmp_path / f"{name}.json"
        assert main(["solve", str(tmp_path / name), "--unit", unit, "--json", str(out), "-q"]) == 0
        c = json.loads(out.read_text())["capacitance_matrix"][0][0]
        assert c == pytest.approx(0.6606782 * 4 * 3.141592653589793 * 8.8541878128e-12 * 1e-3, rel=0.03), name


def test_the_cad_demo_is_what_its_script_writes_and_reads_as_described(capsys):
    """meshes/demo_bushing.toml is the script's text; `demo bushing --inspect` shows the
    rod with its ring as one conductor whose faces in the collar touch epoxy, the plate
    likewise, and the collar as an interface."""
    import importlib.util
    from pathlib import Path

    script = Path(__file__).resolve().parents[1] / "meshes" / "make_cad_demo.py"
    spec = importlib.util.spec_from_file_location("make_cad_demo", script)
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    assert (script.parent / "demo_bushing.toml").read_text() == module.TOML
    assert main(["demo", "bushing", "--inspect"]) == 0
    shown = capsys.readouterr().out
    assert "rod@collar, rod, shield_ring" in shown and "30 kV, in air + epoxy" in shown
    assert "plate, plate@collar" in shown and "epoxy | air" in shown and "no errors" in shown


@pytest.mark.smoke
def test_a_refinement_study_puts_new_vertices_on_curves_and_faces(tmp_path):
    """A cylinder (flat caps, a round side): every vertex after two refinements lies on
    the CAD surface (radius 1 on the side and the rims, on the planes of the caps), so
    the rims stay round and the caps flat."""
    from tricharge.bem.refinement import refine_uniformly

    step = write_step(tmp_path / "can.step", lambda occ: occ.addCylinder(0, 0, 0, 0, 0, 2, 1))
    model = _load(step, panel_size=0.6e-3, edge_grading=1.0)
    v, t = model.vertices, model.triangles
    for _ in range(2):
        v, t, _ = refine_uniformly(v, t, project=model.project)
    r, z = np.hypot(v[:, 0], v[:, 1]) * 1e3, v[:, 2] * 1e3
    on_side = (abs(r - 1) < 1e-9) & (z > -1e-9) & (z < 2 + 1e-9)
    on_caps = ((abs(z) < 1e-9) | (abs(z - 2) < 1e-9)) & (r < 1 + 1e-9)
    assert (on_side | on_caps).all(), np.flatnonzero(~(on_side | on_caps))[:5]
    rim = on_side & on_caps
    assert rim.sum() >= 4 * 2 * 16  # the rims got new vertices, all on the circles


def test_a_study_after_gmsh_was_closed_imports_the_cad_again(tmp_path):
    """Someone (a user's own script) finalises gmsh between reading and solving: the
    projection imports the file again and the study still lands on the sphere."""
    import gmsh

    from tricharge.bem.results import FOUR_PI_EPS0
    from tricharge.pipeline import solve

    step = write_step(tmp_path / "ball.step", lambda occ: occ.addSphere(0, 0, 0, 1.0))
    model = _load(step, panel_size=0.5e-3)
    gmsh.finalize()
    result = solve(model, levels=3)
    assert abs(result.capacitance[0, 0] / (FOUR_PI_EPS0 * 1e-3) - 1) < 2e-4


def test_the_declared_unit_can_be_replaced(tmp_path, capsys):
    """A STEP file declares millimetres; --cad-unit in (or cad_unit in the model file's
    [meshing]) says its numbers are inches: every length 25.4x, so the sphere's
    capacitance (4 pi eps0 R, proportional to R) too. A file whose declared unit cannot
    be read refuses the replacement in one line."""
    from tricharge.io.cadunits import declared_metres

    step = write_step(tmp_path / "ball.step", lambda occ: occ.addSphere(0, 0, 0, 1.0), ["ball"])
    assert declared_metres(step) == 1e-3
    values = []
    for extra in ([], ["--cad-unit", "in"]):
        out = tmp_path / f"c{len(extra)}.json"
        assert main(["solve", str(step), "--panel-size", "0.5mm" if not extra else "12.7mm", "--json", str(out),
                     "-q", *extra]) == 0
        values.append(json.loads(out.read_text())["capacitance_matrix"][0][0])
    assert values[1] / values[0] == pytest.approx(25.4, rel=1e-9)
    model = tmp_path / "m.toml"
    model.write_text('mesh = "ball.step"\nunit = "mm"\n[meshing]\npanel_size = 12.7\ncad_unit = "in"\n')
    assert main(["solve", str(model), "--json", str(tmp_path / "m.json"), "-q"]) == 0
    assert json.loads((tmp_path / "m.json").read_text())["capacitance_matrix"][0][0] == pytest.approx(values[1])
    model.write_text('mesh = "ball.step"\nunit = "mm"\n[meshing]\ncad_unit = "furlong"\n')
    assert main(["solve", str(model)]) == 2
    assert "'meshing.cad_unit' is furlong; give one of m, cm, mm, um, in, mil" in capsys.readouterr().err
    odd = tmp_path / "odd.step"
    odd.write_text(step.read_text().replace("SI_UNIT(.MILLI.,.METRE.)", "SI_UNIT(.FOO.,.METRE.)"))
    assert main(["solve", str(odd), "--cad-unit", "in"]) == 2
    err = capsys.readouterr().err.strip()
    assert "cannot read the length unit the file declares" in err and len(err.splitlines()) == 1, err


@pytest.mark.parametrize("glob, metres", [
    (",,4Hpart,8Hpart.igs,2Hgs,2Hgs,32,308,15,308,15,4Hpart,1.,1,2HIN,1,0.01,13H260101.000000,1E-07,1.,,,11,0;", 0.0254),
    ("1H,,1H;,4Ha,b,8Hpart.igs,2Hgs,2Hgs,32,308,15,308,15,4Hpart,1.,6,1HM,1,0.01,13H260101.000000,1E-07;", 1.0),
    (",,4Hpart,8Hpart.igs,2Hgs,2Hgs,32,308,15,308,15,4Hpart,1.,3,4HFOOT,1,0.01;", 0.3048),
])
def test_an_iges_global_section_says_its_unit(tmp_path, glob, metres):
    """IGES 5.3 global section: parameter 14 is the units flag (1 inch, 6 metre, 3 named
    by parameter 15); Hollerith strings may hold the delimiter ("4Ha,b")."""
    from tricharge.io.cadunits import declared_metres

    lines = [glob[k : k + 72].ljust(72) + f"G{n + 1:7d}" for n, k in enumerate(range(0, len(glob), 72))]
    path = tmp_path / "part.igs"
    path.write_text("\n".join(lines) + "\n")
    assert declared_metres(path) == pytest.approx(metres)
