"""Model files: a TOML file that says what the mesh surfaces are.

Example (every key is optional except ``mesh``)::

    mesh = "package.msh"          # or ["lead1.stl", "lead2.stl"], or a CAD file; relative to this file
    unit = "mm"                   # m, cm, mm, um, in, mil
    background = "air"            # medium outside every dielectric body (default vacuum)

    [ground]
    z = 0.0                       # infinite grounded plane at this height, in `unit`

    [media]
    air = 1.0                     # name = relative permittivity
    mold = 3.9

    [conductors.net1]
    surfaces = ["lead1", "wire1"] # mesh groups; default: the conductor's own name
    medium = "mold"               # medium it touches, or {lead1 = "mold", wire1 = "air"}
    volts = "3.3 V"               # applied voltage for field solutions
    floating = false              # unknown potential, net charge `net_charge` (C)

    [interfaces.mold_skin]
    surfaces = ["mold"]
    inside = "mold"               # medium behind the surface (inside a closed body)
    outside = "air"               # medium the surface normals point into

    [meshing]                     # CAD files only (.step .stp .iges .igs .brep)
    panel_size = "0.5 mm"         # target panel size (a number is in `unit`)
    per_radian = 2                # panels per radian where surfaces curve
    across_gaps = 3               # at least this many panels across gaps between parts
    edge_grading = 0.3            # panels on sharp edges, a fraction of panel_size (1: off)
    cad_unit = "in"               # the unit the CAD numbers are really in (replaces the declared one)

Without a ``[conductors]`` table every surface that is not part of an interface is a
conductor of the same name. Surfaces are named by the mesh: Gmsh physical group names
(or their numbers), OBJ groups, VTK region numbers, file names when several files are
given, and ``c1, c2, ...`` for the connected pieces of a single file without groups;
CAD files name their solids (see :mod:`tricharge.io.cadmodel` for what a solid's name
stands for).
"""

from __future__ import annotations

import difflib
import math
import os
import tomllib
from pathlib import Path

from ..errors import OptionError, TrichargeError
from ..mesh import MAX_COORDINATE
from ..model import MAX_PERMITTIVITY, VACUUM, Conductor, Interface, Medium, Model
from ..units import LENGTH_UNITS, metres_per, parse_quantity
from .cadmodel import complete as complete_cad
from .cadmodel import file_meshing
from .cadmodel import members as cad_members
from .limits import check_input_file, read_limited
from .meshes import read_surfaces
from .unitguess import unit_warnings

TOP_KEYS = ("mesh", "unit", "background", "ground", "media", "conductors", "interfaces", "meshing")
GROUND_KEYS = ("z",)
CONDUCTOR_KEYS = ("surfaces", "medium", "volts", "floating", "net_charge")
INTERFACE_KEYS = ("surfaces", "inside", "outside")


class ModelFileError(TrichargeError, ValueError):
    """A model file is malformed or names something that does not exist."""


def _check_keys(path: Path, where: str, table: dict, allowed: tuple[str, ...]) -> None:
    for key in table:
        if key not in allowed:
            close = difflib.get_close_matches(key, allowed, n=1, cutoff=0.5)
            hint = f"did you mean '{close[0]}'?" if close else f"valid keys are {', '.join(allowed)}"
            raise ModelFileError(f"{path}: unknown key '{where}{key}'; {hint}")


def _expect(path: Path, where: str, value, kinds, description: str):
    if isinstance(value, bool) and bool not in (kinds if isinstance(kinds, tuple) else (kinds,)):
        raise ModelFileError(f"{path}: '{where}' must be {description}, got {value!r}")
    if not isinstance(value, kinds):
        raise ModelFileError(f"{path}: '{where}' must be {description}, got {value!r}")
    return value


def _string_list(path: Path, where: str, value) -> list[str]:
    if isinstance(value, (str, int)) and not isinstance(value, bool):
        value = [value]
    _expect(path, where, value, list, "a list of surface names")
    for item in value:
        _expect(path, where, item, (str, int), "a list of surface names (text or group numbers)")
    return [str(item) for item in value]


def _resolve(path: Path, where: str, names: list[str], surfaces: tuple[str, ...], aliases: dict,
             members: dict | None = None) -> tuple[str, ...]:
    resolved = []
    for name in names:
        if members and name in members:  # a CAD solid: all its surfaces (io/cadmodel.py)
            resolved.extend(members[name])
            continue
        target = name if name in surfaces else aliases.get(name)
        if target is None:
            close = difflib.get_close_matches(name, surfaces, n=1)
            hint = f"; did you mean '{close[0]}'?" if close else "; check the spelling"
            raise ModelFileError(f"{path}: '{where}' names surface '{name}' but the mesh has "
                                 f"{', '.join(surfaces)}{hint}")
        resolved.append(target)
    return tuple(resolved)


def _read_toml(path: Path) -> dict:
    check_input_file(path, "model")
    try:
        return tomllib.loads(read_limited(path, "model").decode("utf-8"))
    except UnicodeDecodeError:
        raise ModelFileError(f"{path}: is not a text file; a model file is TOML text") from None
    except tomllib.TOMLDecodeError as exc:
        raise ModelFileError(f"{path}: is not valid TOML ({exc}); fix the syntax") from None
    except RecursionError:  # tomllib recurses once per level of nested arrays and tables
        raise ModelFileError(f"{path}: arrays or tables are nested too deeply to read; a model file needs at most "
                             "three levels, simplify it") from None


def _number(path: Path, where: str, value, description: str) -> float:
    """A TOML number as a float: integers too large for a float and non-finite values
    (TOML's inf and nan) are refused, naming the key."""
    number = _expect(path, where, value, (int, float), description)
    try:
        number = float(number)
    except OverflowError:
        number = math.inf
    if not math.isfinite(number):
        raise ModelFileError(f"{path}: '{where}' is {str(value)[:40]}; it must be {description}, a finite number")
    return number


def _media(path: Path, data: dict) -> tuple[Medium, ...]:
    table = _expect(path, "media", data.get("media", {}), dict, "a table of name = relative permittivity")
    media = []
    for name, value in table.items():
        eps = _number(path, f"media.{name}", value, "a relative permittivity (a number >= 1)")
        if not 1.0 <= eps <= MAX_PERMITTIVITY:
            raise ModelFileError(f"{path}: 'media.{name}' is {value}; a relative permittivity must be >= 1 "
                                 f"and at most {MAX_PERMITTIVITY:g}")
        media.append(Medium(name, eps))
    return tuple(media)


def _quantity(path: Path, where: str, value, unit: str) -> float:
    """A voltage or charge (number or text like '3.3 V') in base units; anything
    unusable is a ModelFileError naming ``where``."""
    try:
        number = parse_quantity(value, unit, what=f"{path}: '{where}'")
    except OptionError as exc:
        raise ModelFileError(str(exc)) from None
    except OverflowError:  # an integer too large for a float
        number = math.inf
    if not math.isfinite(number):
        raise ModelFileError(f"{path}: '{where}' is {str(value)[:40]}; give a finite number of {unit}")
    return number


def _conductor(path, name, spec, surfaces, aliases, known_media, members=None):
    where = f"conductors.{name}"
    _expect(path, where, spec, dict, "a table")
    _check_keys(path, where + ".", spec, CONDUCTOR_KEYS)
    own = _resolve(path, where + ".surfaces", _string_list(path, where + ".surfaces", spec.get("surfaces", [name])),
                   surfaces, aliases, members)
    medium = spec.get("medium")
    media = {}
    if isinstance(medium, str):
        media = {s: medium for s in own}
    elif isinstance(medium, dict):
        for s, m in medium.items():
            target = _resolve(path, where + ".medium", [s], own, aliases)[0]
            media[target] = _expect(path, f"{where}.medium.{s}", m, str, "a medium name")
    elif medium is not None:
        raise ModelFileError(f"{path}: '{where}.medium' must be a medium name or a table surface = medium")
    for m in media.values():
        if m not in known_media:
            raise ModelFileError(f"{path}: '{where}.medium' names '{m}', which is not among the media "
                                 f"({', '.join(sorted(known_media))}); add it under [media]")
    floating = _expect(path, where + ".floating", spec.get("floating", False), bool, "true or false")
    volts = spec.get("volts")
    voltage = None if volts is None else _quantity(path, where + ".volts", volts, "V")
    charge = _quantity(path, where + ".net_charge", spec.get("net_charge", 0.0), "C")
    if floating and voltage is not None:
        raise ModelFileError(f"{path}: conductor '{name}' is floating and has volts; remove one of them")
    if "net_charge" in spec and not floating:
        raise ModelFileError(f"{path}: '{where}.net_charge' only applies to a floating conductor; add floating = true")
    return Conductor(name, own, voltage, floating, charge), media


def load_model_file(path, *, unit: str | None = None, check: bool = True, precheck=None) -> Model:
    """Read a TOML model file and the mesh files it names into a :class:`Model`.

    Parameters
    ----------
    path : the .toml file; mesh paths in it are relative to its folder
    unit : a unit given elsewhere (command line); must agree with the file's ``unit``
    check : run the geometry checks (see :class:`~tricharge.model.Model`)
    precheck : ``precheck(n_panels)``, run once the meshes are read, before the checks

    Raises
    ------
    ModelFileError (a ValueError) naming the file and the key for any mistake in the
    file; the mesh readers' errors for problems in the mesh files.
    """
    path = Path(path)
    data = _read_toml(path)
    _check_keys(path, "", data, TOP_KEYS)
    if "mesh" not in data:
        raise ModelFileError(f"{path}: no 'mesh' key; add mesh = \"your_mesh.msh\" (or a list of files)")
    meshes = _string_list(path, "mesh", data["mesh"])
    if not meshes:
        raise ModelFileError(f"{path}: 'mesh' is an empty list; name at least one mesh file")
    file_unit = _expect(path, "unit", data.get("unit", unit or "m"), str, f"one of {', '.join(LENGTH_UNITS)}")
    if file_unit not in LENGTH_UNITS:
        raise ModelFileError(f"{path}: unit '{file_unit}' is unknown; use one of {', '.join(LENGTH_UNITS)}")
    if unit is not None and unit != file_unit:
        raise ModelFileError(f"{path}: the file says unit = '{file_unit}' but '{unit}' was asked for; use one")
    media = _media(path, data)
    known_media = {m.name for m in media} | {VACUUM}
    background = _expect(path, "background", data.get("background", VACUUM), str, "a medium name")
    if background not in known_media:
        raise ModelFileError(f"{path}: background '{background}' is not among the media; add it under [media]")
    ground = _expect(path, "ground", data.get("ground", {}), dict, "a table with z = height")
    _check_keys(path, "ground.", ground, GROUND_KEYS)
    if ground and "z" not in ground:
        raise ModelFileError(f"{path}: [ground] needs z = height of the plane, in {file_unit}")
    ground_z = None if "z" not in ground else _height(path, ground["z"], file_unit)

    with file_meshing(path, data, file_unit):
        mesh = _read_meshes(path, meshes, file_unit)
    members = cad_members(mesh.project)
    if precheck is not None:
        precheck(len(mesh.triangles))
    warnings = () if "unit" in data or unit else unit_warnings(str(path), mesh.vertices, mesh.triangles,
                                                                'add unit = "mm" to the file')
    interfaces = []
    for name, spec in _expect(path, "interfaces", data.get("interfaces", {}), dict, "a table").items():
        where = f"interfaces.{name}"
        _expect(path, where, spec, dict, "a table")
        _check_keys(path, where + ".", spec, INTERFACE_KEYS)
        own = _resolve(path, where + ".surfaces",
                       _string_list(path, where + ".surfaces", spec.get("surfaces", [name])), mesh.surfaces,
                       mesh.aliases, members)
        sides = []
        for side in ("inside", "outside"):
            if side not in spec:
                raise ModelFileError(f"{path}: interface '{name}' needs '{side}' = the medium on that side")
            medium = _expect(path, f"{where}.{side}", spec[side], str, "a medium name")
            if medium not in known_media:
                raise ModelFileError(f"{path}: '{where}.{side}' names '{medium}', which is not among the media; "
                                     "add it under [media]")
            sides.append(medium)
        interfaces.append(Interface(name, own, *sides))

    conductor_specs = _expect(path, "conductors", data.get("conductors"), (dict, type(None)), "a table")
    conductors, conductor_media = [], {}
    if conductor_specs is None:
        claimed = {s for i in interfaces for s in i.surfaces}
        conductors = [Conductor(s, (s,)) for s in mesh.surfaces if s not in claimed]
    else:
        for name, spec in conductor_specs.items():
            conductor, media_map = _conductor(path, name, spec, mesh.surfaces, mesh.aliases, known_media, members)
            conductors.append(conductor)
            conductor_media.update(media_map)
    interfaces, conductors, conductor_media = complete_cad(mesh.project, data, mesh.surfaces, interfaces, conductors,
                                                           conductor_media, default=conductor_specs is None)
    return Model(mesh.vertices, mesh.triangles, mesh.surface_index, mesh.surfaces, tuple(conductors),
                 tuple(interfaces), media, background, conductor_media, ground_z, file_unit, str(path), mesh.notes,
                 warnings, inputs=(str(path),) + mesh.paths, project=mesh.project, check=check)


def _read_meshes(path: Path, meshes: list[str], unit: str):
    """The mesh files of a model file (relative to it) as one SurfaceMesh; their errors
    name the model file first."""
    seen = set()
    for name in meshes:
        if "\0" in name or not name.strip():
            raise ModelFileError(f"{path}: 'mesh' names {name[:80]!r}, which is not a file name; give the mesh file "
                                 "relative to this file")
        if name in seen:
            raise ModelFileError(f"{path}: 'mesh' names {name[:80]!r} twice; name every mesh file once")
        seen.add(name)
    try:
        return read_surfaces([path.parent / m for m in meshes], unit=unit)
    except TrichargeError as exc:  # the mesh file's own error, said to come from this model file
        exc.args = (f"{path}: {exc}",)
        raise


def _height(path: Path, value, unit: str) -> float:
    """[ground] z in metres: finite and within MAX_COORDINATE of the origin."""
    z = _number(path, "ground.z", value, f"a height in {unit}") * metres_per(unit)
    if abs(z) > MAX_COORDINATE:
        raise ModelFileError(f"{path}: 'ground.z' is {value} {unit}, beyond any real device; give a height within "
                             f"{MAX_COORDINATE / metres_per(unit):g} {unit} of the origin")
    return z


def load(path, *, unit: str | None = None, check: bool = True, precheck=None) -> Model:
    """A model from a model file (.toml) or a mesh file (any registered ending).

    ``unit`` defaults to metres for meshes and to the model file's own ``unit``;
    ``precheck(n_panels)`` runs before the geometry checks (a memory check, say).
    """
    from .meshes import read_mesh

    if not isinstance(path, (str, bytes, os.PathLike)):
        raise OptionError(f"load() needs a file name (text or a path), got {type(path).__name__}")
    if unit is not None and not isinstance(unit, str):
        raise OptionError(f"unit must be one of {', '.join(LENGTH_UNITS)} (text), got {unit!r}")
    path = Path(os.fsdecode(path))
    if path.suffix.lower() == ".toml":
        return load_model_file(path, unit=unit, check=check, precheck=precheck)
    return read_mesh(path, unit=unit, check=check, precheck=precheck)
