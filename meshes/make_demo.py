"""Generate the built-in demo: a three-pin header standing over a shield plate.

Scenario (our own, invented for the demo): a small board-to-sensor header with three
square pins, 0.5 mm x 0.5 mm x 4 mm, at 1.27 mm pitch, standing 0.5 mm above a
5 mm x 3 mm x 0.2 mm shield plate. A designer wants the pin-to-pin and pin-to-shield
parasitics. Coordinates are in millimetres; conductors are Gmsh physical groups
named pin1, pin2, pin3 and shield.

Run ``python meshes/make_demo.py`` to rewrite ``meshes/demo_header.msh``.
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


def write_demo(path: Path) -> None:
    points, cells, tags, field_data, offset = [], [], [], {}, 0
    for tag, (name, v, t) in enumerate(demo_parts(), start=1):
        points.append(v)
        cells.append(("triangle", t + offset))
        tags.append(np.full(len(t), tag, dtype=np.int32))
        field_data[name] = np.array([tag, 2])
        offset += len(v)
    mesh = meshio.Mesh(np.vstack(points), cells,
                       cell_data={"gmsh:physical": tags, "gmsh:geometrical": tags}, field_data=field_data)
    meshio.write(path, mesh, file_format="gmsh22", binary=False)


if __name__ == "__main__":
    target = Path(__file__).with_name("demo_header.msh")
    write_demo(target)
    print(f"wrote {target}")
