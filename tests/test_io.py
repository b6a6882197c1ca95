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


@pytest.mark.parametrize("fmt", ["gmsh22", "gmsh"])  # Gmsh 2.2 and 4.1
def test_gmsh_physical_names_become_conductors(tmp_path, fmt):
    path = tmp_path / "parts.msh"
    v, t, labels = _write_gmsh(path, fmt)
    model = load(path, unit="mm")
    assert model.conductor_names == ("lead", "pad")
    assert model.n_panels == len(t)
    np.testing.assert_array_equal(np.bincount(model.conductor_labels), np.bincount(labels))
    assert np.ptp(model.vertices[:, 0]) == pytest.approx(np.ptp(v[:, 0]) * 1e-3)
    assert model.unit == "mm" and model.source == str(path)


def test_gmsh_groups_without_names_and_ignored_cells(tmp_path):
    path = tmp_path / "plain.msh"
    lines = ("line", np.array([[0, 1], [1, 2]]))
    _, t, _ = _write_gmsh(path, "gmsh22", names=False, extra_cells=[lines])
    model = load(path)
    assert model.conductor_names == ("group7", "group8")
    assert model.n_panels == len(t)


@pytest.mark.parametrize("ending", ["stl", "obj", "ply"])
def test_trimesh_formats_split_into_components(tmp_path, ending):
    v, t, labels = _two_cubes()
    path = tmp_path / f"parts.{ending}"
    trimesh.Trimesh(v, t, process=False).export(path)
    model = load(path, unit="cm")
    assert model.conductor_names == ("c1", "c2")
    assert model.n_panels == len(t)
    assert np.bincount(model.conductor_labels).tolist() == np.bincount(labels).tolist()
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
    small = model.conductor_labels[model.vertices[model.triangles[:, 0], 0] > 3.0]
    assert set(small.tolist()) == {1}  # the first cube written second is c2


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
    path = tmp_path / "part.step"
    path.write_text("ISO-10303-21;")
    with pytest.raises(InputFileError, match=r"part.step: unknown mesh format '.step'; tricharge reads .msh, .stl"):
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
