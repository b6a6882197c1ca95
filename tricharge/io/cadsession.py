"""The gmsh session tricharge reads CAD files with: started quietly, its global options
put back after use, files imported and their solids fragmented together, a model
imported again when a refinement study needs it after it was closed."""

from __future__ import annotations

import contextlib
import os
import re
import tempfile
from pathlib import Path

from ..errors import InputFileError, MeshError

#: Endings whose files carry their length unit (gmsh then works in millimetres).
UNIT_CARRYING = (".step", ".stp", ".iges", ".igs")
#: Metres per gmsh unit for those files.
CARRIED_SCALE = 1e-3
#: The Debian/Ubuntu packages whose libraries the gmsh wheel loads (from ``ldd`` of its
#: libgmsh on Debian 12; README and .ci/run list the same).
GMSH_SYSTEM_PACKAGES = "libglu1-mesa libgl1 libopengl0 libxcursor1 libxft2 libxinerama1 libxext6 libgomp1"
#: gmsh's name for a solid of a STEP file without product names (and no name at all).
DEFAULT_NAME = re.compile(r"^(Open CASCADE STEP translator|$)")


def gmsh_session():
    """The gmsh module, initialised quietly; a one-line error when it is missing."""
    from ..extras import require

    require("cad", "reading CAD files (.step .stp .iges .igs .brep)")
    try:
        import gmsh
    except OSError as exc:  # the wheel's shared libraries are missing
        raise InputFileError(f"gmsh cannot load ({str(exc)[:120]}); install the system libraries it needs "
                             f"(Debian/Ubuntu: apt-get install {GMSH_SYSTEM_PACKAGES})") from None
    if not gmsh.isInitialized():
        try:  # Ctrl-C stays tricharge's (gmsh 4.12 and later install a handler unless told not to)
            gmsh.initialize(readConfigFiles=False, interruptible=False)
        except TypeError:  # gmsh 4.11: no such argument, and no handler
            gmsh.initialize(readConfigFiles=False)
    gmsh.option.setNumber("General.Terminal", 0)
    return gmsh


@contextlib.contextmanager
def quiet_output():
    """OpenCASCADE prints to the process's standard output: send it elsewhere."""
    with tempfile.TemporaryFile() as sink:
        saved = os.dup(1)
        try:
            os.dup2(sink.fileno(), 1)
            yield
        finally:
            os.dup2(saved, 1)
            os.close(saved)


@contextlib.contextmanager
def options(gmsh, numbers: dict, strings: dict = None):
    """gmsh options set inside the block and put back after it (they are global)."""
    saved_n = {k: gmsh.option.getNumber(k) for k in numbers}
    saved_s = {k: gmsh.option.getString(k) for k in strings or {}}
    try:
        for k, v in numbers.items():
            gmsh.option.setNumber(k, v)
        for k, v in (strings or {}).items():
            gmsh.option.setString(k, v)
        yield
    finally:
        for k, v in saved_n.items():
            gmsh.option.setNumber(k, v)
        for k, v in saved_s.items():
            gmsh.option.setString(k, v)


def why(exc: BaseException) -> str:
    text = " ".join(str(exc).split())
    return text[:160] or "no detail"


def import_solids(gmsh, path: Path) -> tuple[list[str], dict]:
    """Import the file into the current gmsh model and fragment its solids together;
    returns the solid names and {volume after fragmenting: [indices of the solids it
    was part of]}."""
    # OpenCASCADE converts files that carry a unit to its own (millimetres, set here so
    # that its global state stays at the default for anyone writing files later)
    unit = "MM" if path.suffix.lower() in UNIT_CARRYING else ""
    sew = 1 if path.suffix.lower() in (".iges", ".igs") else 0  # IGES holds faces: sew closed shells into solids
    try:
        with quiet_output(), options(gmsh, {"Geometry.OCCSewFaces": sew, "Geometry.OCCMakeSolids": sew},
                                     {"Geometry.OCCTargetUnit": unit}):
            gmsh.model.occ.importShapes(str(path))
            gmsh.model.occ.synchronize()
    except Exception as exc:  # gmsh raises plain Exception
        raise InputFileError(f"{path}: not a readable CAD file ({why(exc)}); export STEP (AP203/AP214), IGES or "
                             "BREP solids") from None
    solids = [tag for _, tag in gmsh.model.getEntities(3)]
    if not solids:
        surfaces = len(gmsh.model.getEntities(2))
        what = f"{surfaces} surfaces but no solid (open shells or a surface model)" if surfaces else "no geometry"
        raise MeshError(f"{path}: the CAD file has {what}; export closed solids")
    names = _solid_names([gmsh.model.getEntityName(3, tag) for tag in solids])
    if len(solids) == 1:
        return names, {solids[0]: [0]}
    try:
        with quiet_output():
            _, maps = gmsh.model.occ.fragment([(3, t) for t in solids[:1]], [(3, t) for t in solids[1:]])
            gmsh.model.occ.synchronize()
    except Exception as exc:
        raise MeshError(f"{path}: gmsh could not join the solids ({why(exc)}); repair the CAD") from None
    sources = {}
    for k, pieces in enumerate(maps):
        for dim, tag in pieces:
            if dim == 3:
                sources.setdefault(tag, []).append(k)
    return names, sources


def _solid_names(found: list[str]) -> list[str]:
    """One name per solid: the file's own, else c1, c2, ...; repeated names get -2, -3."""
    names, seen = [], {}
    for k, full in enumerate(found):
        own = full.rsplit("/", 1)[-1].strip()
        base = f"c{k + 1}" if DEFAULT_NAME.match(own) else own
        seen[base] = seen.get(base, 0) + 1
        names.append(base if seen[base] == 1 else f"{base}-{seen[base]}")
    return names


def reopen(cad):
    """gmsh with the CAD model of ``cad`` current, imported again if it was closed."""
    gmsh = gmsh_session()
    if cad.model not in gmsh.model.list():
        gmsh.model.add(cad.model)
        import_solids(gmsh, Path(cad.path))
    gmsh.model.setCurrent(cad.model)
    return gmsh
