"""Hostile and oversized inputs at the reading stage: size limits and their variable,
declared counts, compressed VTK XML (zlib and lzma; inline, appended base64 and raw),
Gmsh physical names read by ourselves, polygons, and file names that are not UTF-8.

Every refusal is our own error type with a message that names the file."""

import base64
import lzma
import os
import struct
import zlib

import meshio
import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from tricharge import load, shapes
from tricharge.errors import InputFileError, MeshError, OptionError
from tricharge.io import limits
from tricharge.io.gmshscan import check_gmsh_counts, physical_names
from tricharge.io.meshes import read_raw
from tricharge.io.textmeshes import read_ply, triangulate_faces
from tricharge.io.vtkscan import scan_vtk_legacy, scan_vtu
from tricharge.polygons import PolygonError, _ear_clip, triangulate_polygons

POINTS = struct.pack("<9f", 0, 0, 0, 1, 0, 0, 0, 1, 0)
CELLS = ('<Cells><DataArray type="Int32" Name="connectivity" format="ascii">0 1 2</DataArray>'
         '<DataArray type="Int32" Name="offsets" format="ascii">3</DataArray>'
         '<DataArray type="UInt8" Name="types" format="ascii">5</DataArray></Cells>')


def _vtu(points_xml, attributes="", piece='NumberOfPoints="3" NumberOfCells="1"', tail=b"", extra=""):
    head = (f'<?xml version="1.0"?>\n<VTKFile type="UnstructuredGrid" version="0.1" byte_order="LittleEndian" '
            f'{attributes}>\n<UnstructuredGrid><Piece {piece}><Points>')
    return (head.encode() + points_xml + f"</Points>{CELLS}{extra}</Piece></UnstructuredGrid>\n".encode() + tail
            + b"</VTKFile>\n")


def _header(blocks, size, last, sizes, fmt="<I"):
    return b"".join(struct.pack(fmt, x) for x in (blocks, size, last, *sizes))


def _inline(header, data):
    return (b'<DataArray type="Float32" Name="Points" NumberOfComponents="3" format="binary">'
            + base64.b64encode(header) + base64.b64encode(data) + b"</DataArray>")


APPENDED = b'<DataArray type="Float32" Name="Points" NumberOfComponents="3" format="appended" offset="0"/>'
ZLIB = 'compressor="vtkZLibDataCompressor"'
LZMA = 'compressor="vtkLZMADataCompressor"'


def _write(tmp_path, name, data):
    path = tmp_path / name
    path.write_bytes(data)
    return path


# -- size limits -----------------------------------------------------------------------

def test_the_limit_variable_replaces_the_limits(tmp_path, monkeypatch):
    path = _write(tmp_path, "part.stl", b"solid x\n" + b" " * 3 * 2**20 + b"endsolid x\n")
    monkeypatch.setenv(limits.LIMIT_VARIABLE, "2")
    assert limits.input_limit("mesh") == limits.input_limit("model") == 2 * 2**20
    with pytest.raises(InputFileError, match=r"part.stl: the file has 3.0 MiB, more than the 2.0 MiB a mesh file may "
                                             r"have .*raise the limit with TRICHARGE_MAX_INPUT_MB=4"):
        read_raw(path)
    monkeypatch.setenv(limits.LIMIT_VARIABLE, "1.5")
    with pytest.raises(InputFileError, match=r"part.stl: the file has 3.0 MiB, more than the 1.5 MiB"):
        limits.read_limited(path)  # read whole only up to the limit, even without the size check first
    monkeypatch.delenv(limits.LIMIT_VARIABLE)
    assert limits.input_limit("mesh") == limits.MESH_FILE_LIMIT == 2 * 2**30


@pytest.mark.parametrize("value", ["abc", "0", "-5", "nan", "inf", "1e300"])
def test_an_unusable_limit_variable_is_an_option_error(tmp_path, monkeypatch, value):
    monkeypatch.setenv(limits.LIMIT_VARIABLE, value)
    with pytest.raises(OptionError, match=r"TRICHARGE_MAX_INPUT_MB=.* is not a size; give a positive number of MiB"):
        load(_write(tmp_path, "part.stl", b"solid x\nendsolid x\n"))


def test_model_files_have_their_own_small_limit(tmp_path):
    path = _write(tmp_path, "model.toml", b"# padding\n" * (limits.MODEL_FILE_LIMIT // 10 + 1))
    with pytest.raises(InputFileError, match=r"model.toml: the file has 4.0 MiB, more than the 4.0 MiB a model file"):
        load(path)


def test_paths_that_are_not_regular_files(tmp_path):
    fifo = tmp_path / "pipe.stl"
    os.mkfifo(fifo)
    with pytest.raises(InputFileError, match="pipe.stl: is not a regular file"):
        read_raw(fifo)
    with pytest.raises(InputFileError, match=r"cannot be opened \(File name too long\)"):
        read_raw(tmp_path / ("x" * 5000 + ".stl"))
    with pytest.raises(InputFileError, match="is a folder, not a file"):
        limits.check_input_file(tmp_path)
    with pytest.raises(InputFileError, match="cannot be read"):
        limits.read_limited(tmp_path)  # reading a folder


def test_declared_counts_and_expansion_checks():
    with pytest.raises(InputFileError, match=r"f.msh: the \$Nodes section declares 10 items, which need at least 80 "
                                             r"bytes, but the file has 79"):
        limits.check_count("f.msh", "the $Nodes section", 10, 8, 79)
    limits.check_count("f.msh", "the $Nodes section", 10, 8, 80)
    limits.check_expansion("f.vtu", limits.EXPANSION_FLOOR, 1)  # small payloads pass whatever their ratio
    with pytest.raises(InputFileError, match=r"f.vtu: its compressed data expand to 100.0 MiB from 512.0 KiB \(200 "
                                             r"times; real meshes compress less than 100 times\)"):
        limits.check_expansion("f.vtu", 100 * 2**20, 2**19)


# -- VTK XML ---------------------------------------------------------------------------

def test_honest_compressed_vtu_files_are_read(tmp_path):
    """meshio's own output (zlib, lzma, none) and hand-made appended data pass the scan."""
    v, t = shapes.cube(1.0, 3)
    for compression in (None, "zlib", "lzma"):
        path = tmp_path / f"{compression}.vtu"
        meshio.write(path, meshio.Mesh(v, [("triangle", t)]), compression=compression)
        assert scan_vtu(path) == (len(v), len(t))
        assert load(path).n_panels == len(t)
    block = zlib.compress(POINTS)
    raw = _vtu(APPENDED, ZLIB, tail=b'<AppendedData encoding="raw">\n_' + _header(1, 36, 36, [len(block)]) + block
               + b"\n</AppendedData>\n")
    text = _vtu(APPENDED, ZLIB, tail=b'<AppendedData encoding="base64">\n_' + base64.b64encode(
        _header(1, 36, 36, [len(block)])) + base64.b64encode(block) + b"\n</AppendedData>\n")
    squeezed = lzma.compress(POINTS)
    inline_lzma = _vtu(_inline(_header(1, 36, 36, [len(squeezed)]), squeezed), LZMA)
    for name, data in (("raw.vtu", raw), ("text.vtu", text), ("lzma.vtu", inline_lzma)):
        assert load(_write(tmp_path, name, data)).n_panels == 1, name


BOMB = zlib.compress(bytes(8 * 2**20), 9)
LZMA_BOMB = lzma.compress(bytes(8 * 2**20))


@pytest.mark.parametrize("data, message", [
    (_vtu(_inline(_header(1, 36, 36, [len(BOMB)]), BOMB), ZLIB), "expands beyond the 36 bytes it declares"),
    (_vtu(_inline(_header(1, 36, 36, [len(LZMA_BOMB)]), LZMA_BOMB), LZMA), "expands beyond the 36 bytes"),
    (_vtu(_inline(_header(2, 36, 36, [len(LZMA_BOMB)] * 2), LZMA_BOMB * 2), LZMA), "expands beyond"),
    (_vtu(APPENDED, ZLIB, tail=b'<AppendedData encoding="raw">\n_' + _header(1, 36, 36, [len(BOMB)]) + BOMB
          + b"\n</AppendedData>\n"), "expands beyond the 36 bytes"),
    (_vtu(APPENDED, ZLIB, tail=b'<AppendedData encoding="base64">\n_'
          + base64.b64encode(_header(1, 36, 36, [len(BOMB)])) + base64.b64encode(BOMB) + b"\n</AppendedData>\n"),
     "expands beyond the 36 bytes"),
    (_vtu(_inline(_header(1, 2**33, 2**33, [11], "<Q"), zlib.compress(POINTS)), ZLIB + ' header_type="UInt64"'),
     r"its compressed data expand to 8,192.0 MiB, more than the 2,048.0 MiB"),
    (_vtu(_inline(_header(1, 2**27, 0, [11]), zlib.compress(POINTS)), ZLIB), r"expand to 128.0 MiB from .* KiB"),
    (_vtu(_inline(_header(2**32 - 1, 36, 36, []), b""), ZLIB), "declares 4,294,967,295 items"),
    (_vtu(_inline(_header(1, 36, 36, [999]), zlib.compress(POINTS)), ZLIB), "declares more compressed bytes than"),
    (_vtu(_inline(_header(1, 36, 36, [20]), bytes(20)), ZLIB), "is corrupt"),
    (_vtu(_inline(_header(1, 36, 36, [20]), b"\xff" * 20), LZMA), "is corrupt"),
    (_vtu(_inline(_header(1, 36, 36, [8]), zlib.compress(POINTS)[:8]), ZLIB), "ends early"),
    (_vtu(_inline(_header(1, 36, 36, [8]), lzma.compress(POINTS)[:8]), LZMA), "ends early"),
    (_vtu(b'<DataArray type="Float32" format="binary"></DataArray>', ZLIB), "has no block header"),
    (_vtu(b'<DataArray type="Float32" format="binary">AA</DataArray>', ZLIB), r"not a readable VTU file \(Incorrect"),
    (_vtu(b'<DataArray type="Float32" format="binary">' + base64.b64encode(struct.pack("<II", 1, 36)) + b"</DataArray>",
          ZLIB), "has a truncated block header"),
    (_vtu(b'<DataArray type="Float32" format="binary">\xc3\xa9\xc3\xa9\xc3\xa9</DataArray>', ZLIB),
     "not a readable VTU file"),
    (_vtu(b'<DataArray type="Float32" format="appended" offset="x"/>', ZLIB,
          tail=b'<AppendedData encoding="base64">_AAAA</AppendedData>'), "not a readable VTU file"),
    (_vtu(APPENDED.replace(b'"0"', b'"4"'), ZLIB, tail=b'<AppendedData encoding="raw">\n_' + bytes(40)
          + b"\x00\n</AppendedData>\n"), r"no complete data array at appended offset 0"),
    (b'<?xml version="1.0"?><!DOCTYPE x [<!ENTITY a "b">]><VTKFile type="UnstructuredGrid">&a;</VTKFile>',
     "declares a DOCTYPE or ENTITY"),
    (b"<!doctype html><html></html>", "declares a DOCTYPE or ENTITY"),
    (_vtu(b"", ZLIB + ' header_type="Int8"'), "header_type 'Int8' is not one VTK uses"),
    (_vtu(b"", 'compressor="vtkSnappyDataCompressor"'), "unknown compressor 'vtkSnappyDataCompressor'"),
    (_vtu(b"", piece='NumberOfPoints="5000000000" NumberOfCells="1"'), "its pieces declare 5,000,000,000 points"),
    (_vtu(b"", piece='NumberOfPoints="3" NumberOfCells="2000000000"'), "its pieces declare 2,000,000,000 cells"),
    (_vtu(b"", piece='NumberOfPoints="-3" NumberOfCells="1"'), "a piece declares -3 points"),
    (_vtu(b"", piece='NumberOfPoints="three" NumberOfCells="1"'), "not a readable VTU file"),
    (_vtu(b"", piece='NumberOfPoints="3" NumberOfCells="0"'), r"the mesh has no triangles \(its pieces declare 0"),
    (b"<VTKFile><broken" + bytes(range(256)), r"not a readable VTU file \(not well-formed XML\)"),
    (b'<VTKFile x="\xff"><AppendedData encoding="raw">_\x00\x01\n</AppendedData></VTKFile>',
     "not a readable VTU file"),
])
def test_hostile_vtu_is_refused_before_meshio_allocates(tmp_path, data, message):
    with pytest.raises((InputFileError, MeshError), match=message) as caught:
        load(_write(tmp_path, "part.vtu", data))
    assert "part.vtu" in str(caught.value)


def test_references_to_one_appended_array_count_each_time(tmp_path):
    """Thirty arrays at one offset, each declaring 40 MiB: 1.2 GiB from a 3 kB file."""
    block = zlib.compress(POINTS)
    arrays = "".join(f'<DataArray type="Float64" Name="a{k}" format="appended" offset="0"/>' for k in range(30))
    data = _vtu(_inline(_header(1, 36, 36, [len(block)]), block), ZLIB, extra=f"<CellData>{arrays}</CellData>",
                tail=b'<AppendedData encoding="base64">\n_' + base64.b64encode(_header(1, 40 * 2**20, 0, [len(block)]))
                + base64.b64encode(block) + b"\n</AppendedData>\n")
    with pytest.raises(InputFileError, match=r"expand to 1,200.0 MiB"):
        load(_write(tmp_path, "shared.vtu", data))


def test_saved_field_files_get_the_same_scan(tmp_path):
    from tricharge.io.meshes import read_vtk_xml

    path = _write(tmp_path, "field.vtu", _vtu(_inline(_header(1, 36, 36, [len(BOMB)]), BOMB), ZLIB))
    with pytest.raises(InputFileError, match="field.vtu: a compressed block .* expands beyond"):
        read_vtk_xml(path)


@pytest.mark.parametrize("text, message", [
    ("POINTS 4000000000 float\n0 0 0\n", "the POINTS line declares 12,000,000,000 items"),
    ("POINTS 3 float\n0 0 0 1 0 0 0 1 0\nCELLS 1 999999999\n3 0 1 2\n", "the CELLS line declares 999,999,999"),
    ("FIELD data 1\nvalues 1000000 1000000 double\n0\n", "a FIELD array declares 1,000,000,000,000 items"),
    ("DIMENSIONS 1000 1000 1000\n", "its DIMENSIONS make a grid whose coordinates take 22,888.2 MiB"),
])
def test_legacy_vtk_counts_must_fit(tmp_path, text, message):
    path = _write(tmp_path, "grid.vtk", f"# vtk DataFile Version 4.2\nx\nASCII\nDATASET POLYDATA\n{text}".encode())
    with pytest.raises(InputFileError, match=message):
        scan_vtk_legacy(path)


# -- Gmsh ------------------------------------------------------------------------------

MSH = b"$MeshFormat\n2.2 0 8\n$EndMeshFormat\n"
NODES = b"$Nodes\n4\n1 0 0 0\n2 1 0 0\n3 0 1 0\n4 1 1 0\n$EndNodes\n"


def test_gmsh_counts_must_fit(tmp_path):
    v41 = _write(tmp_path, "b.msh", b"$MeshFormat\n4.1 1 8\n" + struct.pack("<i", 1) + b"\n$EndMeshFormat\n$Nodes\n"
                 + struct.pack("<4Q", 1, 10**9, 1, 10**9) + b"\n$EndNodes\n")
    with pytest.raises(InputFileError, match=r"b.msh: the \$Nodes section declares 1,000,000,000 items"):
        check_gmsh_counts(v41)
    elements = _write(tmp_path, "e.msh", MSH + NODES + b"$Elements\n123456789\n1 2 0 1 2 3\n$EndElements\n")
    with pytest.raises(InputFileError, match=r"e.msh: the \$Elements section declares 123,456,789 items"):
        check_gmsh_counts(elements)
    check_gmsh_counts(_write(tmp_path, "x.msh", b"not a mesh"))  # meshio will say what is wrong


@pytest.mark.parametrize("section, message", [
    (b"$PhysicalNames\nmany\n$EndPhysicalNames\n", r"the \$PhysicalNames section does not start with a count"),
    (b'$PhysicalNames\n1\n2 1 "a\xff"\n$EndPhysicalNames\n', r"entry 1 of \$PhysicalNames is not UTF-8 text"),
    (b'$PhysicalNames\n2\n2 1 "a"\n2 two "b"\n$EndPhysicalNames\n', r"entry 2 of \$PhysicalNames is not: dimension"),
    (b'$PhysicalNames\n1\n2 1 "a\n$EndPhysicalNames\n', r"entry 1 of \$PhysicalNames is not: dimension"),
])
def test_malformed_physical_names(tmp_path, section, message):
    with pytest.raises(InputFileError, match=message):
        physical_names(_write(tmp_path, "n.msh", MSH + section + NODES))


def test_physical_names_keep_odd_text_as_data(tmp_path):
    long = "x" * 3000
    section = ('$PhysicalNames\n3\n2 1 "$EndNodes \\"quoted\\" \x1b[31m"\n2 2 "é \t tab"\n2 3 "' + long + '"\n'
               "$EndPhysicalNames\n").encode()
    names = physical_names(_write(tmp_path, "n.msh", MSH + section + NODES))
    assert names == [(2, 1, '$EndNodes "quoted" \x1b[31m'), (2, 2, "é \t tab"), (2, 3, long)]


# -- polygons --------------------------------------------------------------------------

def _area(points, triangles):
    c = np.asarray(points, float)[triangles]
    return 0.5 * np.linalg.norm(np.cross(c[:, 1] - c[:, 0], c[:, 2] - c[:, 0]), axis=1).sum()


def _flat(*xy):
    return np.array([[x, y, 0.0] for x, y in xy])


L_SHAPE = _flat((0, 0), (4, 0), (4, 1), (1, 1), (1, 4), (0, 4))  # area 7, reflex corner at (1, 1)
DART = _flat((0, 0), (2, 1), (4, 0), (2, 3))  # area 4, reflex corner at (2, 1)


@pytest.mark.parametrize("points, area", [(L_SHAPE, 7.0), (DART, 4.0)])
def test_concave_polygons_keep_their_area_from_every_starting_corner(points, area):
    for start in range(len(points)):
        order = np.roll(np.arange(len(points)), -start)
        triangles, owner = triangulate_polygons(points, [order, order[::-1]])
        assert _area(points, triangles) == pytest.approx(2 * area)
        assert owner.tolist() == [0] * (len(points) - 2) + [1] * (len(points) - 2)
        normals = np.cross(*(points[triangles[:, k]] - points[triangles[:, 0]] for k in (1, 2)))
        assert (normals[owner == 0, 2] > 0).all() and (normals[owner == 1, 2] < 0).all()  # orientation kept


def test_convex_polygons_and_triangles_keep_the_fan():
    hexagon = np.c_[np.cos(np.arange(6) / 6 * 2 * np.pi), np.sin(np.arange(6) / 6 * 2 * np.pi), np.zeros(6)]
    assert triangulate_polygons(hexagon, [range(6)])[0].tolist() == [[0, 1, 2], [0, 2, 3], [0, 3, 4], [0, 4, 5]]
    assert triangulate_polygons(hexagon, [[0, 1, 2], [2, 3, 4]])[0].tolist() == [[0, 1, 2], [2, 3, 4]]
    repeated = triangulate_polygons(_flat((0, 0), (1, 0), (1, 1)), [[0, 1, 2, 2]])[0]  # a quad written for a triangle
    assert repeated.tolist() == [[0, 1, 2]]


def test_a_long_concave_outline_is_split_exactly():
    x = np.arange(999, dtype=float)
    comb = np.r_[[[0.0, -1.0]], np.c_[x, np.where(np.arange(999) % 2, 10.0, 5.0)][::-1][::-1], [[998.0, -1.0]]]
    points = np.c_[comb, np.zeros(len(comb))][::-1]  # counter-clockwise
    triangles, _ = triangulate_polygons(points, [np.arange(len(points))])
    newell = np.cross(points, np.roll(points, -1, axis=0)).sum(axis=0)
    assert len(triangles) == len(points) - 2 and _area(points, triangles) == pytest.approx(abs(newell[2]) / 2)


@pytest.mark.parametrize("points, message", [
    (_flat((0, 0), (2, 2), (2, 0), (0, 1)), "crosses or touches itself"),  # bow-tie with area left over
    (_flat((0, 0), (1, 1), (1, 0), (0, 1)), "has no area"),  # symmetric bow-tie: its loops cancel
    (np.array([[0, 0, 0], [1, 0, 0], [1, 1, 1], [0, 1, 0]], float), "is far from flat"),
    (_flat((0, 0), (1, 0), (2, 0), (3, 0), (4, 0)), "has no area"),
    (_flat((0, 0), (0, 0), (1, 0), (1, 0)), "fewer than three distinct corners"),
    (np.array([[np.cos(a), np.sin(a), 0] for a in np.pi / 2 + 4 * np.pi / 5 * np.arange(5)]), "crosses or touches"),
    (_flat((0, 0), (2, 0), (1, 0), (1, 1), (0, 1)), "crosses or touches itself"),  # folds back on an edge
])
def test_polygons_that_cannot_be_split(points, message):
    with pytest.raises(PolygonError, match=message):
        triangulate_polygons(points, [np.arange(len(points))])


def test_too_many_corners_and_no_ear(monkeypatch):
    import tricharge.polygons as polygons

    monkeypatch.setattr(polygons, "MAX_CONCAVE_CORNERS", 5)
    with pytest.raises(PolygonError, match="is not convex and has 6 corners, more than the 5 tricharge splits"):
        triangulate_polygons(L_SHAPE, [np.arange(6)])
    with pytest.raises(PolygonError, match="no corner can be cut off"):
        _ear_clip(L_SHAPE[::-1, :2], 1e-12, 0)  # clockwise: every corner turns right


def test_faces_of_any_size_keep_file_order_and_name_their_line():
    points = np.vstack([L_SHAPE, DART + [10, 0, 0]])
    corners = np.r_[np.arange(6), 6 + np.arange(4), [0, 1, 2]]
    triangles, owner = triangulate_faces("f.obj", points, corners, np.array([6, 4, 3]), lambda k: f"line {k + 7}")
    assert owner.tolist() == [0, 0, 0, 0, 1, 1, 2]
    assert _area(points, triangles) == pytest.approx(7 + 4 + 2)
    with pytest.raises(MeshError, match=r"f.obj: line 8: the face with 4 corners crosses or touches itself"):
        triangulate_faces("f.obj", _flat((0, 0), (2, 2), (2, 0), (0, 1)), np.r_[[0, 1, 2], [0, 1, 2, 3]],
                          np.array([3, 4]), lambda k: f"line {k + 7}")
    with pytest.raises(MeshError, match="f.obj: line 7: face refers to vertex 9, but the file has 4 vertices"):
        triangulate_faces("f.obj", DART, np.array([0, 1, 8]), np.array([3]), lambda k: f"line {k + 7}")


# -- PLY -------------------------------------------------------------------------------

PLY = (b"ply\nformat ascii 1.0\nelement vertex 4\nproperty float x\nproperty float y\nproperty float z\n"
       b"element face %d\nproperty list uchar int vertex_indices\nend_header\n")


def test_ply_polygons_are_split_by_us(tmp_path):
    dart = _write(tmp_path, "dart.ply", PLY % 2 + b"0 0 0\n2 1 0\n4 0 0\n2 3 0\n4 0 1 2 3\n3 0 1 3\n")
    raw = read_ply(dart)
    assert _area(raw.points, raw.triangles) == pytest.approx(4.0 + 2.0)  # trimesh's own fan says 8 + 2
    with pytest.raises(MeshError, match=r"bow.ply: face 0: the face with 4 corners crosses or touches itself"):
        read_ply(_write(tmp_path, "bow.ply", PLY % 1 + b"0 0 0\n2 2 0\n2 0 0\n0 1 0\n4 0 1 2 3\n"))
    with pytest.raises(MeshError, match=r"short.ply: face 1 has 2 corners; a face needs three"):
        read_ply(_write(tmp_path, "short.ply", PLY % 2 + b"0 0 0\n2 2 0\n2 0 0\n0 1 0\n4 0 1 2 3\n2 0 1\n"))
    with pytest.raises(InputFileError, match=r"junk.ply: not a readable PLY file"):
        read_ply(_write(tmp_path, "junk.ply", b"ply\nformat binary_little_endian 1.0\nelement vertex 99\nend_header\n"))
    with pytest.raises(MeshError, match=r"none.ply: the mesh has no triangles \(no faces found\)"):
        read_ply(_write(tmp_path, "none.ply", PLY % 0 + b"0 0 0\n2 2 0\n2 0 0\n0 1 0\n"))


# -- file names that are not UTF-8 -----------------------------------------------------

@pytest.mark.parametrize("ending, content", [
    (".stl", b"solid x\nendsolid x\n"), (".obj", b"v 0 0 0\nf 0 1 2\n"), (".msh", b"not a mesh"),
    (".vtu", b"<VTKFile"), (".vtk", b"# vtk DataFile Version 4.2\nx\nASCII\nDATASET POLYDATA\nPOINTS 9999 float\n"),
    (".ply", b"ply\nformat ascii 1.0\nend_header\n"), (".toml", b"mesh = 5\n"),
])
def test_undecodable_file_names_reach_the_message(tmp_path, ending, content):
    """A file name with bytes that are not UTF-8 (Python gives it as surrogate escapes)."""
    name = os.fsdecode(b"\xff\xfe-part" + ending.encode())
    path = tmp_path / name
    path.write_bytes(content)
    with pytest.raises((InputFileError, MeshError, ValueError)) as caught:
        load(path)
    assert name in str(caught.value) and str(caught.value).count("\n") == 0


def _obj(path, vertices, triangles):
    with open(path, "w") as f:
        f.writelines(f"v {x} {y} {z}\n" for x, y, z in vertices)
        f.writelines(f"f {a + 1} {b + 1} {c + 1}\n" for a, b, c in triangles)
    return path


def test_undecodable_file_names_of_good_meshes_read(tmp_path):
    from tricharge.io.meshes import read_mesh

    v, t = shapes.cube(1.0, 2)
    first = _obj(tmp_path / os.fsdecode(b"\xff-cube.obj"), v, t)
    assert load(first, unit="mm").n_panels == len(t)
    second = _obj(tmp_path / os.fsdecode(b"\xfe-lead.obj"), v + [3.0, 0, 0], t)
    assert read_mesh([first, second], unit="mm").conductor_names == (first.stem, second.stem)


# -- properties of the polygon split -----------------------------------------------------

@settings(max_examples=200, deadline=None)
@given(radii=st.lists(st.floats(0.1, 10.0), min_size=4, max_size=12), tilt=st.floats(-1.0, 1.0))
def test_star_shaped_polygons_are_covered_exactly(radii, tilt):
    """Corners at increasing angles around a centre: always a simple polygon, often concave.
    The triangles cover it exactly (their areas add up to its area) and keep its turn."""
    angle = np.linspace(0, 2 * np.pi, len(radii), endpoint=False)
    points = np.c_[np.cos(angle) * radii, np.sin(angle) * radii, tilt * np.cos(angle) * radii]  # in a tilted plane
    triangles, owner = triangulate_polygons(points, [np.arange(len(radii))])
    newell = np.cross(points, np.roll(points, -1, axis=0)).sum(axis=0)
    corner = points[triangles]
    normals = np.cross(corner[:, 1] - corner[:, 0], corner[:, 2] - corner[:, 0])
    assert len(triangles) == len(radii) - 2 and (owner == 0).all()
    assert np.linalg.norm(normals, axis=1).sum() == pytest.approx(np.linalg.norm(newell), rel=1e-9)
    assert (normals @ newell > 0).all()


@settings(max_examples=300, deadline=None)
@given(corners=st.lists(st.tuples(st.integers(-4, 4), st.integers(-4, 4)), min_size=4, max_size=8))
def test_any_polygon_is_split_exactly_or_refused(corners):
    points = np.array([[x, y, 0.0] for x, y in corners])
    try:
        triangles, _ = triangulate_polygons(points, [np.arange(len(points))])
    except PolygonError:
        return
    newell = np.cross(points, np.roll(points, -1, axis=0)).sum(axis=0)
    corner = points[triangles]
    normals = np.cross(corner[:, 1] - corner[:, 0], corner[:, 2] - corner[:, 0])
    assert np.linalg.norm(normals, axis=1).sum() == pytest.approx(np.linalg.norm(newell), rel=1e-9)
    assert (normals @ newell >= 0).all()


# -- STL -------------------------------------------------------------------------------

@pytest.mark.parametrize("content, error, message", [
    (b"", InputFileError, "the file is empty; export it again"),
    (b"binary".ljust(80) + struct.pack("<I", 7) + bytes(50), InputFileError,
     r"binary STL declares 7 triangles \(434 bytes\) but the file has 134 bytes"),
    (b"solid x\n\0\0\0\0 vertex 0 0 0\n", InputFileError, "neither a binary STL .* nor an ASCII STL"),
    (b"solid x\nvertex 0 0\n", InputFileError, "line 2: a vertex needs three coordinates"),
    (b"solid x\nvertex 0 0 zero\n", InputFileError, "line 2 is not a valid STL vertex: 'vertex 0 0 zero'"),
    (b"solid x\nvertex 0 0 0\nvertex 1 0 0\n", InputFileError, "2 vertices is not a whole number of triangles"),
])
def test_stl_errors(tmp_path, content, error, message):
    with pytest.raises(error, match="part.stl: " + message):
        read_raw(_write(tmp_path, "part.stl", content))


def test_ascii_stl_with_old_mac_line_ends_and_utf8_names(tmp_path):
    text = "solid ünïcode\rfacet normal 0 0 1\router loop\rvertex 0 0 0\rvertex 1 0 0\rvertex 0 1 0\rendloop\r" \
           "endfacet\rendsolid\r"
    raw = read_raw(_write(tmp_path, "mac.stl", text.encode()))
    assert raw.triangles.tolist() == [[0, 1, 2]]
