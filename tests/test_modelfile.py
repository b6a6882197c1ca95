"""Model files (TOML): keys, references, errors; and round trips across mesh formats."""

import json

import meshio
import numpy as np
import pytest
import trimesh

from tricharge import load, shapes, solve
from tricharge.cli import main
from tricharge.errors import TrichargeError
from tricharge.io.modelfile import ModelFileError


def _two_bodies():
    """A sphere and a cube (metres), labels 0 and 1."""
    return shapes.combine(shapes.sphere(0.5, 4), shapes.cube(0.8, 4, center=(1.5, 0, 0)))


def _write_msh(path, names=("ball", "block")):
    v, t, labels = _two_bodies()
    tags = [np.full(int((labels == k).sum()), k + 1, np.int32) for k in (0, 1)]
    cells = [("triangle", t[labels == k]) for k in (0, 1)]
    field = {n: np.array([k + 1, 2]) for k, n in enumerate(names)}
    meshio.write(path, meshio.Mesh(v, cells, cell_data={"gmsh:physical": tags, "gmsh:geometrical": tags},
                                   field_data=field), file_format="gmsh22", binary=False)


def _write(tmp_path, text, name="model.toml"):
    path = tmp_path / name
    path.write_text(text)
    return path


FULL = """
mesh = "parts.msh"
unit = "mm"
background = "air"

[ground]
z = -1000

[media]
air = 1.0
oil = 2.2

[conductors.hv]
surfaces = ["ball"]
medium = "oil"
volts = "12 kV"

[conductors.case]
surfaces = [2]      # by Gmsh group number
floating = true
net_charge = 1e-12
"""


def test_full_model_file(tmp_path):
    _write_msh(tmp_path / "parts.msh")
    model = load(_write(tmp_path, FULL))
    assert model.unit == "mm" and model.background == "air"
    assert model.ground_z == pytest.approx(-1.0)
    assert model.conductor_names == ("hv", "case")
    hv, case = model.conductors
    assert hv.voltage == 12000.0 and hv.surfaces == ("ball",) and not hv.floating
    assert case.floating and case.net_charge == 1e-12 and case.surfaces == ("block",)
    assert model.medium_of_surface("ball") == "oil" and model.medium_of_surface("block") == "air"
    assert model.permittivity("oil") == 2.2
    assert model.vertices.max() < 2e-3  # millimetres converted to metres


def test_model_file_solves_like_the_mesh(tmp_path):
    _write_msh(tmp_path / "parts.msh")
    path = _write(tmp_path, 'mesh = "parts.msh"\nunit = "mm"\n')
    by_model, by_mesh = solve(load(path)), solve(load(tmp_path / "parts.msh", unit="mm"))
    assert by_model.conductors == by_mesh.conductors == ("ball", "block")
    np.testing.assert_array_equal(by_model.capacitance, by_mesh.capacitance)
    out = tmp_path / "r.json"
    assert main(["solve", str(path), "--json", str(out), "-q"]) == 0
    assert json.loads(out.read_text())["unit"] == "mm"


def test_homogeneous_medium_scales_the_capacitance(tmp_path):
    """A background other than vacuum is one setting; C scales with its permittivity (exact)."""
    _write_msh(tmp_path / "parts.msh")
    plain = solve(load(_write(tmp_path, 'mesh = "parts.msh"\n', "a.toml")))
    oil = solve(load(_write(tmp_path, 'mesh = "parts.msh"\nbackground = "oil"\n[media]\noil = 2.2\n', "b.toml")))
    np.testing.assert_allclose(oil.capacitance, 2.2 * plain.capacitance, rtol=1e-12)


def test_full_model_solves_with_plane_and_floating_conductor(tmp_path):
    _write_msh(tmp_path / "parts.msh")
    result = solve(load(_write(tmp_path, FULL)))
    assert result.conductors == ("hv",) and result.floating == ("case",)
    assert result.reference == "ground plane" and result.to_dict()["reference"] == "ground plane"
    assert result.capacitance[0, 0] > 0


def test_one_file_per_conductor(tmp_path):
    v, t, labels = _two_bodies()
    for k, name in enumerate(("left", "right")):
        trimesh.Trimesh(v, t[labels == k], process=True).export(tmp_path / f"{name}.stl")
    path = _write(tmp_path, 'mesh = ["left.stl", "right.stl"]\n[conductors.a]\nsurfaces = ["left"]\n'
                            '[conductors.b]\nsurfaces = ["right"]\n')
    model = load(path)
    assert model.conductor_names == ("a", "b") and model.n_panels == len(t)


@pytest.mark.parametrize("text, message", [
    ('mesh = "parts.msh"\nunits = "mm"\n', r"unknown key 'units'; did you mean 'unit'\?"),
    ('mesh = "parts.msh"\n[conductors.x]\nsurface = ["ball"]\n', r"unknown key 'conductors.x.surface'; did you mean "
                                                                 r"'surfaces'\?"),
    ('mesh = "parts.msh"\n[grund]\nz = 1\n', r"unknown key 'grund'; did you mean 'ground'\?"),
    ('mesh = "parts.msh"\nzzz = 1\n', "unknown key 'zzz'; valid keys are mesh, unit"),
    ('unit = "mm"\n', "no 'mesh' key"),
    ('mesh = "parts.msh"\nunit = "furlong"\n', "unit 'furlong' is unknown"),
    ('mesh = "parts.msh"\n[media]\nair = -3\n', "'media.air' is -3; a relative permittivity must be >= 1"),
    ('mesh = "parts.msh"\n[media]\nair = "one"\n', "'media.air' must be a relative permittivity"),
    ('mesh = "parts.msh"\nbackground = "oil"\n', "background 'oil' is not among the media"),
    ('mesh = "parts.msh"\n[ground]\nheight = 1\n', "unknown key 'ground.height'"),
    ('mesh = "parts.msh"\n[conductors.x]\nsurfaces = ["bal"]\n', r"'conductors.x.surfaces' names surface 'bal' but the "
                                                                r"mesh has ball, block; did you mean 'ball'\?"),
    ('mesh = "parts.msh"\n[conductors.x]\nsurfaces = ["ball"]\nvolts = "12 kA"\n', "cannot read '12 kA' as V"),
    ('mesh = "parts.msh"\n[conductors.x]\nsurfaces = ["ball"]\nfloating = "yes"\n', "must be true or false"),
    ('mesh = "parts.msh"\n[conductors.x]\nsurfaces = ["ball"]\nfloating = true\nvolts = 1\n',
     "is floating and has volts"),
    ('mesh = "parts.msh"\n[conductors.x]\nsurfaces = ["ball"]\nnet_charge = 1\n', "only applies to a floating"),
    ('mesh = "parts.msh"\n[conductors.x]\nsurfaces = ["ball"]\nmedium = "glass"\n', "names 'glass', which is not"),
    ('mesh = "parts.msh"\n[conductors.x]\nsurfaces = ["ball"]\n', "surfaces block belong to no conductor"),
    ('mesh = "parts.msh"\n[interfaces.s]\nsurfaces = ["block"]\ninside = "vacuum"\n', "interface 's' needs 'outside'"),
    ('mesh = "parts.msh"\n[conductors.x]\nsurfaces = ["ball"]\n[conductors.y]\nsurfaces = ["ball", "block"]\n',
     "surface 'ball' is claimed by both conductor 'x' and conductor 'y'"),
    ('mesh = "parts.msh"\nmesh = "again.msh"\n', "is not valid TOML"),
    ('mesh = "missing.msh"\n', "missing.msh: file not found"),
])
def test_model_file_errors(tmp_path, text, message):
    _write_msh(tmp_path / "parts.msh")
    with pytest.raises(TrichargeError, match=message):
        load(_write(tmp_path, text))


def test_unit_given_twice_must_agree(tmp_path):
    _write_msh(tmp_path / "parts.msh")
    path = _write(tmp_path, 'mesh = "parts.msh"\nunit = "mm"\n')
    assert load(path, unit="mm").unit == "mm"
    with pytest.raises(ModelFileError, match="the file says unit = 'mm' but 'cm' was asked for"):
        load(path, unit="cm")


def test_same_matrix_from_every_format(tmp_path):
    """Round trip: .msh (named groups), STL, OBJ (groups) and VTU (region array) agree to 1e-10."""
    v, t, labels = _two_bodies()
    _write_msh(tmp_path / "parts.msh")
    with open(tmp_path / "parts.stl", "w") as f:  # ASCII with full precision (binary STL is float32)
        f.write("solid parts\n")
        for tri in v[t]:
            f.write("facet normal 0 0 0\nouter loop\n")
            f.writelines(f"vertex {x:.17g} {y:.17g} {z:.17g}\n" for x, y, z in tri)
            f.write("endloop\nendfacet\n")
        f.write("endsolid parts\n")
    with open(tmp_path / "parts.obj", "w") as f:
        f.writelines(f"v {x:.17g} {y:.17g} {z:.17g}\n" for x, y, z in v)
        for k, name in enumerate(("ball", "block")):
            f.write(f"g {name}\n")
            f.writelines(f"f {a + 1} {b + 1} {c + 1}\n" for a, b, c in t[labels == k])
    meshio.write(tmp_path / "parts.vtu", meshio.Mesh(v, [("triangle", t)], cell_data={"region": [labels + 1]}))
    results = {ending: solve(load(tmp_path / f"parts.{ending}")) for ending in ("msh", "stl", "obj", "vtu")}
    assert results["msh"].conductors == results["obj"].conductors == ("ball", "block")
    assert results["stl"].conductors == ("c1", "c2") and results["vtu"].conductors == ("region1", "region2")
    reference = results["msh"].capacitance
    for ending, result in results.items():
        np.testing.assert_allclose(result.capacitance, reference, rtol=1e-10, err_msg=ending)


def test_unit_option_equals_prescaled_coordinates(tmp_path):
    """The same mesh read with unit mm, and with coordinates pre-scaled to metres: identical."""
    v, t = shapes.cube(3.0, 4)  # millimetres
    for name, points in (("mm.msh", v), ("m.msh", v * 1e-3)):
        meshio.write(tmp_path / name, meshio.Mesh(points, [("triangle", t)]), file_format="gmsh22", binary=False)
    in_mm = solve(load(tmp_path / "mm.msh", unit="mm")).capacitance
    in_m = solve(load(tmp_path / "m.msh")).capacitance
    np.testing.assert_allclose(in_mm, in_m, rtol=1e-12)


# -- values that must never reach the solver (issue 13) -----------------------------------

_FLOAT = '[conductors.block]\nsurfaces = ["block"]\n[conductors.ball]\nfloating = true\n'


@pytest.mark.parametrize("text, message", [
    ("a = " + "[" * 3000 + "]" * 3000 + "\n", "arrays or tables are nested too deeply to read"),
    ("a = " + "{b = " * 3000 + "1" + "}" * 3000 + "\n", "arrays or tables are nested too deeply to read"),
    ('mesh = "parts.msh"\n[ground]\nz = -1e200\n', r"'ground.z' is -1e\+200 m, beyond any real device; give a height "
                                                   r"within 1e\+09 m"),
    ('mesh = "parts.msh"\nunit = "mm"\n[ground]\nz = 2e12\n', r"'ground.z' is 2000000000000.0 mm, .*within 1e\+12 mm"),
    ('mesh = "parts.msh"\n[ground]\nz = nan\n', "'ground.z' is nan; it must be a height in m, a finite number"),
    ('mesh = "parts.msh"\n[ground]\nz = -inf\n', "'ground.z' is -inf; it must be a height in m, a finite number"),
    ('mesh = "parts.msh"\n[ground]\nz = ' + "9" * 400 + "\n", "'ground.z' is 9999.*a finite number"),
    ('mesh = "parts.msh"\n' + _FLOAT + "net_charge = nan\n", "'conductors.ball.net_charge': 'nan' is not a usable"),
    ('mesh = "parts.msh"\n' + _FLOAT + "net_charge = -inf\n", "'conductors.ball.net_charge': '-inf' is not a usable"),
    ('mesh = "parts.msh"\n' + _FLOAT + 'net_charge = "1e999 C"\n', "'conductors.ball.net_charge': '1e999 C' is not"),
    ('mesh = "parts.msh"\n' + _FLOAT + "net_charge = " + "9" * 400 + "\n",
     "'conductors.ball.net_charge' is 9999.*give a finite number of C"),
    ('mesh = "parts.msh"\n[conductors.ball]\nvolts = nan\n[conductors.block]\n', "'conductors.ball.volts': 'nan' is"),
    ('mesh = "parts.msh"\n[conductors.ball]\nvolts = inf\n[conductors.block]\n', "'conductors.ball.volts': 'inf' is"),
    ('mesh = "parts.msh"\n[conductors.ball]\nvolts = -' + "9" * 400 + "\n[conductors.block]\n",
     "'conductors.ball.volts' is -9999.*give a finite number of V"),
    ('mesh = "parts.msh"\n[media]\noil = inf\n', r"'media.oil' is inf; it must be a relative permittivity \(a number"),
    ('mesh = "parts.msh"\n[media]\noil = nan\n', "'media.oil' is nan; it must be a relative permittivity"),
    ('mesh = "parts.msh"\n[media]\noil = 1e300\n', r"'media.oil' is 1e\+300; a relative permittivity must be >= 1 and "
                                                   r"at most 1e\+06"),
    ('mesh = "parts.msh"\n[media]\noil = ' + "9" * 400 + "\n", "'media.oil' is 9999.*a finite number"),
    ('mesh = "cube\\u0000.stl"\n', r"'mesh' names 'cube\\x00.stl', which is not a file name"),
    ('mesh = ["parts.msh", " "]\n', "'mesh' names ' ', which is not a file name"),
    ('mesh = ["parts.msh"' + ', "parts.msh"' * 5000 + "]\n",
     "'mesh' names 'parts.msh' twice; name every mesh file once"),
])
def test_values_that_cannot_be_solved_are_refused_by_key(tmp_path, text, message):
    _write_msh(tmp_path / "parts.msh")
    with pytest.raises(ModelFileError, match=message) as caught:
        load(_write(tmp_path, text))
    assert "model.toml" in str(caught.value)


def test_non_finite_quantities_are_refused_here_too(tmp_path, monkeypatch):
    """Whatever units.parse_quantity lets through, the model file refuses non-finite values by key."""
    import tricharge.io.modelfile as modelfile

    _write_msh(tmp_path / "parts.msh")
    monkeypatch.setattr(modelfile, "parse_quantity", lambda value, unit, what: float(value))
    with pytest.raises(ModelFileError, match=r"'conductors.ball.net_charge' is nan; give a finite number of C"):
        load(_write(tmp_path, 'mesh = "parts.msh"\n' + _FLOAT + "net_charge = nan\n"))


def test_errors_of_a_mesh_name_the_model_file_too(tmp_path):
    (tmp_path / "zero.stl").write_bytes(b"x" * 80 + b"\0\0\0\0")
    with pytest.raises(TrichargeError, match=r"model.toml: .*zero.stl: the mesh has no triangles"):
        load(_write(tmp_path, 'mesh = "zero.stl"\n'))


def test_a_model_file_without_unit_is_flagged_when_large(tmp_path):
    _write_msh(tmp_path / "parts.msh")  # 2.8 m across in metres
    path = _write(tmp_path, 'mesh = "parts.msh"\n')
    assert load(path).warnings == (f"{path}: no unit given, coordinates read as metres: the model is 2.79 m across; "
                                   'if they are millimetres, add unit = "mm" to the file',)
    assert load(path, unit="m").warnings == ()
    assert load(_write(tmp_path, 'mesh = "parts.msh"\nunit = "m"\n', "b.toml")).warnings == ()


def test_load_refuses_what_is_not_a_path_or_unit(tmp_path):
    from tricharge.errors import OptionError

    with pytest.raises(OptionError, match="load.. needs a file name .text or a path., got NoneType"):
        load(None)
    with pytest.raises(OptionError, match=r"unit must be one of m, cm, mm, um, in, mil \(text\), got \['mm'\]"):
        load(tmp_path / "x.stl", unit=["mm"])
