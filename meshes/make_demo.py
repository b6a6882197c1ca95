"""Generate the demo meshes and model files in ``meshes/``.

Three scenarios, all our own and invented for the demos (no real product or company):

* ``demo_header.msh`` -- a small board-to-sensor header with three square pins,
  0.5 mm x 0.5 mm x 4 mm, at 1.27 mm pitch, standing 0.5 mm above a 5 mm x 3 mm x 0.2 mm
  shield plate. A designer wants the pin-to-pin and pin-to-shield parasitics.
  Conductors are Gmsh physical groups named pin1, pin2, pin3 and shield.
* ``demo_package.msh`` + ``demo_package.toml`` -- an invented four-lead sensor package:
  a 3 mm x 3 mm x 1 mm mold body on a 0.1 mm board substrate over its ground plane, holding a
  die on its paddle, four bond pads, four gold-style bond wires and four leads, and four
  board traces: zero-thickness copper sheets in the board's top face beside the mold.
  Each signal net is lead + wire + pad + trace; the designer wants the net-to-net
  coupling.
* ``demo_hv.msh`` + ``demo_hv.toml`` -- an invented high-voltage test cell in air: a
  round-ended rod at 50 kV with a grading ring near its top, 30 mm above a grounded
  rounded disk. The engineer wants the field at the rod tip.

Coordinates are in millimetres. Each part is one Gmsh physical surface group, named as
listed in the model files. Run ``python meshes/make_demo.py`` from the repository root
to rewrite every file and print the panel counts.
"""

from pathlib import Path

import meshio
import numpy as np

from tricharge import shapes

PITCH = 1.27
PIN = dict(size=(0.5, 0.5, 4.0), divisions=(3, 3, 20))
SHIELD = dict(size=(5.0, 3.0, 0.2), divisions=(25, 15, 1), center=(0.0, 0.0, -0.6))


def demo_parts():
    """[(name, vertices mm, triangles)] of the demo's conductors."""
    parts = [(f"pin{k + 1}", *shapes.box(center=(x, 0.0, 2.0), **PIN)) for k, x in enumerate((-PITCH, 0.0, PITCH))]
    parts.append(("shield", *shapes.box(**SHIELD)))
    return parts


def write_parts(path: Path, parts) -> None:
    """Write [(name, vertices (n, 3), triangles (m, 3))] as Gmsh 2.2 ASCII, one physical surface per part."""
    points, cells, tags, field_data, offset = [], [], [], {}, 0
    for tag, (name, v, t) in enumerate(parts, start=1):
        points.append(v)
        cells.append(("triangle", t + offset))
        tags.append(np.full(len(t), tag, dtype=np.int32))
        field_data[name] = np.array([tag, 2])
        offset += len(v)
    mesh = meshio.Mesh(np.vstack(points), cells,
                       cell_data={"gmsh:physical": tags, "gmsh:geometrical": tags}, field_data=field_data)
    meshio.write(path, mesh, file_format="gmsh22", binary=False)


def write_demo(path: Path) -> None:
    """Write the three-pin header demo to ``path`` (Gmsh 2.2 ASCII)."""
    write_parts(path, demo_parts())


# --- the four-lead package (mm) ---------------------------------------------------------

MOLD = dict(size=(3.0, 3.0, 1.0), divisions=(15, 15, 5), center=(0.0, 0.0, 0.6))      # z 0.1 .. 1.1
BOARD = dict(size=(5.0, 5.0, 0.1), divisions=(25, 25, 1), center=(0.0, 0.0, 0.05))    # z 0 .. 0.1, on the plane
PADDLE = dict(size=(1.0, 1.0, 0.35), divisions=(10, 10, 4), center=(0.0, 0.0, 0.475))  # paddle + die, z 0.3 .. 0.65
LEAD = dict(size=(0.6, 0.3, 0.15), divisions=(12, 6, 3))                              # z 0.3 .. 0.45
PAD = dict(size=(0.12, 0.12, 0.02), divisions=(3, 3, 1))                              # z 0.67 .. 0.69
LEAD_Z, PAD_Z = 0.375, 0.68          # box centres
WIRE_RADIUS, WIRE_PANEL, LOOP_HEIGHT = 0.02, 0.02, 0.25
WIRE_GAP = 0.02                      # clearance between a wire end and its pad or lead
CORNERS = [(-1, 1), (-1, -1), (1, -1), (1, 1)]  # net k sits at corner k, counter-clockwise
# Board traces (sheets in the board's top face, on its 0.2 mm grid): 0.2 mm wide and 2 mm
# long, 0.2 mm from the mold's wall; traces 1 and 2 (and 3 and 4) meet end to end across a
# 0.2 mm gap at y = 0, where the field between nets at different voltages peaks.
TRACE_X, TRACE_Y = (1.7, 1.9), (0.1, 2.1)


def _top(box_args, z_center):
    return z_center + box_args["size"][2] / 2


def package_parts():
    """[(name, vertices mm, triangles)] of the package: leads, wires, pads, paddle, mold.

    Bond pads float 0.02 mm above the die (a passivation layer in the story) and each
    wire stops ``WIRE_GAP`` short of its pad and its lead, so every part is a separate
    closed body that touches nothing. Lead k, wire k and pad k are nevertheless one
    conductor electrically: the model file lists them together as net k.
    """
    leads, wires, pads = [], [], []
    lift = WIRE_GAP + WIRE_RADIUS    # the wire's lowest point clears the surface by at least WIRE_GAP
    for k, (sx, sy) in enumerate(CORNERS, start=1):
        lead_center, pad_center = (1.1 * sx, 0.5 * sy, LEAD_Z), (0.35 * sx, 0.35 * sy, PAD_Z)
        leads.append((f"lead{k}", *shapes.box(center=lead_center, **LEAD)))
        pads.append((f"pad{k}", *shapes.box(center=pad_center, **PAD)))
        start = (0.35 * sx, 0.35 * sy, _top(PAD, PAD_Z) + lift)
        end = (1.0 * sx, 0.5 * sy, _top(LEAD, LEAD_Z) + lift)
        path = shapes.arc_path(start, end, LOOP_HEIGHT, 96)
        wires.append((f"wire{k}", *shapes.tube(path, WIRE_RADIUS, WIRE_PANEL)))
    return leads + wires + pads + [("paddle", *shapes.box(**PADDLE))] + _mold_and_board()


def _on_trace(c, sx, sy):
    """True where the centroids ``c`` lie on the trace of the net at corner (sx, sy)."""
    x, y = sx * c[:, 0], sy * c[:, 1]
    return (x > TRACE_X[0]) & (x < TRACE_X[1]) & (y > TRACE_Y[0]) & (y < TRACE_Y[1])


def _faces_without(vertices, triangles, keep):
    """(vertices, triangles) keeping the triangles whose centroids satisfy ``keep(c)``."""
    centroids = vertices[triangles].mean(axis=1)
    return vertices, triangles[keep(centroids)]


def _on_a_trace(c):
    return np.any([_on_trace(c, sx, sy) for sx, sy in CORNERS], axis=0)


def _mold_and_board():
    """The mold body (open at the bottom) standing on a board substrate that rests on the
    ground plane. The board's top is split where the mold stands on it, so three
    interfaces meet along shared vertices: mold|air, mold|board and board|air. The
    board's bottom lies in the ground plane and is left out."""
    mold_bottom = MOLD["center"][2] - MOLD["size"][2] / 2
    board_top = BOARD["center"][2] + BOARD["size"][2] / 2
    half_x, half_y = MOLD["size"][0] / 2, MOLD["size"][1] / 2
    mold = _faces_without(*shapes.box(**MOLD), lambda c: c[:, 2] > mold_bottom + 1e-9)
    top_v, top_t = shapes.plate(BOARD["size"][:2], BOARD["divisions"][:2], center=(0.0, 0.0, board_top))
    under = lambda c: (np.abs(c[:, 0]) < half_x) & (np.abs(c[:, 1]) < half_y)  # noqa: E731
    base = _faces_without(top_v, top_t, under)
    board_top_faces = _faces_without(top_v, top_t, lambda c: ~under(c) & ~_on_a_trace(c))
    traces = [(f"trace{k}", *_faces_without(top_v, top_t, lambda c, s=corner: _on_trace(c, *s)))
              for k, corner in enumerate(CORNERS, start=1)]
    edge = _faces_without(*shapes.box(**BOARD), lambda c: (c[:, 2] > 1e-9) & (c[:, 2] < board_top - 1e-9))
    return [("mold", *mold), ("mold_base", *base), ("board_top", *board_top_faces), ("board_edge", *edge)] + traces


PACKAGE_TOML = """\
# Invented four-lead sensor package (demo scenario of our own), units mm.
# Generated by meshes/make_demo.py; edit that script, not this file.
mesh = "demo_package.msh"
unit = "mm"
background = "air"

[ground]
z = 0.0            # the board's ground plane; the 0.1 mm board substrate rests on it

[media]
air = 1.0
mold = 3.9         # epoxy mold compound (typical value, invented for the demo)
board = 4.4        # glass-epoxy board substrate (typical value, invented for the demo)

# Lead, wire and pad are separate closed bodies with small gaps between them in the
# mesh, and the trace is a zero-thickness sheet on the board (its solder joint to the
# lead is not modelled); listing them together makes them one conductor.
[conductors.net1]
surfaces = ["lead1", "wire1", "pad1", "trace1"]
medium = "mold"         # the trace lies in the board's top face: board below, air above
volts = "3.3 V"

[conductors.net2]
surfaces = ["lead2", "wire2", "pad2", "trace2"]
medium = "mold"
volts = "0 V"

[conductors.net3]
surfaces = ["lead3", "wire3", "pad3", "trace3"]
medium = "mold"
volts = "1.65 V"

[conductors.net4]
surfaces = ["lead4", "wire4", "pad4", "trace4"]
medium = "mold"
volts = "3.3 V"

[conductors.paddle]
surfaces = ["paddle"]   # die paddle with the die on it, one box
medium = "mold"
floating = true         # left unconnected in this part

[interfaces.mold_skin]
surfaces = ["mold"]
inside = "mold"
outside = "air"

[interfaces.mold_base]     # where the mold stands on the board; normals point up
surfaces = ["mold_base"]
inside = "board"
outside = "mold"

[interfaces.board_skin]    # the board's top around the mold, and its edges
surfaces = ["board_top", "board_edge"]
inside = "board"
outside = "air"
"""


# --- the high-voltage test cell (mm) ---------------------------------------------------

ROD = dict(radius=5.0, length=120.0, panel_size=2.0, center=(0.0, 0.0, 95.0))     # tip at z = 35
RING = dict(major_radius=25.0, minor_radius=4.0, panel_size=2.5, center=(0.0, 0.0, 140.0))
DISK = dict(radius=40.0, thickness=10.0, panel_size=4.0, center=(0.0, 0.0, 0.0))  # top face at z = 5


def hv_parts():
    """[(name, vertices mm, triangles)] of the HV cell: rod, grading ring, grounded disk."""
    return [("hv_rod", *shapes.capsule(**ROD)), ("hv_ring", *shapes.torus(**RING)),
            ("ground_disk", *shapes.rounded_disk(**DISK))]


HV_TOML = """\
# Invented high-voltage test cell in air (demo scenario of our own), units mm.
# Generated by meshes/make_demo.py; edit that script, not this file.
mesh = "demo_hv.msh"
unit = "mm"
background = "air"

[media]
air = 1.0

# The grading ring is a separate body from the rod (16 mm apart) but the same conductor.
[conductors.hv]
surfaces = ["hv_rod", "hv_ring"]
volts = "50 kV"

[conductors.ground]
surfaces = ["ground_disk"]
volts = "0 V"
"""


def main(directory: Path = Path(__file__).parent) -> None:
    """Write every demo mesh and model file into ``directory`` and print panel counts per group."""
    write_demo(directory / "demo_header.msh")
    print(f"wrote {directory / 'demo_header.msh'}: {sum(len(t) for _, _, t in demo_parts())} panels")
    for stem, parts, toml in (("demo_package", package_parts(), PACKAGE_TOML), ("demo_hv", hv_parts(), HV_TOML)):
        write_parts(directory / f"{stem}.msh", parts)
        (directory / f"{stem}.toml").write_text(toml)
        counts = ", ".join(f"{name} {len(t)}" for name, _, t in parts)
        print(f"wrote {directory / stem}.msh and .toml: {sum(len(t) for _, _, t in parts)} panels ({counts})")


if __name__ == "__main__":
    main()
