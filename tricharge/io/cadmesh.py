"""How CAD solids are meshed for the solver: the settings (:class:`Meshing`, from the
command line and the model file's ``[meshing]`` table) and the gmsh size fields that
carry them out.

* ``panel_size``: the target panel size (default: a twentieth of the model's
  bounding-box diagonal);
* ``per_radian``: panels per radian where surfaces curve (gmsh's size from curvature,
  which counts elements per 2 pi);
* ``across_gaps``: at least this many panels across every gap between two solids: on each
  solid's faces, panels no larger than the distance to the faces of the solids it does
  not touch divided by it (0: off);
* ``edge_grading``: panels on sharp edges (faces meeting at more than SHARP_DEGREES) this
  fraction of the panel size, growing back to the panel size one panel size away
  (1: off). The surface charge is singular along such edges.

Settings hold lengths in metres; gmsh works in its own unit (millimetres for files that
carry a unit, the ``--unit`` for BREP files), and :func:`set_sizes` converts with the
reader's scale (see :mod:`tricharge.io.cad`).
"""

from __future__ import annotations

import re
from dataclasses import dataclass, fields, replace

import numpy as np

from ..errors import OptionError
from ..names import printable
from ..units import LENGTH_UNITS, metres_per

#: Faces meeting at more than this many degrees make a sharp edge (common practice, no source).
SHARP_DEGREES = 30.0
#: Panels near a gap are never smaller than this fraction of the panel size.
SMALLEST_FRACTION = 1 / 50
DEFAULTS = {"per_radian": 2.0, "across_gaps": 3, "edge_grading": 0.3}
#: name: (lowest, highest, description) of the numeric settings.
LIMITS = {"per_radian": (0.1, 100.0, "panels per radian"), "across_gaps": (0, 100, "panels across gaps"),
          "edge_grading": (0.01, 1.0, "edge grading (a fraction of the panel size; 1: none)")}


@dataclass(frozen=True)
class Meshing:
    """CAD meshing settings; None means "not given here" (see :meth:`over`).

    ``bodies`` are the names of solids that are dielectric bodies (named by a model
    file's interfaces): where a conductor touches one, the contact faces belong to the
    conductor. ``progress(stage, done, total)`` is told how meshing goes; ``unit`` is
    the unit of files that carry none (BREP); ``cad_unit`` the unit a file's numbers are
    really in, replacing the one a STEP or IGES file declares (and ``unit`` for BREP)."""

    panel_size: float | None = None
    per_radian: float | None = None
    across_gaps: int | None = None
    edge_grading: float | None = None
    bodies: frozenset = frozenset()
    progress: object = None
    unit: str | None = None
    cad_unit: str | None = None

    def over(self, other: "Meshing") -> "Meshing":
        """These settings where given, ``other``'s elsewhere (the command line over the file)."""
        given = {f.name: getattr(self, f.name) for f in fields(self) if getattr(self, f.name) is not None}
        given["bodies"] = self.bodies | other.bodies
        return replace(other, **given)

    def value(self, name: str):
        value = getattr(self, name)
        return DEFAULTS[name] if value is None else value

    def checked(self, where: str = "") -> "Meshing":
        if self.panel_size is not None and not (0 < self.panel_size < np.inf):
            raise OptionError(f"{where}the panel size must be a positive length, got {self.panel_size!r}")
        for name, (low, high, what) in LIMITS.items():
            value = getattr(self, name)
            if value is not None and (isinstance(value, bool) or not low <= value <= high):
                raise OptionError(f"{where}{what} must be between {low:g} and {high:g}, got {printable(value)}")
        return self


def parse_length(value, unit: str, what: str) -> float:
    """A length in metres from a number (in ``unit``) or text like ``"0.5 mm"``."""
    if isinstance(value, (int, float)) and not isinstance(value, bool):
        number, suffix = float(value), unit
    else:
        match = re.fullmatch(r"\s*([-+]?(?:\d+\.?\d*|\.\d+)(?:[eE][-+]?\d+)?)\s*([a-z]*)\s*", str(value))
        if not match or (match.group(2) and match.group(2) not in LENGTH_UNITS):
            raise OptionError(f"{what}: cannot read {printable(value)!r} as a length; write e.g. 0.5mm or a number "
                              f"in {unit} (units: {', '.join(LENGTH_UNITS)})")
        number, suffix = float(match.group(1)), match.group(2) or unit
    length = number * metres_per(suffix)
    if not 0 < length < np.inf:
        raise OptionError(f"{what}: the panel size must be a positive length, got {printable(value)!r}")
    return length


def from_table(table: dict, unit: str, where: str) -> Meshing:
    """Meshing settings from a model file's ``[meshing]`` table (keys as in
    :class:`Meshing`); ``where`` starts every message (the file and the table)."""
    settings = {}
    for key, value in table.items():
        if key == "panel_size":
            settings[key] = parse_length(value, unit, f"{where}{key}'")
            continue
        if key == "cad_unit":
            if not isinstance(value, str) or value not in LENGTH_UNITS:
                raise OptionError(f"{where}{key}' is {printable(value)}; give one of {', '.join(LENGTH_UNITS)}")
            settings[key] = value
            continue
        low, high, what = LIMITS[key]
        if isinstance(value, bool) or not isinstance(value, (int, float)) or not low <= value <= high:
            raise OptionError(f"{where}{key}' is {printable(value)}; give {what}, a number from {low:g} to {high:g}")
        settings[key] = int(value) if key == "across_gaps" else float(value)
    return Meshing(**settings)


def set_sizes(gmsh, settings: Meshing, scale: float) -> float:
    """Global size, curvature, and fields for gaps between solids and sharp edges;
    ``scale`` is metres per gmsh unit. Returns the panel size used (gmsh units)."""
    x0, y0, z0, x1, y1, z1 = gmsh.model.getBoundingBox(-1, -1)
    diagonal = float(np.linalg.norm([x1 - x0, y1 - y0, z1 - z0]))
    size = settings.panel_size / scale if settings.panel_size else diagonal / 20.0
    grading = settings.value("edge_grading")
    gmsh.option.setNumber("Mesh.MeshSizeMax", size)
    gmsh.option.setNumber("Mesh.MeshSizeMin", size * min(grading, 1.0) * SMALLEST_FRACTION)
    gmsh.option.setNumber("Mesh.MeshSizeFromCurvature", max(int(round(2 * np.pi * settings.value("per_radian"))), 1))
    gmsh.option.setNumber("Mesh.MeshSizeExtendFromBoundary", 0)  # small sizes on edges stay near them
    gmsh.option.setNumber("Mesh.Algorithm", 6)
    found = _gap_fields(gmsh, settings.value("across_gaps"), size) + _edge_fields(gmsh, grading, size)
    if found:
        smallest = gmsh.model.mesh.field.add("Min")
        gmsh.model.mesh.field.setNumbers(smallest, "FieldsList", found)
        gmsh.model.mesh.field.setAsBackgroundMesh(smallest)
    return size


def _gap_fields(gmsh, across: int, size: float) -> list[int]:
    """Per solid: on its own faces, panels no larger than (distance to the faces of the
    solids it does not touch) / across, which puts that many panels across every gap.
    Solids that share a face (a conductor in its insulation) have no gap between them."""
    solids = [tag for _, tag in gmsh.model.getEntities(3)]
    if across == 0 or len(solids) < 2:
        return []
    faces = {s: {abs(t) for _, t in gmsh.model.getBoundary([(3, s)], oriented=False, combined=False)} for s in solids}
    out = []
    for s in solids:
        others = sorted({f for o in solids if o != s and not faces[o] & faces[s] for f in faces[o]})
        if not others:
            continue
        distance = gmsh.model.mesh.field.add("Distance")
        gmsh.model.mesh.field.setNumbers(distance, "SurfacesList", others)
        gmsh.model.mesh.field.setNumber(distance, "Sampling", 40)
        scaled = gmsh.model.mesh.field.add("MathEval")
        gmsh.model.mesh.field.setString(scaled, "F", f"Max(F{distance} / {across}, {size * SMALLEST_FRACTION!r})")
        own = gmsh.model.mesh.field.add("Restrict")
        gmsh.model.mesh.field.setNumber(own, "InField", scaled)
        gmsh.model.mesh.field.setNumbers(own, "SurfacesList", sorted(faces[s]))
        out.append(own)
    return out


def _edge_fields(gmsh, grading: float, size: float) -> list[int]:
    """Panels graded from grading * size on sharp edges to size one panel size away."""
    if grading >= 1:
        return []
    signs = {}
    for _, solid in gmsh.model.getEntities(3):
        for _, face in gmsh.model.getBoundary([(3, solid)], oriented=True, combined=False):
            signs.setdefault(abs(face), 1.0 if face > 0 else -1.0)
    sharp = [c for _, c in gmsh.model.getEntities(1) if _is_sharp(gmsh, c, signs)]
    if not sharp:
        return []
    distance = gmsh.model.mesh.field.add("Distance")
    gmsh.model.mesh.field.setNumbers(distance, "CurvesList", sharp)
    gmsh.model.mesh.field.setNumber(distance, "Sampling", 50)
    threshold = gmsh.model.mesh.field.add("Threshold")
    gmsh.model.mesh.field.setNumber(threshold, "InField", distance)
    gmsh.model.mesh.field.setNumber(threshold, "SizeMin", size * grading)
    gmsh.model.mesh.field.setNumber(threshold, "SizeMax", size)
    gmsh.model.mesh.field.setNumber(threshold, "DistMin", 0.0)
    gmsh.model.mesh.field.setNumber(threshold, "DistMax", size)
    return [threshold]


def _is_sharp(gmsh, curve: int, signs: dict) -> bool:
    """Whether the two faces along ``curve`` turn by more than SHARP_DEGREES (their
    outward normals, ``signs`` per face, differ by more than that)."""
    faces, _ = gmsh.model.getAdjacencies(1, curve)
    if len(faces) != 2 or faces[0] == faces[1]:
        return False
    lo, hi = gmsh.model.getParametrizationBounds(1, curve)
    point = gmsh.model.getValue(1, curve, [0.5 * (lo[0] + hi[0])])
    normals = []
    for face in faces:
        _, uv = gmsh.model.getClosestPoint(2, face, point)
        normals.append(signs.get(face, 1.0) * np.asarray(gmsh.model.getNormal(face, uv)))
    cosine = float(normals[0] @ normals[1]) / (np.linalg.norm(normals[0]) * np.linalg.norm(normals[1]) + 1e-300)
    return cosine < np.cos(np.radians(SHARP_DEGREES))
