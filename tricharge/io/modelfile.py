"""Model files: a TOML file that says what the mesh surfaces are.

Example (every key is optional except ``mesh``)::

    mesh = "package.msh"          # or ["lead1.stl", "lead2.stl"]; relative to this file
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

Without a ``[conductors]`` table every surface that is not part of an interface is a
conductor of the same name. Surfaces are named by the mesh: Gmsh physical group names
(or their numbers), OBJ groups, VTK region numbers, file names when several files are
given, and ``c1, c2, ...`` for the connected pieces of a single file without groups.
"""

from __future__ import annotations

import difflib
import tomllib
from pathlib import Path

from ..errors import OptionError, TrichargeError
from ..model import VACUUM, Conductor, Interface, Medium, Model
from ..units import LENGTH_UNITS, metres_per, parse_quantity
from .meshes import check_input_file, read_surfaces

TOP_KEYS = ("mesh", "unit", "background", "ground", "media", "conductors", "interfaces")
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


def _resolve(path: Path, where: str, names: list[str], surfaces: tuple[str, ...], aliases: dict) -> tuple[str, ...]:
    resolved = []
    for name in names:
        target = name if name in surfaces else aliases.get(name)
        if target is None:
            close = difflib.get_close_matches(name, surfaces, n=1)
            hint = f"; did you mean '{close[0]}'?" if close else "; check the spelling"
            raise ModelFileError(f"{path}: '{where}' names surface '{name}' but the mesh has "
                                 f"{', '.join(surfaces)}{hint}")
        resolved.append(target)
    return tuple(resolved)


def _read_toml(path: Path) -> dict:
    check_input_file(path)
    try:
        return tomllib.loads(path.read_text(encoding="utf-8"))
    except UnicodeDecodeError:
        raise ModelFileError(f"{path}: is not a text file; a model file is TOML text") from None
    except tomllib.TOMLDecodeError as exc:
        raise ModelFileError(f"{path}: is not valid TOML ({exc}); fix the syntax") from None


def _media(path: Path, data: dict) -> tuple[Medium, ...]:
    table = _expect(path, "media", data.get("media", {}), dict, "a table of name = relative permittivity")
    media = []
    for name, value in table.items():
        eps = _expect(path, f"media.{name}", value, (int, float), "a relative permittivity (a number >= 1)")
        if not eps >= 1.0:
            raise ModelFileError(f"{path}: 'media.{name}' is {eps}; a relative permittivity must be >= 1")
        media.append(Medium(name, float(eps)))
    return tuple(media)


def _conductor(path, name, spec, surfaces, aliases, known_media):
    where = f"conductors.{name}"
    _expect(path, where, spec, dict, "a table")
    _check_keys(path, where + ".", spec, CONDUCTOR_KEYS)
    own = _resolve(path, where + ".surfaces", _string_list(path, where + ".surfaces", spec.get("surfaces", [name])),
                   surfaces, aliases)
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
    try:
        voltage = None if volts is None else parse_quantity(volts, "V", what=f"{path}: '{where}.volts'")
        charge = parse_quantity(spec.get("net_charge", 0.0), "C", what=f"{path}: '{where}.net_charge'")
    except OptionError as exc:
        raise ModelFileError(str(exc)) from None
    if floating and voltage is not None:
        raise ModelFileError(f"{path}: conductor '{name}' is floating and has volts; remove one of them")
    if "net_charge" in spec and not floating:
        raise ModelFileError(f"{path}: '{where}.net_charge' only applies to a floating conductor; add floating = true")
    return Conductor(name, own, voltage, floating, charge), media


def load_model_file(path, *, unit: str | None = None, check: bool = True) -> Model:
    """Read a TOML model file and the mesh files it names into a :class:`Model`.

    Parameters
    ----------
    path : the .toml file; mesh paths in it are relative to its folder
    unit : a unit given elsewhere (command line); must agree with the file's ``unit``
    check : run the geometry checks (see :class:`~tricharge.model.Model`)

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
    ground_z = None
    if "z" in ground:
        ground_z = _expect(path, "ground.z", ground["z"], (int, float), f"a height in {file_unit}") * metres_per(file_unit)

    mesh = read_surfaces([path.parent / m for m in meshes], unit=file_unit)
    interfaces = []
    for name, spec in _expect(path, "interfaces", data.get("interfaces", {}), dict, "a table").items():
        where = f"interfaces.{name}"
        _expect(path, where, spec, dict, "a table")
        _check_keys(path, where + ".", spec, INTERFACE_KEYS)
        own = _resolve(path, where + ".surfaces",
                       _string_list(path, where + ".surfaces", spec.get("surfaces", [name])), mesh.surfaces,
                       mesh.aliases)
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
            conductor, media_map = _conductor(path, name, spec, mesh.surfaces, mesh.aliases, known_media)
            conductors.append(conductor)
            conductor_media.update(media_map)
    return Model(mesh.vertices, mesh.triangles, mesh.surface_index, mesh.surfaces, tuple(conductors),
                 tuple(interfaces), media, background, conductor_media, ground_z, file_unit,
                 str(path), mesh.notes, inputs=(str(path),) + mesh.paths, check=check)


def load(path, *, unit: str | None = None, check: bool = True) -> Model:
    """A model from a model file (.toml) or a mesh file (any registered ending).

    ``unit`` defaults to metres for meshes and to the model file's own ``unit``.
    """
    from .meshes import read_mesh

    path = Path(path)
    if path.suffix.lower() == ".toml":
        return load_model_file(path, unit=unit, check=check)
    return read_mesh(path, unit=unit or "m", check=check)
