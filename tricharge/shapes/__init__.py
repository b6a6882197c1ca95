"""Triangle meshes of simple bodies, built from arrays (no files).

Used by the reference tests, the benchmarks and the demo generator, and handy in a
notebook. Every function returns ``(vertices (n, 3) metres, triangles (m, 3) int64)``
with outward normals (right-hand rule); open surfaces (disk, plate) face +z.
"""


from .bodies import box, combine, cube, disk, grid_face, plate, sphere
from .swept import arc_path, arc_rz, capsule, revolve, rod, rotation_minimising_frames, rounded_disk, torus, tube

__all__ = ["arc_path", "arc_rz", "box", "capsule", "combine", "cube", "disk", "grid_face", "plate", "revolve", "rod",
           "rotation_minimising_frames", "rounded_disk", "sphere", "torus", "tube"]
