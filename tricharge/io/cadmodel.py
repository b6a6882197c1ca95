"""What a model file means when its ``mesh`` names CAD files (see :mod:`tricharge.io.cad`
for the surfaces a CAD file gives).

* ``[meshing]`` sets how CAD files are meshed (keys of :class:`~tricharge.io.cadmesh.Meshing`;
  the command line's options win where given); the solids named by ``[interfaces]``
  are the dielectric bodies.
* A solid's name stands for all its surfaces: a conductor's own faces and those where it
  touches dielectric bodies (``rod`` means ``rod`` and ``rod@collar``); a body's own
  faces. Without ``[conductors]``, every solid that is no body is one conductor.
* Faces where a conductor touches a body touch the body's medium (the ``inside`` of the
  body's interface), whatever the conductor's ``medium`` says; faces where two
  bodies touch are an interface between their media, added unless the file has one.
"""

from __future__ import annotations

import contextlib

from ..errors import OptionError
from ..model import Conductor, Interface
from .cad import meshing
from .cadmesh import Meshing, from_table

MESHING_KEYS = ("panel_size", "per_radian", "across_gaps", "edge_grading", "cad_unit")


@contextlib.contextmanager
def file_meshing(path, data: dict, unit: str):
    """CAD files read inside the block follow the file's ``[meshing]`` table (under the
    command line's options) and know the file's dielectric bodies."""
    table = data.get("meshing", {})
    if not isinstance(table, dict):
        raise OptionError(f"{path}: 'meshing' must be a table of {', '.join(MESHING_KEYS)}")
    for key in table:
        if key not in MESHING_KEYS:
            raise OptionError(f"{path}: unknown key 'meshing.{key}'; valid keys are {', '.join(MESHING_KEYS)}")
    settings = from_table(table, unit, f"{path}: 'meshing.")
    bodies = set()
    for spec in (data.get("interfaces") or {}).values():
        if isinstance(spec, dict):
            named = spec.get("surfaces", [])
            bodies.update(str(s) for s in (named if isinstance(named, list) else [named]))
    for name, spec in (data.get("interfaces") or {}).items():
        if isinstance(spec, dict) and "surfaces" not in spec:
            bodies.add(str(name))
    with meshing(Meshing(bodies=frozenset(bodies), unit=unit), under=settings):
        yield


def members(project) -> dict:
    """Solid name -> the surfaces it stands for (see the module docstring); {} for meshes."""
    groups = getattr(project, "groups", None) or {}
    bodies = getattr(project, "bodies", frozenset())
    out = {}
    for name in getattr(project, "solids", ()):
        out[name] = []  # a body wholly inside others has no faces of its own
    for group, (owner, other) in groups.items():
        if other is None or owner not in bodies:
            out.setdefault(owner, []).append(group)
    return {k: tuple(v) for k, v in out.items()}


def body_media(data: dict) -> dict:
    """{solid name: the medium inside it} from a model file's interfaces (checked before)."""
    inside = {}
    for name, spec in (data.get("interfaces") or {}).items():
        named = spec.get("surfaces", [name])
        for solid in (named if isinstance(named, list) else [named]):
            inside.setdefault(str(solid), spec["inside"])
    return inside


def complete(project, data: dict, surfaces, interfaces: list, conductors: list, conductor_media: dict, *,
             default: bool):
    """The model file's interfaces, conductors and conductor media completed for CAD
    input (see the module docstring); unchanged for meshes."""
    groups = getattr(project, "groups", None) or {}
    if not groups:
        return interfaces, conductors, conductor_media
    bodies = getattr(project, "bodies", frozenset())
    inside = body_media(data)
    interfaces = [i for i in interfaces if i.surfaces]  # bodies wholly inside others
    claimed = {s for i in interfaces for s in i.surfaces}
    if default:
        by_owner = {}
        for s in surfaces:
            if s not in claimed and s in groups and groups[s][0] not in bodies:
                by_owner.setdefault(groups[s][0], []).append(s)
        conductors = [Conductor(owner, tuple(own)) for owner, own in by_owner.items()]
    media = dict(conductor_media)
    for conductor in conductors:
        for s in conductor.surfaces:
            other = groups.get(s, (None, None))[1]
            if other in inside:
                media[s] = inside[other]
    added = [Interface(s, (s,), inside[owner], inside[other]) for s, (owner, other) in groups.items()
             if other is not None and owner in bodies and s not in claimed and owner in inside and other in inside]
    return list(interfaces) + added, conductors, media
