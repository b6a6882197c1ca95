"""Write the bad-input corpus in tests/data/bad/ (run from anywhere; files are committed).

Each file is malformed or hostile in one way; tests/test_bad_inputs.py runs every one
through ``tricharge solve`` and ``tricharge inspect``. ``cube.stl`` beside this script is a
valid mesh that the model files refer to, so their only fault is their own.
"""

import struct
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
    for name, content in files.items():
        (BAD / name).write_bytes(content)
    (HERE / "big.stl").write_text(ascii_stl([tuple(tuple(3000 * c for c in v) for v in f) for f in CUBE_FACES]))
    folder = BAD / "folder.stl"
    folder.mkdir(exist_ok=True)
    (folder / "README").write_text("A folder where a mesh file is expected.\n")
    print(f"wrote {len(files) + 1} bad inputs to {BAD}")


if __name__ == "__main__":
    main()
