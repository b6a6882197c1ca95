"""CAD files in: STEP, IGES and BREP solids meshed for the solver through gmsh's
OpenCASCADE kernel (the ``cad`` extra).

Names. Every solid is one part, named as the file names it (a STEP product name: the
last part of gmsh's entity name); solids without a name of their own are ``c1, c2, ...``
in the file's solid order, as the unnamed pieces of a mesh are; a repeated name gets
``-2, -3, ...``. A solid's faces form the surface of that name. Solids are fragmented
together before meshing, so where two touch their meshes share vertices; the faces they
share form a surface of their own, ``a@b``:

* a conductor touching a dielectric body (a solid a model file names in an interface):
  ``conductor@body``, part of the conductor (a model file that names the conductor
  names these faces too, and they touch the body's medium unless it says otherwise);
  a conductor drawn inside a dielectric body is cut out of it;
* two dielectric bodies: ``first@second`` in file order, an interface between their
  media, normals into the second;
* a body drawn inside another body (layers of insulation): cut out of the outer one;
* two conductors that touch or overlap, or two bodies that overlap without one holding
  the other: refused, naming both.

Units. STEP and IGES carry their length unit and are read in metres whatever ``--unit``
says (it then only sets the unit things are shown in); BREP files carry none, so
``--unit`` says what their numbers are in, as for meshes. ``--cad-unit`` (``cad_unit``
in a model file's ``[meshing]``) says what a file's numbers really are in, replacing
the unit a STEP or IGES file declares (:mod:`.cadunits` reads it).

The CAD model stays open after reading: refinement studies move every new vertex onto
the CAD surface (:mod:`tricharge.io.cadproject`), so an error estimate covers the
geometry as well as the discretisation.
"""

from __future__ import annotations

import contextlib
import itertools
import time
from pathlib import Path

import numpy as np

from ..errors import MeshError
from .cadmesh import Meshing, set_sizes
from .cadproject import CadFaces
from .cadsession import CARRIED_SCALE, UNIT_CARRYING, gmsh_session, import_solids, quiet_output, why
from .cadunits import declared_metres
from .rawsurface import RawSurface

CAD_ENDINGS = (".step", ".stp", ".iges", ".igs", ".brep")
#: Refuse meshing that would make more panels than this (estimated from the areas).
MAX_CAD_PANELS = 20_000_000
#: Memory gmsh needs per surface triangle while meshing, bytes (measured: a peak of about
#: 0.75 kB per triangle meshing a sphere into 528,000 triangles, gmsh 4.15; doubled).
BYTES_PER_PANEL = 1500

_current = [Meshing()]
_models = itertools.count(1)


@contextlib.contextmanager
def meshing(settings: Meshing, *, under: Meshing | None = None):
    """Use ``settings`` (over those in force) for the CAD files read inside the block;
    ``under`` fills in what neither gives (a model file's, under the command line's)."""
    current = _current[-1] if under is None else _current[-1].over(under.checked())
    _current.append(settings.checked().over(current))
    try:
        yield
    finally:
        _current.pop()


def _near(gmsh, dim: int, tag: int, scale: float) -> str:
    box = np.asarray(gmsh.model.getBoundingBox(dim, tag)) * scale
    return "(" + ", ".join(f"{x:.4g}" for x in 0.5 * (box[:3] + box[3:])) + ") m"


def owners(gmsh, path: Path, names: list[str], sources: dict, bodies: frozenset, scale: float) -> dict:
    """{volume: owning solid}: a volume in one conductor (and any bodies) is the
    conductor's; in nested bodies only, the innermost body's (layers of insulation drawn
    as solids inside each other); in two conductors or in bodies that merely overlap,
    an overlap (refused)."""
    pieces = {}
    for volume, within in sources.items():
        for k in within:
            pieces.setdefault(k, set()).add(volume)
    owner = {}
    for volume, within in sources.items():
        conductors = [k for k in within if names[k] not in bodies]
        if len(conductors) == 1 or len(within) == 1:
            owner[volume] = conductors[0] if conductors else within[0]
            continue
        inner = [k for k in within if all(pieces[k] <= pieces[o] for o in within)] if not conductors else []
        if not inner:
            pair = conductors[:2] if len(conductors) > 1 else within[:2]
            raise MeshError(f"{path}: {names[pair[0]]} and {names[pair[1]]} overlap near "
                            f"{_near(gmsh, 3, volume, scale)}; move them apart or make them one solid")
        owner[volume] = inner[0]
    return owner


def face_groups(gmsh, path: Path, names: list[str], owner: dict, bodies: frozenset, scale: float):
    """{face: (group name, the volume its normals must point out of)} and the group
    records {group name: (owner solid, other solid or None)} (see the module docstring)."""
    sides = {}
    for volume, k in owner.items():
        for _, face in gmsh.model.getBoundary([(3, volume)], oriented=False, combined=False):
            sides.setdefault(abs(face), []).append((k, volume))
    faces, groups = {}, {}
    for face, side in sorted(sides.items()):
        (first, volume), other = side[0], None
        if len(side) > 1:
            (k1, s1), (k2, s2) = side[:2]
            if k1 == k2:
                continue  # inside one solid
            if names[k1] not in bodies and names[k2] not in bodies:
                raise MeshError(f"{path}: {names[k1]} and {names[k2]} touch (they share a face) near "
                                f"{_near(gmsh, 2, face, scale)}; leave a gap, or make them one solid if they are "
                                "one conductor")
            conductor_second = names[k2] not in bodies and names[k1] in bodies
            (first, volume), other = ((k2, s2), k1) if conductor_second or (k2 < k1 and names[k2] in bodies
                                                                             and names[k1] in bodies) else ((k1, s1), k2)
        group = names[first] if other is None else f"{names[first]}@{names[other]}"
        groups[group] = (names[first], None if other is None else names[other])
        faces[face] = (group, volume)  # normals out of the owner's volume
    return faces, groups


def read_cad(path: Path) -> RawSurface:
    """Mesh the solids of a CAD file; points in metres for STEP/IGES, file numbers for BREP."""
    from ..units import metres_per

    settings = _current[-1]
    gmsh = gmsh_session()
    model = f"tricharge-{next(_models)}-{path.name}"
    gmsh.model.add(model)
    carried = path.suffix.lower() in UNIT_CARRYING
    scale = CARRIED_SCALE if carried else metres_per(settings.cad_unit or settings.unit or "m")
    if carried and settings.cad_unit:  # the numbers are really in cad_unit, whatever the file declares
        scale *= metres_per(settings.cad_unit) / declared_metres(path)
    try:
        names, sources = import_solids(gmsh, path)
        owner = owners(gmsh, path, names, sources, settings.bodies, scale)
        faces, groups = face_groups(gmsh, path, names, owner, settings.bodies, scale)
        seconds = _generate(gmsh, path, settings, scale, sorted(faces))
        raw = _surface_of(gmsh, path, faces, groups)
    except BaseException:
        gmsh.model.remove()
        raise
    raw.cad = _record(gmsh, CadFaces(model, tuple(sorted(faces)), str(path), seconds, names,
                                     tuple(sorted(settings.bodies)), scale if carried else None, groups=groups), raw)
    if carried:  # in metres, as the projection computes them (same product, same bits)
        raw.points, raw.in_metres = raw.cad.nodes * scale, True
    solids = f"{len(names)} solid" + ("s" if len(names) != 1 else "")
    raw.notes.append(f"{path.name}: {solids} meshed into {len(raw.triangles):,} panels in {seconds:.1f} s")
    return raw


def _generate(gmsh, path: Path, settings: Meshing, scale: float, faces: list[int]) -> float:
    """Mesh the faces (curves, then surfaces, with progress); returns the seconds taken."""
    from ..resources import check_memory

    size = set_sizes(gmsh, settings, scale)
    area = sum(gmsh.model.occ.getMass(2, f) for f in faces)
    estimate = 2.31 * area / size ** 2  # equilateral panels of side `size` (a lower bound: fields refine)
    if estimate > MAX_CAD_PANELS:
        raise MeshError(f"{path}: a panel size of {size * scale:.3g} m makes about {estimate:,.0f} panels, more than "
                        f"{MAX_CAD_PANELS:,}; give a larger panel size")
    check_memory(estimate * BYTES_PER_PANEL, f"meshing {path.name} (about {estimate:,.0f} panels)",
                 "give a larger panel size")
    progress = settings.progress or (lambda stage, done, total: None)
    start = time.perf_counter()
    try:
        with quiet_output():
            progress(f"meshing {path.name}", 0, 2)
            gmsh.model.mesh.generate(1)
            progress(f"meshing {path.name}", 1, 2)
            gmsh.model.mesh.generate(2)
            progress(f"meshing {path.name}", 2, 2)
    except Exception as exc:
        raise MeshError(f"{path}: gmsh could not mesh the surfaces ({why(exc)}); repair the CAD or change the "
                        "panel size") from None
    return time.perf_counter() - start


def _surface_of(gmsh, path: Path, faces: dict, groups: dict) -> RawSurface:
    """The meshed faces as a RawSurface, normals outward of each face's owner."""
    node_tags, coords, _ = gmsh.model.mesh.getNodes()
    if not len(node_tags):
        raise MeshError(f"{path}: gmsh made no triangles of the CAD faces; check the solids")
    index = _node_index(node_tags)
    order = list(groups)
    triangles, labels = [], []
    points = coords.reshape(-1, 3)
    for face, (group, volume) in faces.items():
        types, _, nodes = gmsh.model.mesh.getElements(2, face)
        for kind, flat in zip(types, nodes):
            if kind != 2:  # 3-node triangles only (the mesh is linear)
                continue
            tri = index[flat.astype(np.int64)].reshape(-1, 3)
            triangles.append(tri[:, ::-1] if _inward(gmsh, points, tri, face, volume) else tri)
            labels.append(np.full(len(tri), order.index(group)))
    if not triangles:
        raise MeshError(f"{path}: gmsh made no triangles of the CAD faces; check the solids")
    return RawSurface(points, np.vstack(triangles), np.concatenate(labels), order)


def _node_index(node_tags) -> np.ndarray:
    """gmsh node tag -> row of the node arrays (tags need not be contiguous)."""
    index = np.zeros(int(node_tags.max()) + 1, np.int64)
    index[node_tags.astype(np.int64)] = np.arange(len(node_tags))
    return index


def _inward(gmsh, points: np.ndarray, tri: np.ndarray, face: int, volume: int) -> bool:
    """Whether the normals of a face's triangles (consistent within the face) point into
    ``volume``: from the CAD surface under its largest triangles' centres, a small step
    along their normals lands inside it."""
    corners = points[tri]
    normal = np.cross(corners[:, 1] - corners[:, 0], corners[:, 2] - corners[:, 0])
    area = np.linalg.norm(normal, axis=1)
    picked = np.argsort(area)[-5:]
    step = 0.01 * np.sqrt(area[picked])[:, None] * normal[picked] / area[picked][:, None]
    centre = corners[picked].mean(axis=1)
    centre = np.asarray(gmsh.model.getClosestPoint(2, face, centre.ravel().tolist())[0]).reshape(-1, 3)
    votes = 0
    for c, d in zip(centre, step):
        ahead = gmsh.model.isInside(3, volume, (c + d).tolist()) > 0
        behind = gmsh.model.isInside(3, volume, (c - d).tolist()) > 0
        votes += (ahead and not behind) - (behind and not ahead)
    return votes > 0


def _record(gmsh, cad: CadFaces, raw: RawSurface) -> CadFaces:
    """Fill in which faces every node lies on and which curve every curve edge follows."""
    index = _node_index(gmsh.model.mesh.getNodes()[0])
    cad.nodes = raw.points.copy()
    on = {}
    for face in cad.faces:
        _, _, nodes = gmsh.model.mesh.getElements(2, face)
        for i in np.unique(index[np.concatenate(nodes).astype(np.int64)]) if len(nodes) else ():
            on.setdefault(int(i), set()).add(face)
    cad.node_faces = {i: frozenset(f) for i, f in on.items()}
    meshed = set(cad.faces)
    for _, curve in gmsh.model.getEntities(1):
        types, _, nodes = gmsh.model.mesh.getElements(1, curve)
        for kind, flat in zip(types, nodes):
            if kind == 1:  # 2-node lines
                for i, j in index[flat.astype(np.int64)].reshape(-1, 2):
                    cad.curve_edges[(min(i, j), max(i, j))] = curve
        cad.curve_faces[curve] = frozenset(abs(f) for f in gmsh.model.getAdjacencies(1, curve)[0]) & meshed
    return cad
