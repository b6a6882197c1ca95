"""Write the bad-input corpus in tests/data/bad/ (run from anywhere; files are committed).

Each file is malformed or hostile in one way; tests/test_bad_inputs.py runs every one
through ``tricharge solve`` and ``tricharge inspect``. ``cube.stl`` beside this script is a
valid mesh that the model files refer to, so their only fault is their own.
"""

import base64
import struct
import zlib
from pathlib import Path

HERE = Path(__file__).parent
BAD = HERE / "bad"

CUBE_FACES = [((0, 0, 0), (0, 1, 0), (1, 1, 0)), ((0, 0, 0), (1, 1, 0), (1, 0, 0)),
              ((0, 0, 1), (1, 0, 1), (1, 1, 1)), ((0, 0, 1), (1, 1, 1), (0, 1, 1)),
              ((0, 0, 0), (1, 0, 0), (1, 0, 1)), ((0, 0, 0), (1, 0, 1), (0, 0, 1)),
              ((0, 1, 0), (0, 1, 1), (1, 1, 1)), ((0, 1, 0), (1, 1, 1), (1, 1, 0)),
              ((0, 0, 0), (0, 0, 1), (0, 1, 1)), ((0, 0, 0), (0, 1, 1), (0, 1, 0)),
              ((1, 0, 0), (1, 1, 0), (1, 1, 1)), ((1, 0, 0), (1, 1, 1), (1, 0, 1))]


def ascii_stl(faces, name="part"):
    lines = [f"solid {name}"]
    for face in faces:
        lines += ["facet normal 0 0 0", "outer loop"] + [f"vertex {x} {y} {z}" for x, y, z in face]
        lines += ["endloop", "endfacet"]
    return "\n".join(lines + [f"endsolid {name}", ""])


def binary_stl(faces, declared=None):
    data = bytearray(b"binary STL".ljust(80, b" "))
    data += struct.pack("<I", len(faces) if declared is None else declared)
    for face in faces:
        data += struct.pack("<3f", 0, 0, 0)
        for vertex in face:
            data += struct.pack("<3f", *vertex)
        data += b"\0\0"
    return bytes(data)


TRIANGLE_CELLS = (b'<Cells><DataArray type="Int32" Name="connectivity" format="ascii">0 1 2</DataArray>'
                  b'<DataArray type="Int32" Name="offsets" format="ascii">3</DataArray>'
                  b'<DataArray type="UInt8" Name="types" format="ascii">5</DataArray></Cells>')
POINTS = struct.pack("<9f", 0, 0, 0, 1, 0, 0, 0, 1, 0)


def vtu(points_xml, root_attributes=b"", piece=b'NumberOfPoints="3" NumberOfCells="1"', extra=b"", tail=b""):
    """A VTK XML file with one triangle; ``points_xml`` is the DataArray of its points."""
    return (b'<?xml version="1.0"?>\n<VTKFile type="UnstructuredGrid" version="0.1" byte_order="LittleEndian" '
            + root_attributes + b">\n<UnstructuredGrid>\n<Piece " + piece + b">\n<Points>" + points_xml
            + b"</Points>\n" + TRIANGLE_CELLS + extra + b"\n</Piece>\n</UnstructuredGrid>\n" + tail + b"</VTKFile>\n")


def block_header(blocks, block_size, last, sizes, fmt="<I"):
    """A compressed array's header: number of blocks, block size, last block size, sizes."""
    return b"".join(struct.pack(fmt, x) for x in (blocks, block_size, last, *sizes))


def compressed_points(header, data, fmt="binary", extra=b""):
    text = base64.b64encode(header) + base64.b64encode(data) if fmt == "binary" else b""
    return (b'<DataArray type="Float32" NumberOfComponents="3" format="' + fmt.encode() + b'"' + extra + b">"
            + text + b"</DataArray>")


ZLIB = b'compressor="vtkZLibDataCompressor"'
ZEROS = zlib.compress(bytes(8 * 2**20), 9)  # 8 MiB of zeros in about 8 kB


def vtu_files():
    """Compressed VTK XML made to expand, and other hostile VTK XML."""
    honest = zlib.compress(POINTS, 9)
    appended = block_header(1, 36, 36, [len(ZEROS)]) + ZEROS
    shared = b"".join(b'<DataArray type="Float64" Name="a%d" format="appended" offset="0"/>' % k for k in range(30))
    laughs = b"".join(b'<!ENTITY l%d "&l%d;&l%d;&l%d;&l%d;">' % (k + 1, k, k, k, k) for k in range(12))
    return {
        "vtu_block_expands.vtu": vtu(compressed_points(block_header(1, 36, 36, [len(ZEROS)]), ZEROS), ZLIB),
        "vtu_declares_3gib.vtu": vtu(compressed_points(block_header(1, 3 * 2**30, 3 * 2**30, [len(honest)], "<Q"),
                                                       honest), ZLIB + b' header_type="UInt64"'),
        "vtu_declares_100x.vtu": vtu(compressed_points(block_header(1, 100 * 2**20, 100 * 2**20, [len(honest)]),
                                                       honest), ZLIB),
        "vtu_raw_appended_bomb.vtu": vtu(compressed_points(b"", b"", "appended", b' offset="0"'), ZLIB,
                                         tail=b'<AppendedData encoding="raw">\n_' + appended + b"\n</AppendedData>\n"),
        "vtu_base64_appended_bomb.vtu": vtu(compressed_points(b"", b"", "appended", b' offset="0"'), ZLIB,
                                            tail=b'<AppendedData encoding="base64">\n_' + base64.b64encode(
                                                appended[:16]) + base64.b64encode(ZEROS) + b"\n</AppendedData>\n"),
        "vtu_shared_offsets.vtu": vtu(compressed_points(block_header(1, 36, 36, [len(honest)]), honest), ZLIB,
                                      extra=b"<CellData>" + shared + b"</CellData>",
                                      tail=b'<AppendedData encoding="base64">\n_' + base64.b64encode(
                                          block_header(1, 40 * 2**20, 40 * 2**20, [len(honest)])) +
                                      base64.b64encode(honest) + b"\n</AppendedData>\n"),
        "vtu_countless_blocks.vtu": vtu(compressed_points(block_header(2**32 - 1, 36, 36, []), honest), ZLIB),
        "vtu_corrupt_block.vtu": vtu(compressed_points(block_header(1, 36, 36, [40]), bytes(range(40))), ZLIB),
        "vtu_truncated_block.vtu": vtu(compressed_points(block_header(1, 36, 36, [len(honest) - 4]),
                                                         honest[:-4]), ZLIB),
        "vtu_entities.vtu": b'<?xml version="1.0"?>\n<!DOCTYPE VTKFile [<!ENTITY l0 "ha">' + laughs
                            + b']>\n<VTKFile type="UnstructuredGrid">&l12;</VTKFile>\n',
        "vtu_billions_of_points.vtu": vtu(compressed_points(block_header(1, 36, 36, [len(honest)]), honest), ZLIB,
                                          piece=b'NumberOfPoints="4000000000" NumberOfCells="1"'),
        "vtu_float_header.vtu": vtu(compressed_points(block_header(1, 36, 36, [len(honest)]), honest),
                                    ZLIB + b' header_type="Float64"'),
        "vtu_unknown_compressor.vtu": vtu(compressed_points(block_header(1, 36, 36, [len(honest)]), honest),
                                          b'compressor="vtkSnappyDataCompressor"'),
        "vtu_zero_cells.vtu": vtu(b'<DataArray type="Float32" NumberOfComponents="3" format="ascii">0 0 0 1 0 0 0 1 0'
                                  b"</DataArray>", piece=b'NumberOfPoints="3" NumberOfCells="0"'),
    }


def mesh_files():
    """Empty, hostile or impossible meshes in the other formats."""
    msh_head = b"$MeshFormat\n2.2 0 8\n$EndMeshFormat\n"
    nodes = b"$Nodes\n3\n1 0 0 0\n2 1 0 0\n3 0 1 0\n$EndNodes\n"
    elements = b"$Elements\n1\n1 2 2 1 1 1 2 3\n$EndElements\n"
    vtk_head = b"# vtk DataFile Version 4.2\nbad\nASCII\nDATASET UNSTRUCTURED_GRID\n"
    ply_head = (b"ply\nformat ascii 1.0\nelement vertex 4\nproperty float x\nproperty float y\nproperty float z\n"
                b"element face %d\nproperty list uchar int vertex_indices\nend_header\n")
    square = b"v 0 0 0\nv 1 0 0\nv 1 1 0\nv 0 1 0\n"
    return {
        "stl_zero_triangles.stl": binary_stl([]),
        "stl_solid_only.stl": b"solid part\nendsolid part\n",
        "stl_identical_facets.stl": binary_stl([((1, 2, 3), (1, 2, 3), (1, 2, 3))] * 2000),
        "stl_repeated_facet.stl": binary_stl([CUBE_FACES[0]] * 1000),
        "stl_nul_in_text.stl": b"solid part\nfacet normal 0 0 0\n\0\0\0\n",
        "stl_names_and_two_coordinates.stl": b"solid \xff\x1b[31m\t$name\nfacet normal 0 0 0\nouter loop\n"
                                             b"vertex 0 0\nendloop\nendfacet\nendsolid\n",
        "obj_vertices_only.obj": square,
        "obj_index_zero.obj": square + b"f 0 1 2\n",
        "obj_before_first_vertex.obj": square + b"f -1 -2 -5\n",
        "obj_index_beyond_int64.obj": square + b"f 1 2 99999999999999999999999\n",
        "obj_bowtie_quad.obj": square + b"f 1 3 2 4\n",
        "obj_pentagram.obj": b"v 0 1 0\nv -0.588 -0.809 0\nv 0.951 0.309 0\nv -0.951 0.309 0\nv 0.588 -0.809 0\n"
                             b"f 1 2 3 4 5\n",
        "obj_twisted_quad.obj": b"v 0 0 0\nv 1 0 0\nv 1 1 1\nv 0 1 0\nf 1 2 3 4\n",
        "obj_flat_line.obj": b"v 0 0 0\nv 1 0 0\nv 2 0 0\nv 3 0 0\nf 1 2 3 4\n",
        "obj_figure_eight.obj": b"v 0 0 0\nv 1 0 0\nv 1 1 0\nv -1 0 0\nv -1 -1 0\nf 1 2 3 1 4 5\n",
        "obj_odd_names.obj": square + b"g \xff\xfe\x1b]0;title\x07 $HOME " + b"x" * 5000 + b"\nf 1 2 0\n",
        "msh_nodes_only.msh": msh_head + nodes,
        "msh_zero_elements.msh": msh_head + nodes + b"$Elements\n0\n$EndElements\n",
        "msh_billions_of_nodes.msh": msh_head + b"$Nodes\n4000000000\n1 0 0 0\n$EndNodes\n" + elements,
        "msh41_binary_billions_of_nodes.msh": b"$MeshFormat\n4.1 1 8\n" + struct.pack("<i", 1) + b"\n$EndMeshFormat\n"
                                              b"$Nodes\n" + struct.pack("<4Q", 1, 4_000_000_000, 1, 3) + b"\n",
        "msh_name_not_utf8.msh": msh_head + b'$PhysicalNames\n1\n2 1 "lead\xff"\n$EndPhysicalNames\n' + nodes
                                 + elements,
        "msh_name_unmatched_quote.msh": msh_head + b'$PhysicalNames\n1\n2 1 "lead\n$EndPhysicalNames\n' + nodes
                                        + elements,
        "msh_bowtie_quad.msh": msh_head + b"$Nodes\n4\n1 0 0 0\n2 1 0 0\n3 1 1 0\n4 0 1 0\n$EndNodes\n"
                               b"$Elements\n1\n1 3 2 1 1 1 3 2 4\n$EndElements\n",
        "vtk_billions_of_points.vtk": vtk_head + b"POINTS 4000000000 float\n0 0 0 1 0 0 0 1 0\nCELLS 1 4\n3 0 1 2\n"
                                      b"CELL_TYPES 1\n5\n",
        "vtk_structured_bomb.vtk": b"# vtk DataFile Version 4.2\nbad\nASCII\nDATASET STRUCTURED_POINTS\n"
                                   b"DIMENSIONS 2000 2000 2000\nORIGIN 0 0 0\nSPACING 1 1 1\n",
        "vtk_bowtie_quad.vtk": vtk_head + b"POINTS 4 float\n0 0 0 1 1 0 1 0 0 0 1 0\nCELLS 1 5\n4 0 1 2 3\n"
                               b"CELL_TYPES 1\n9\n",
        "vtk_no_cells.vtk": vtk_head + b"POINTS 3 float\n0 0 0 1 0 0 0 1 0\nCELLS 0 0\nCELL_TYPES 0\n",
        "ply_zero_faces.ply": ply_head % 0 + b"0 0 0\n1 0 0\n1 1 0\n0 1 0\n",
        "ply_bowtie_quad.ply": ply_head % 1 + b"0 0 0\n1 0 0\n1 1 0\n0 1 0\n4 0 2 1 3\n",
    }


def model_files():
    """Model files with values that must never reach the solver."""
    cube = b'mesh = "../cube.stl"\n'
    floating = cube + b"[conductors.c1]\nfloating = true\n"
    return {
        "toml_nested_arrays.toml": b"a = " + b"[" * 5000 + b"]" * 5000 + b"\n",
        "toml_nested_tables.toml": b"a = " + b"{b = " * 3000 + b"1" + b"}" * 3000 + b"\n",
        "toml_ground_far.toml": cube + b"[ground]\nz = -1e200\n",
        "toml_ground_nan.toml": cube + b"[ground]\nz = nan\n",
        "toml_ground_inf.toml": cube + b"[ground]\nz = -inf\n",
        "toml_ground_huge_integer.toml": cube + b"[ground]\nz = -" + b"9" * 400 + b"\n",
        "toml_charge_nan.toml": floating + b"net_charge = nan\n",
        "toml_charge_inf.toml": floating + b"net_charge = -inf\n",
        "toml_charge_huge_integer.toml": floating + b"net_charge = " + b"9" * 400 + b"\n",
        "toml_volts_nan.toml": cube + b"[conductors.c1]\nvolts = nan\n",
        "toml_volts_inf_text.toml": cube + b'[conductors.c1]\nvolts = "1e999 V"\n',
        "toml_permittivity_inf.toml": cube + b'background = "oil"\n[media]\noil = inf\n',
        "toml_permittivity_nan.toml": cube + b'background = "oil"\n[media]\noil = nan\n',
        "toml_permittivity_absurd.toml": cube + b'background = "oil"\n[media]\noil = 1e300\n',
        "toml_permittivity_huge_integer.toml": cube + b"[media]\noil = " + b"9" * 400 + b"\n",
        "toml_mesh_with_nul.toml": b'mesh = "cube\\u0000.stl"\n',
    }


def main():
    BAD.mkdir(exist_ok=True)
    (HERE / "cube.stl").write_text(ascii_stl(CUBE_FACES, "cube"))
    files = {
        "truncated_binary.stl": binary_stl(CUBE_FACES)[:300],
        "huge_declared_count.stl": binary_stl(CUBE_FACES[:2], declared=4_000_000_000),
        "empty.stl": b"",
        "nan_vertex.stl": ascii_stl([((0, 0, 0), (1, 0, 0), ("nan", 1, 0))]).encode(),
        "degenerate.stl": ascii_stl([((0, 0, 0), (1, 0, 0), (2, 0, 0))]).encode(),
        "needle.stl": ascii_stl([((0, 0, 0), (1, 0, 0), (0.5, 1e-6, 0))]).encode(),
        "stl_renamed.msh": ascii_stl(CUBE_FACES).encode(),
        "wrong_header.msh": b"$MeshFormat\n99.9 0 8\n$EndMeshFormat\n",
        "lines_only.msh": (b"$MeshFormat\n2.2 0 8\n$EndMeshFormat\n$Nodes\n2\n1 0 0 0\n2 1 0 0\n$EndNodes\n"
                           b"$Elements\n1\n1 1 2 1 1 1 2\n$EndElements\n"),
        "text_in_binary.ply": (b"ply\nformat binary_little_endian 1.0\nelement vertex 3\nproperty float x\n"
                               b"property float y\nproperty float z\nelement face 1\n"
                               b"property list uchar int vertex_indices\nend_header\n0 0 0\n1 0 0\n0 1 0\n3 0 1 2\n"),
        "garbage.obj": bytes(range(256)) * 4,
        "bad_index.obj": b"v 0 0 0\nv 1 0 0\nv 0 1 0\nf 1 2 99\n",
        "infinite.obj": b"v 0 0 0\nv 1 0 0\nv 0 inf 0\nf 1 2 3\n",
        "garbage.vtu": b"<VTKFile type='UnstructuredGrid'><broken",
        "mistyped.toml": b'mesh = "../cube.stl\nunit = mm\n',
        "unknown_key.toml": b'mesh = "../cube.stl"\nunits = "mm"\n',
        "negative_permittivity.toml": b'mesh = "../cube.stl"\nbackground = "oil"\n[media]\noil = -2.2\n',
        "missing_group.toml": b'mesh = "../cube.stl"\n[conductors.lead]\nsurfaces = ["L3"]\n',
        "mesh_is_itself.toml": b'mesh = "mesh_is_itself.toml"\n',
        "empty_mesh_list.toml": b"mesh = []\n",
        "binary.toml": bytes(range(256)),
        "bad_voltage.toml": b'mesh = "../cube.stl"\n[conductors.c1]\nvolts = "twelve"\n',
        "below_ground.toml": b'mesh = "../cube.stl"\nunit = "mm"\n[ground]\nz = 0.5\n',
        "absurd_size.toml": b'mesh = "../big.stl"\n',  # a 3-km cube in metres
    }
    files.update(vtu_files())
    files.update(mesh_files())
    files.update(model_files())
    for name, content in files.items():
        (BAD / name).write_bytes(content)
    (HERE / "big.stl").write_text(ascii_stl([tuple(tuple(3000 * c for c in v) for v in f) for f in CUBE_FACES]))
    folder = BAD / "folder.stl"
    folder.mkdir(exist_ok=True)
    (folder / "README").write_text("A folder where a mesh file is expected.\n")
    print(f"wrote {len(files) + 1} bad inputs to {BAD}")


if __name__ == "__main__":
    main()
