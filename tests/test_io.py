"""Reading meshes: formats, conductor assignment, units and clear errors (round trips)."""

import meshio
import numpy as np
import pytest
import trimesh

from tricharge import load, shapes
from tricharge.errors import InputFileError, MeshError, OptionError


def _two_cubes():
    return shapes.combine(shapes.cube(1.0, 2, center=(5.0, 0, 0)), shapes.cube(2.0, 2))


def _write_gmsh(path, fmt, names=True, extra_cells=()):
    v, t, labels = _two_cubes()
    cells = [("triangle", t[labels == k]) for k in (0, 1)] + list(extra_cells)
    tags = [np.full(len(c[1]), 7 + k, np.int32) for k, c in enumerate(cells)]
    field = {"lead": np.array([7, 2]), "pad": np.array([8, 2])} if names else {}
    entity = np.zeros(len(v), np.int32)  # Gmsh 4.1 needs each node's (dim, entity) pair
    for k in (0, 1):
        entity[t[labels == k].ravel()] = 7 + k
    dim_tags = np.column_stack([np.full(len(v), 2, np.int32), entity])
    mesh = meshio.Mesh(v, cells, point_data={"gmsh:dim_tags": dim_tags},
                       cell_data={"gmsh:physical": tags, "gmsh:geometrical": tags}, field_data=field)
    meshio.write(path, mesh, file_format=fmt, binary=False)
    return v, t, labels


@pytest.mark.smoke
@pytest.mark.parametrize("fmt", ["gmsh22", "gmsh"])  # Gmsh 2.2 and 4.1
def test_gmsh_physical_names_become_conductors(tmp_path, fmt):
    path = tmp_path / "parts.msh"
    v, t, labels = _write_gmsh(path, fmt)
    model = load(path, unit="mm")
    assert model.conductor_names == ("lead", "pad")
    assert model.n_panels == len(t)
    np.testing.assert_array_equal(np.bincount(model.panel_conductor), np.bincount(labels))
    assert np.ptp(model.vertices[:, 0]) == pytest.approx(np.ptp(v[:, 0]) * 1e-3)
    assert model.unit == "mm" and model.source == str(path)


def test_gmsh_groups_without_names_and_ignored_cells(tmp_path):
    path = tmp_path / "plain.msh"
    lines = ("line", np.array([[0, 1], [1, 2]]))
    _, t, _ = _write_gmsh(path, "gmsh22", names=False, extra_cells=[lines])
    model = load(path)
    assert model.conductor_names == ("group7", "group8")
    assert model.n_panels == len(t)


@pytest.mark.smoke
@pytest.mark.parametrize("ending", ["stl", "obj", "ply"])
def test_trimesh_formats_split_into_components(tmp_path, ending):
    v, t, labels = _two_cubes()
    path = tmp_path / f"parts.{ending}"
    trimesh.Trimesh(v, t, process=False).export(path)
    model = load(path, unit="cm")
    assert model.conductor_names == ("c1", "c2")
    assert model.n_panels == len(t)
    assert np.bincount(model.panel_conductor).tolist() == np.bincount(labels).tolist()
    assert len(model.vertices) == len(v)  # duplicated STL vertices merged back
    assert model.vertices.max() == pytest.approx(v.max() * 1e-2)


def test_binary_and_ascii_stl_agree(tmp_path):
    v, t = shapes.sphere(1.0, 3)
    mesh = trimesh.Trimesh(v, t, process=False)
    (tmp_path / "a.stl").write_text(trimesh.exchange.stl.export_stl_ascii(mesh))
    (tmp_path / "b.stl").write_bytes(trimesh.exchange.stl.export_stl(mesh))
    a, b = load(tmp_path / "a.stl"), load(tmp_path / "b.stl")
    np.testing.assert_allclose(a.vertices, b.vertices, rtol=1e-6)  # binary STL stores float32
    np.testing.assert_array_equal(a.triangles, b.triangles)


def test_components_numbered_by_lowest_triangle(tmp_path):
    """docs/design.md: c1, c2, ... in the order of each component's lowest triangle index."""
    v, t, labels = _two_cubes()
    order = np.argsort(-labels, kind="stable")  # the second cube's triangles first
    path = tmp_path / "swapped.stl"
    trimesh.Trimesh(v, t[order], process=False).export(path)
    model = load(path)
    small = model.panel_conductor[model.vertices[model.triangles[:, 0], 0] > 3.0]
    assert set(small.tolist()) == {1}  # the first cube written second is c2


@pytest.mark.smoke
def test_vtu_with_quads(tmp_path):
    quads = np.array([[0, 1, 2, 3]])
    points = np.array([[0, 0, 0], [1, 0, 0], [1, 1, 0], [0, 1, 0]], float)
    path = tmp_path / "quad.vtu"
    meshio.write(path, meshio.Mesh(points, [("quad", quads)]))
    model = load(path)
    assert model.n_panels == 2 and model.conductor_names == ("c1",)


def test_unknown_unit_and_missing_file(tmp_path):
    with pytest.raises(OptionError, match="unknown length unit 'furlong'; use one of m, cm, mm, um, in, mil"):
        load(tmp_path / "x.stl", unit="furlong")
    with pytest.raises(InputFileError, match="nothere.msh: file not found"):
        load(tmp_path / "nothere.msh")


def test_unknown_format(tmp_path):
    path = tmp_path / "part.sat"
    path.write_text("700 0 1 0")
    with pytest.raises(InputFileError, match=r"part.sat: unknown mesh format '.sat'; tricharge reads .msh, .stl.*\.step"):
        load(path)


def test_corrupt_and_empty_files(tmp_path):
    bad = tmp_path / "bad.msh"
    bad.write_text("not a mesh")
    with pytest.raises(InputFileError, match="bad.msh: not a readable Gmsh file"):
        load(bad)
    empty = tmp_path / "empty.stl"
    empty.write_text("solid x\nendsolid x\n")
    with pytest.raises(MeshError, match="empty.stl: the mesh has no triangles"):
        load(empty)
    lines_only = tmp_path / "lines.msh"
    meshio.write(lines_only, meshio.Mesh(np.eye(3), [("line", np.array([[0, 1]]))]), file_format="gmsh22", binary=False)
    with pytest.raises(MeshError, match=r"lines.msh: the mesh has no triangles \(found line\)"):
        load(lines_only)


def test_model_from_arrays_validates():
    from tricharge import Model

    v, t = shapes.cube(1.0, 2)
    model = Model.from_arrays(v, t, unit="mm")
    assert model.conductor_names == ("c1",) and model.vertices.max() == pytest.approx(0.5e-3)
    with pytest.raises(MeshError, match="surface names must be unique, repeated: a"):
        Model.from_arrays(v, t, labels=np.r_[np.zeros(10), np.ones(len(t) - 10)], conductors=("a", "a"))
    with pytest.raises(MeshError, match="surfaces without triangles: b"):
        Model.from_arrays(v, t, labels=np.zeros(len(t)), conductors=("a", "b"))


def test_vtk_legacy_polygons_and_ignored_volume_cells(tmp_path):
    points = np.array([[0, 0, 0], [1, 0, 0], [1.5, 0.8, 0], [0.5, 1.3, 0], [-0.5, 0.8, 0], [0.5, 0.5, 1]], float)
    mesh = meshio.Mesh(points, [("polygon", np.array([[0, 1, 2, 3, 4]])), ("tetra", np.array([[0, 1, 2, 5]]))])
    path = tmp_path / "pentagon.vtk"
    meshio.write(path, mesh, binary=False)
    model = load(path)
    assert model.n_panels == 3  # the pentagon fan-split, the tetrahedron ignored
    assert any("ignored tetra cells" in note for note in model.notes)


def test_several_files_one_surface_each(tmp_path):
    from tricharge.io.meshes import read_mesh

    for k, name in enumerate(("lead_a", "lead_b")):
        trimesh.Trimesh(*shapes.cube(1.0, 2, center=(3.0 * k, 0, 0)), process=False).export(tmp_path / f"{name}.stl")
    model = read_mesh([tmp_path / "lead_a.stl", tmp_path / "lead_b.stl"])
    assert model.conductor_names == ("lead_a", "lead_b")


def test_named_ascii_stl_solids_are_groups(tmp_path):
    text = ""
    for name, dx in (("gate", 0.0), ("drain", 3.0)):
        v, t = shapes.cube(1.0, 2, center=(dx, 0, 0))
        text += trimesh.exchange.stl.export_stl_ascii(trimesh.Trimesh(v, t, process=False)).replace(
            "solid ", f"solid {name}", 1).replace("endsolid ", f"endsolid {name}", 1)
    path = tmp_path / "two.stl"
    path.write_text(text)
    assert load(path).conductor_names == ("gate", "drain")


# -- empty files of every format (issue 13) ---------------------------------------------

_PLY_HEAD = (b"ply\nformat ascii 1.0\nelement vertex 3\nproperty float x\nproperty float y\nproperty float z\n"
             b"element face 0\nproperty list uchar int vertex_indices\nend_header\n0 0 0\n1 0 0\n0 1 0\n")


@pytest.mark.parametrize("name, content, found", [
    ("zero.stl", b"binary STL".ljust(80) + b"\0\0\0\0", "a binary STL that declares 0 triangles"),
    ("solid.stl", b"solid part\nendsolid part\n", "no facets found"),
    ("points.obj", b"v 0 0 0\nv 1 0 0\nv 0 1 0\n", "no faces found"),
    ("nodes.msh", b"$MeshFormat\n2.2 0 8\n$EndMeshFormat\n$Nodes\n1\n1 0 0 0\n$EndNodes\n", "found no cells"),
    ("empty.ply", _PLY_HEAD, "no faces found"),
    ("empty.vtu", b'<VTKFile type="UnstructuredGrid"><UnstructuredGrid><Piece NumberOfPoints="0" NumberOfCells="0">'
                  b"</Piece></UnstructuredGrid></VTKFile>", "its pieces declare 0 cells"),
    ("empty.vtk", b"# vtk DataFile Version 4.2\nx\nASCII\nDATASET UNSTRUCTURED_GRID\nPOINTS 0 float\nCELLS 0 0\n"
                  b"CELL_TYPES 0\n", "found no cells"),
])
def test_files_without_triangles(tmp_path, name, content, found):
    path = tmp_path / name
    path.write_bytes(content)
    with pytest.raises(MeshError, match=rf"{name}: the mesh has no triangles \({found}\)"):
        load(path)


def test_a_reader_returning_nothing_is_caught(tmp_path, monkeypatch):
    from tricharge.io import meshes

    fake = meshes.MeshFormat("nothing", (".none",), lambda path: meshes.RawSurface(np.zeros((3, 3)), np.zeros((0, 3))))
    monkeypatch.setattr(meshes, "FORMATS", meshes.FORMATS + [fake])
    (tmp_path / "x.none").write_text("x")
    with pytest.raises(MeshError, match=r"x.none: the mesh has no triangles \(3 points but no faces\)"):
        load(tmp_path / "x.none")


# -- OBJ indices and polygons ------------------------------------------------------------

_SQUARE = "v 0 0 0\nv 1 0 0\nv 1 1 0\nv 0 1 0\n"


@pytest.mark.parametrize("faces, error, message", [
    ("f 0 1 2\n", MeshError, r"line 5: face index 0 does not exist \(OBJ numbers vertices from 1"),
    ("f 1 2 3\nf -1 -2 -5\n", MeshError, r"line 6: face index -5 reaches before the first vertex \(only 4 vertices"),
    ("f 1 2 12345678901234567890123\n", MeshError, "line 5: face index 12345678901234567890123 is beyond any vertex"),
    ("f 1 2 7\n", MeshError, "line 5: face refers to vertex 7, but the file has 4 vertices"),
    ("f 1 2\n", InputFileError, r"line 5 is not valid OBJ \(a face needs at least three vertices\)"),
    ("f 1 2 x\n", InputFileError, "line 5 is not valid OBJ"),
    ("v 1 2\n", InputFileError, r"line 5 is not valid OBJ \(a vertex needs three coordinates\)"),
    ("f 1 3 2 4\n", MeshError, "line 5: the face with 4 corners has no area"),
])
def test_obj_index_and_face_errors_name_the_line(tmp_path, faces, error, message):
    path = tmp_path / "part.obj"
    path.write_text(_SQUARE + faces)
    with pytest.raises(error, match="part.obj: " + message):
        load(path)


def _area(model):
    c = model.vertices[model.triangles]
    return 0.5 * np.linalg.norm(np.cross(c[:, 1] - c[:, 0], c[:, 2] - c[:, 0]), axis=1).sum()


def test_obj_polygons_keep_their_area(tmp_path):
    """An L-shaped hexagon (7 m^2) and an arrowhead quad (4 m^2), relative indices too."""
    path = tmp_path / "shapes.obj"
    path.write_text("v 0 0 0\nv 4 0 0\nv 4 1 0\nv 1 1 0\nv 1 4 0\nv 0 4 0\nf 1 2 3 4 5 6\n"
                    "v 10 0 0\nv 12 1 0\nv 14 0 0\nv 12 3 0\nf -4/1 -3/2/2 -2//3 -1\n")
    model = load(path, unit="m", check=False)
    assert model.n_panels == 4 + 2 and _area(model) == pytest.approx(7.0 + 4.0)


def test_quads_and_polygons_through_meshio_keep_their_area(tmp_path):
    points = np.array([[0, 0, 0], [2, 1, 0], [4, 0, 0], [2, 3, 0], [10, 0, 0], [14, 0, 0], [14, 1, 0], [11, 1, 0],
                       [11, 4, 0], [10, 4, 0]], float)
    mesh = meshio.Mesh(points, [("quad", np.array([[0, 1, 2, 3]])), ("polygon", np.array([[4, 5, 6, 7, 8, 9]]))])
    for name in ("shapes.vtu", "shapes.vtk"):
        meshio.write(tmp_path / name, mesh, binary=False)
        model = load(tmp_path / name, check=False)
        assert _area(model) == pytest.approx(4.0 + 7.0), name
    meshio.write(tmp_path / "dart.msh", meshio.Mesh(points[:4], [("quad", np.array([[0, 1, 2, 3]]))]),
                 file_format="gmsh22", binary=False)
    assert _area(load(tmp_path / "dart.msh", check=False)) == pytest.approx(4.0)


def test_meshio_cells_must_fit_their_points(tmp_path):
    path = tmp_path / "bad.vtk"
    path.write_text("# vtk DataFile Version 4.2\nx\nASCII\nDATASET UNSTRUCTURED_GRID\nPOINTS 4 float\n"
                    "0 0 0 1 0 0 1 1 0 0 1 0\nCELLS 1 5\n4 0 1 2 9\nCELL_TYPES 1\n9\n")
    with pytest.raises(MeshError, match=r"bad.vtk: quad cells refer to points that do not exist \(indices up to 9"):
        load(path)
    twisted = tmp_path / "twisted.vtk"
    twisted.write_text(path.read_text().replace("1 1 0 0 1 0", "1 1 1 0 1 0").replace("4 0 1 2 9", "4 0 1 2 3"))
    with pytest.raises(MeshError, match="twisted.vtk: quad cell 0 is far from flat"):
        load(twisted)


def test_region_arrays_must_fit_their_cells(tmp_path):
    from tricharge.io.meshes import read_raw

    class Block:
        type, data = "triangle", np.array([[0, 1, 2], [0, 2, 3]])

    class Mesh:
        points, cells, cell_data = np.eye(4)[:, :3], [Block()], {"region": [np.array([1])]}

    from tricharge.io import meshes

    with pytest.raises(InputFileError, match="x.vtu: a cell-data array has 1 values for 2 triangle cells"):
        meshes._meshio_blocks(Mesh(), tmp_path / "x.vtu", Mesh.cell_data["region"])
    Mesh.points = np.zeros(4)
    with pytest.raises(InputFileError, match=r"x.vtu: the points are not a table of coordinates \(shape \(4,\)\)"):
        meshes._meshio_blocks(Mesh(), tmp_path / "x.vtu", None)
    Mesh.points = [[0, 0, "a"]]
    with pytest.raises(InputFileError, match="x.vtu: not a readable VTU file"):
        meshes._meshio_blocks(Mesh(), tmp_path / "x.vtu", None)
    two_d = meshio.Mesh(np.array([[0, 0], [1, 0], [0, 1.0]]), [("triangle", np.array([[0, 1, 2]]))])
    meshio.write(tmp_path / "flat.vtu", two_d)
    assert read_raw(tmp_path / "flat.vtu").points.shape == (3, 3)


def test_too_many_surfaces(tmp_path, monkeypatch):
    from tricharge.io import meshes

    monkeypatch.setattr(meshes, "MAX_SURFACES", 1)
    path = tmp_path / "two.stl"
    trimesh.Trimesh(*_two_cubes()[:2], process=False).export(path)
    with pytest.raises(MeshError, match=r"two.stl: the mesh has 2 surfaces .*more than the 1 tricharge handles"):
        load(path)


# -- Gmsh physical names read by ourselves -----------------------------------------------

def _gmsh_with_names(path, names_section: str, tags=(7, 8, 9)):
    """Three cubes, physical surface tags ``tags``, and the given $PhysicalNames section."""
    v, t, labels = shapes.combine(*(shapes.cube(1.0, 2, center=(3.0 * k, 0, 0)) for k in range(3)))
    lines = ["$MeshFormat", "2.2 0 8", "$EndMeshFormat", names_section.strip(), "$Nodes", str(len(v))]
    lines += [f"{k + 1} {x} {y} {z}" for k, (x, y, z) in enumerate(v)]
    lines += ["$EndNodes", "$Elements", str(len(t))]
    lines += [f"{k + 1} 2 2 {tags[labels[k]]} {tags[labels[k]]} {a + 1} {b + 1} {c + 1}"
              for k, (a, b, c) in enumerate(t)]
    path.write_text("\n".join(lines + ["$EndElements", ""]))
    return path, labels


def test_gmsh_groups_sharing_a_name_become_one_surface(tmp_path):
    section = '$PhysicalNames\n4\n2 7 "lead"\n2 8 "pad"\n2 9 "lead"\n3 10 "lead"\n$EndPhysicalNames'
    path, labels = _gmsh_with_names(tmp_path / "parts.msh", section)
    model = load(path, unit="mm")
    assert model.surfaces == ("lead", "pad")
    assert np.bincount(model.surface_index).tolist() == [int((labels != 1).sum()), int((labels == 1).sum())]
    assert any("physical surfaces 7, 9 share the name 'lead' and form one surface" in n for n in model.notes)
    toml = tmp_path / "m.toml"
    toml.write_text('mesh = "parts.msh"\nunit = "mm"\n[conductors.a]\nsurfaces = [9]\n[conductors.b]\nsurfaces = [8]\n')
    assert load(toml).conductors[0].surfaces == ("lead",)  # both tag numbers still name the merged surface


def test_gmsh_tag_named_twice_keeps_both_names(tmp_path):
    section = '$PhysicalNames\n4\n2 7 "old"\n2 7 "lead"\n2 8 "pad"\n2 9 "can"\n$EndPhysicalNames'
    path, _ = _gmsh_with_names(tmp_path / "twice.msh", section)
    model = load(path, unit="mm")
    assert model.surfaces == ("lead", "pad", "can")
    assert any("physical surface 7 is named both 'old' and 'lead'" in n for n in model.notes)
    toml = tmp_path / "m.toml"
    toml.write_text('mesh = "twice.msh"\nunit = "mm"\n[conductors.x]\nsurfaces = ["old", "pad", "can"]\n')
    assert load(toml).conductors[0].surfaces == ("lead", "pad", "can")


def test_gmsh_names_are_data(tmp_path):
    odd = 'a $b \\"c\\" \x1b[0m' + "é" * 300
    section = f'$PhysicalNames\n3\n2 7 "{odd}"\n2 8 "{odd}2"\n2 9 "group7"\n$EndPhysicalNames'
    path, _ = _gmsh_with_names(tmp_path / "odd.msh", section)
    assert load(path, unit="mm").surfaces == ('a $b "c" \x1b[0m' + "é" * 300, 'a $b "c" \x1b[0m' + "é" * 300 + "2",
                                              "group7")


def test_names_from_stl_and_obj_are_data(tmp_path):
    text = ""
    for name, dx in ((b"gate \xff\x1b[2J", 0.0), (b"$drain\tx", 3.0)):
        v, t = shapes.cube(1.0, 2, center=(dx, 0, 0))
        solid = trimesh.exchange.stl.export_stl_ascii(trimesh.Trimesh(v, t, process=False)).encode()
        text += solid.replace(b"solid ", b"solid " + name, 1).decode("latin-1")
    path = tmp_path / "named.stl"
    path.write_bytes(text.encode("latin-1"))
    assert load(path, unit="mm").surfaces == ("gate \ufffd\x1b[2J", "$drain x")  # whitespace runs become one space
    obj = tmp_path / "named.obj"
    v, t = shapes.cube(1.0, 2)
    obj.write_bytes(b"".join(f"v {x} {y} {z}\n".encode() for x, y, z in v) + b"g \xfe\x00name " + b"y" * 4000 + b"\n"
                    + b"".join(f"f {a + 1} {b + 1} {c + 1}\n".encode() for a, b, c in t))
    assert load(obj, unit="mm").surfaces == ("\ufffd\x00name " + "y" * 4000,)


# -- a unit that was not given ------------------------------------------------------------

def test_a_large_model_without_a_unit_is_flagged(tmp_path):
    path = tmp_path / "part.stl"
    trimesh.Trimesh(*shapes.cube(2.54, 2), process=False).export(path)  # a 2.54 mm part read as metres
    model = load(path)
    assert model.warnings == (f"{path}: no unit given, coordinates read as metres: the model is 4.4 m across; if they "
                              "are millimetres, add --unit mm",)
    assert load(path, unit="m").warnings == () and load(path, unit="mm").warnings == ()
    small = tmp_path / "small.stl"
    trimesh.Trimesh(*shapes.cube(0.5, 2), process=False).export(small)
    assert load(small).warnings == ()  # 0.87 m across
