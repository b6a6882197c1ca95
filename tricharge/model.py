"""The model: named surfaces in SI units, what each one is, and the media around them.

A model is plain, immutable, validated data; it never reads a file. Build one from
arrays with :meth:`Model.from_arrays` (conductors only) or the full constructor, or
from files with :func:`tricharge.load`.

Vocabulary
----------
surface
    A named group of triangles from the mesh (a Gmsh physical group, a file, a
    connected piece). Every triangle belongs to exactly one surface.
conductor
    One or more surfaces at one potential. It may have an applied voltage, or float
    (unknown potential, given net charge).
medium
    A dielectric region with a relative permittivity. ``background`` fills all space
    that no dielectric body claims.
interface
    A surface between two media: ``outside`` is the medium its normals point into,
    ``inside`` the one behind it.
ground plane
    An infinite grounded plane ``z = ground_z`` (metres); all geometry lies above it.
"""

from __future__ import annotations

from dataclasses import InitVar, dataclass, field
from functools import cached_property
from numbers import Real

import numpy as np

from .errors import MeshError, OptionError, TrichargeError
from .mesh import MAX_COORDINATE, connected_components, validate_surface
from .survey import Survey, orient_parts, survey
from .units import MAX_QUANTITY, metres_per

VACUUM = "vacuum"

#: A triangle repeated more often than this is refused before the geometry checks, whose
#: search for touching parts costs the square of the panels piled up in one place (our
#: choice: a real mesh never repeats a triangle; a few copies are reported by the checks).
MAX_REPEATS = 8

#: Largest relative permittivity accepted. The largest values reported for real
#: materials ("colossal" permittivity ceramics) are about 1e5 (from memory); beyond
#: 1e6 a value is a typing mistake.
MAX_PERMITTIVITY = 1e6


class UnknownMedium(TrichargeError, KeyError):
    """A medium asked for by name that the model does not have. A KeyError, as a failed
    lookup by name is (``except KeyError`` keeps working), and a TrichargeError, so the
    command line reports it as the user's mistake."""

    def __str__(self) -> str:  # KeyError would show the message in quotes
        return str(self.args[0]) if self.args else ""


@dataclass(frozen=True)
class Conductor:
    """A conductor: name, the surfaces it consists of, and its electrical condition.

    voltage : volts applied in field solutions, or None
    floating : True when the potential is unknown and the net charge is ``net_charge``
    net_charge : coulombs, for a floating conductor
    """

    name: str
    surfaces: tuple[str, ...]
    voltage: float | None = None
    floating: bool = False
    net_charge: float = 0.0


@dataclass(frozen=True)
class Medium:
    """A dielectric region: name and relative permittivity (>= 1)."""

    name: str
    permittivity: float


@dataclass(frozen=True)
class Interface:
    """A dielectric interface: its surfaces and the media on either side.

    outside : medium the surface normals point into
    inside : medium behind the surface
    """

    name: str
    surfaces: tuple[str, ...]
    inside: str
    outside: str


@dataclass(frozen=True, eq=False)
class Model:
    """Everything the solver needs, in SI units.

    vertices : (n, 3) float64, metres
    triangles : (m, 3) int64
    surface_index : (m,) int64, index into ``surfaces`` of each triangle
    surfaces : names of the mesh groups, in first-appearance order
    conductors : Conductor records, in matrix order
    interfaces : Interface records
    media : Medium records; the background must be among them unless it is vacuum
    background : name of the medium filling all space outside dielectric bodies
    conductor_media : per-surface medium touched by a conductor surface
        ({surface name: medium name}); surfaces not listed touch the background
    ground_z : height of the infinite grounded plane, metres, or None
    unit : the length unit the user works in (for display; data are in metres)
    source : where the model came from (file names), used in messages
    notes : what the reader did that a user may want to know (ignored cells, ...)
    warnings : what the reader found suspicious but not wrong (a unit that looks wrong, ...);
        the geometry checks add theirs in ``survey.warnings``
    inputs : every file the model was read from (model file first, then meshes), as given
    project : where refinement puts new vertices (CAD input: onto the CAD faces), or None
    check : run the geometry checks of :mod:`tricharge.survey` and raise MeshError on
        the first error (``False`` lets ``inspect`` show a broken model)
    problems : (set here) the errors those checks found
    """

    vertices: np.ndarray
    triangles: np.ndarray
    surface_index: np.ndarray
    surfaces: tuple[str, ...]
    conductors: tuple[Conductor, ...]
    interfaces: tuple[Interface, ...] = ()
    media: tuple[Medium, ...] = ()
    background: str = VACUUM
    conductor_media: dict = field(default_factory=dict)
    ground_z: float | None = None
    unit: str = "m"
    source: str = "<arrays>"
    notes: tuple[str, ...] = ()
    warnings: tuple[str, ...] = ()
    inputs: tuple[str, ...] = ()
    project: object = field(default=None, compare=False, repr=False)
    check: InitVar[bool] = True
    problems: tuple[str, ...] = field(init=False, default=())

    def __post_init__(self, check: bool):
        if not isinstance(self.unit, str):
            raise OptionError(f"unit must be one of m, cm, mm, um, in, mil (text), got {self.unit!r}")
        metres_per(self.unit)  # validates the unit name
        _check_records(self)
        try:
            v, t = validate_surface(self.vertices, self.triangles, source=self.source)
        except (TypeError, ValueError) as exc:
            if isinstance(exc, MeshError):
                raise
            raise MeshError(f"{self.source}: vertices and triangles must be numeric arrays of shape (n, 3) and (m, 3) "
                            f"({exc})") from None
        object.__setattr__(self, "vertices", v)
        object.__setattr__(self, "triangles", t)
        object.__setattr__(self, "surface_index", _integer_labels(self.source, "surface labels", self.surface_index))
        _check_references(self)
        _check_repeats(self)
        triangles, flipped, orientation_errors = orient_parts(self)
        object.__setattr__(self, "triangles", triangles)
        object.__setattr__(self, "notes", tuple(self.notes) + tuple(flipped))
        object.__setattr__(self, "problems", tuple(orientation_errors) + self.survey.errors)
        if check and self.problems:
            more = f" (and {len(self.problems) - 1} more problems)" if len(self.problems) > 1 else ""
            raise MeshError(self.problems[0] + more)

    # -- construction -----------------------------------------------------------------

    @classmethod
    def from_arrays(cls, vertices, triangles, labels=None, conductors=None, *, unit: str = "m",
                    source: str = "<arrays>", permittivity: float = 1.0) -> "Model":
        """Conductors in one homogeneous medium, from arrays given in ``unit``.

        Parameters
        ----------
        vertices : (n, 3) in ``unit`` (converted to metres here)
        triangles : (m, 3) integer indices
        labels : (m,) conductor index per triangle; default: one conductor per connected
            component, numbered by each component's lowest triangle index
        conductors : names; default ``c1, c2, ...``
        permittivity : relative permittivity of the medium around the conductors
        """
        scale = metres_per(unit) if isinstance(unit, str) else None
        if scale is None:
            raise OptionError(f"unit must be one of m, cm, mm, um, in, mil (text), got {unit!r}")
        try:
            v = np.asarray(vertices, dtype=np.float64) * scale
            t = np.asarray(triangles)
        except (TypeError, ValueError) as exc:
            raise MeshError(f"{source}: vertices and triangles must be numeric arrays ({exc})") from None
        if labels is None:
            usable = t.ndim == 2 and t.shape[1] == 3 and t.size and t.dtype.kind in "iu" and v.ndim == 2
            usable = usable and 0 <= t.min() and t.max() < len(v)
            labels = connected_components(t) if usable else np.zeros(len(t) if t.ndim else 0, np.int64)
        labels = _integer_labels(source, "labels", labels)
        if conductors is None:
            conductors = tuple(f"c{k + 1}" for k in range(int(labels.max()) + 1 if labels.size else 0))
        if isinstance(conductors, str) or not all(isinstance(n, str) for n in conductors):
            raise MeshError(f"{source}: conductors must be a list of names (text), got {conductors!r:.80}")
        names = tuple(conductors)
        media, background = (), VACUUM
        if not (isinstance(permittivity, Real) and not isinstance(permittivity, bool)
                and 1.0 <= permittivity <= MAX_PERMITTIVITY):
            raise OptionError(f"permittivity={permittivity!r:.40}: give the relative permittivity of the medium, a "
                              f"number from 1 to {MAX_PERMITTIVITY:g}")
        if permittivity != 1.0:
            media, background = (Medium("medium", float(permittivity)),), "medium"
        return cls(v, t, labels, names, tuple(Conductor(n, (n,)) for n in names), media=media,
                   background=background, unit=unit, source=source)

    # -- derived views ----------------------------------------------------------------

    @cached_property
    def survey(self) -> Survey:
        """Per-part measurements, errors and warnings (see :mod:`tricharge.survey`)."""
        return survey(self)

    @property
    def n_panels(self) -> int:
        return len(self.triangles)

    @property
    def conductor_names(self) -> tuple[str, ...]:
        return tuple(c.name for c in self.conductors)

    def _labels(self, records) -> np.ndarray:
        """(m,) int64: index into ``records`` of the record owning each triangle, or -1."""
        by_surface = np.full(len(self.surfaces), -1, dtype=np.int64)
        for k, record in enumerate(records):
            for s in record.surfaces:
                by_surface[self.surfaces.index(s)] = k
        return by_surface[self.surface_index]

    @cached_property
    def panel_conductor(self) -> np.ndarray:
        """(m,) int64: conductor index of each triangle, -1 on interface triangles."""
        return self._labels(self.conductors)

    @cached_property
    def panel_interface(self) -> np.ndarray:
        """(m,) int64: interface index of each triangle, -1 on conductor triangles."""
        return self._labels(self.interfaces)

    def permittivity(self, medium: str) -> float:
        """Relative permittivity of a medium by name (vacuum is 1)."""
        for m in self.media:
            if m.name == medium:
                return m.permittivity
        if medium == VACUUM:
            return 1.0
        known = ", ".join([VACUUM] + [m.name for m in self.media])
        raise UnknownMedium(f"{self.source}: no medium named {str(medium)[:80]!r}; use one the model has: {known}")

    def medium_of_surface(self, surface: str) -> str:
        """The medium a conductor surface touches."""
        return self.conductor_media.get(surface, self.background)

    def __repr__(self) -> str:
        extra = f", {len(self.interfaces)} interfaces" if self.interfaces else ""
        ground = f", ground plane at z = {self.ground_z:g} m" if self.ground_z is not None else ""
        return (f"Model({self.source!r}, {len(self.conductors)} conductors{extra}, {self.n_panels} panels, "
                f"unit {self.unit}{ground})")


def _check_references(model: Model) -> None:
    """Names must be unique and every reference must resolve; raises MeshError."""
    src = model.source
    m = len(model.triangles)
    if model.surface_index.shape != (m,):
        raise MeshError(f"{src}: {model.surface_index.shape} surface labels for {m} triangles")
    n_surfaces = len(model.surfaces)
    if m and (model.surface_index.min() < 0 or model.surface_index.max() >= n_surfaces):
        raise MeshError(f"{src}: surface labels must lie in 0..{n_surfaces - 1}")
    _unique(src, "surface", model.surfaces)
    _unique(src, "conductor", [c.name for c in model.conductors])
    _unique(src, "interface", [i.name for i in model.interfaces])
    _unique(src, "medium", [md.name for md in model.media])
    if not model.conductors:
        raise MeshError(f"{src}: the model has no conductors; name at least one")
    counts = np.bincount(model.surface_index, minlength=n_surfaces)
    empty = [model.surfaces[s] for s in np.flatnonzero(counts == 0)]
    if empty:
        raise MeshError(f"{src}: surfaces without triangles: {', '.join(empty)}")

    owner: dict[str, str] = {}
    for kind, items in (("conductor", model.conductors), ("interface", model.interfaces)):
        for item in items:
            if not item.surfaces:
                raise MeshError(f"{src}: {kind} '{item.name}' has no surfaces")
            for s in item.surfaces:
                if s not in model.surfaces:
                    raise MeshError(f"{src}: {kind} '{item.name}' names surface '{s}' but the mesh has "
                                    f"{', '.join(model.surfaces)}; check the spelling")
                if s in owner:
                    raise MeshError(f"{src}: surface '{s}' is claimed by both {owner[s]} and {kind} '{item.name}'")
                owner[s] = f"{kind} '{item.name}'"
    unused = [s for s in model.surfaces if s not in owner]
    if unused:
        raise MeshError(f"{src}: surfaces {', '.join(unused)} belong to no conductor or interface; assign them")

    known = {md.name for md in model.media} | {VACUUM}
    for md in model.media:
        if not (np.isfinite(md.permittivity) and 1.0 <= md.permittivity <= MAX_PERMITTIVITY):
            raise MeshError(f"{src}: medium '{md.name}' has relative permittivity {md.permittivity}; it must be >= 1 "
                            f"and at most {MAX_PERMITTIVITY:g}")
    if model.background not in known:
        raise MeshError(f"{src}: background medium '{model.background}' is not defined; define it among the media")
    for i in model.interfaces:
        for side in (i.inside, i.outside):
            if side not in known:
                raise MeshError(f"{src}: interface '{i.name}' names medium '{side}', which is not defined")
        if i.inside == i.outside:
            raise MeshError(f"{src}: interface '{i.name}' has '{i.inside}' on both sides; remove it or fix a side")
    for surface, medium in model.conductor_media.items():
        if surface not in model.surfaces:
            raise MeshError(f"{src}: a medium is given for surface '{surface}', which the mesh does not have")
        if medium not in known:
            raise MeshError(f"{src}: surface '{surface}' touches medium '{medium}', which is not defined")
    for c in model.conductors:
        if c.voltage is not None and not (np.isfinite(c.voltage) and abs(c.voltage) <= MAX_QUANTITY):
            raise MeshError(f"{src}: conductor '{c.name}' has voltage {c.voltage}; give a finite number of volts "
                            f"up to {MAX_QUANTITY:g}")
        if not (np.isfinite(c.net_charge) and abs(c.net_charge) <= MAX_QUANTITY):
            raise MeshError(f"{src}: conductor '{c.name}' has net charge {c.net_charge}; give a finite number of "
                            f"coulombs up to {MAX_QUANTITY:g}")
        if c.floating and c.voltage is not None:
            raise MeshError(f"{src}: conductor '{c.name}' is floating and has a voltage; choose one")
    if model.ground_z is not None and not (np.isfinite(model.ground_z) and abs(model.ground_z) <= MAX_COORDINATE):
        raise MeshError(f"{src}: ground plane height {model.ground_z} m is not a finite number within "
                        f"{MAX_COORDINATE:g} m of the origin")


def _unique(source: str, kind: str, names) -> None:
    names = list(names)
    repeated = sorted({n for n in names if names.count(n) > 1})
    if repeated:
        raise MeshError(f"{source}: {kind} names must be unique, repeated: {', '.join(repeated)}")
    blank = [n for n in names if not str(n).strip()]
    if blank:
        raise MeshError(f"{source}: a {kind} has an empty name; give every {kind} a name")


def _integer_labels(source: str, what: str, labels) -> np.ndarray:
    """(m,) int64 labels; MeshError for anything that is not whole numbers."""
    try:
        values = np.asarray(labels)
    except ValueError as exc:  # ragged lists
        raise MeshError(f"{source}: {what} must be one integer per triangle ({exc})") from None
    if values.dtype.kind in "iu":
        return values.astype(np.int64)
    if values.dtype.kind == "b" or values.dtype.kind not in "f" or not np.all(np.isfinite(values)) \
            or not np.all(values == np.round(values)) or (values.size and np.abs(values).max() > 2**62):
        raise MeshError(f"{source}: {what} must be one integer per triangle, got {str(values.dtype)} values")
    return values.astype(np.int64)


def _check_records(model) -> None:
    """Every record and name of the right type (MeshError naming the first that is not)."""
    def fail(what, value):
        raise MeshError(f"{model.source}: {what} must be {value}")

    def is_number(x):
        return isinstance(x, Real) and not isinstance(x, bool)

    if not isinstance(model.surfaces, (tuple, list)) or not all(isinstance(s, str) for s in model.surfaces):
        fail("surfaces", "a list of names (text)")
    object.__setattr__(model, "surfaces", tuple(model.surfaces))
    for kind, records, record_type in (("conductor", model.conductors, Conductor), ("interface", model.interfaces,
                                                                                    Interface)):
        for r in records:
            if not isinstance(r, record_type) or not isinstance(r.name, str) or isinstance(r.surfaces, str) \
                    or not all(isinstance(s, str) for s in r.surfaces):
                fail(f"every {kind}", f"of type {record_type.__name__}, with a name and surface names (text)")
    for c in model.conductors:
        if not (c.voltage is None or is_number(c.voltage)) or not is_number(c.net_charge) \
                or not isinstance(c.floating, bool):
            fail(f"conductor {c.name!r:.60}", "given a number of volts or None, a number of coulombs and floating "
                                              "True or False")
    for i in model.interfaces:
        if not (isinstance(i.inside, str) and isinstance(i.outside, str)):
            fail(f"interface {i.name!r:.60}", "given its inside and outside media by name")
    for m in model.media:
        if not (isinstance(m, Medium) and isinstance(m.name, str) and is_number(m.permittivity)):
            fail("every medium", "of type Medium, with a name (text) and a relative permittivity (a number)")
    if not isinstance(model.background, str) or not isinstance(model.conductor_media, dict) \
            or not all(isinstance(k, str) and isinstance(v, str) for k, v in model.conductor_media.items()):
        fail("the background and conductor media", "medium names (text)")
    if not (model.ground_z is None or is_number(model.ground_z)):
        fail("ground_z", "a height in metres or None")


def _check_repeats(model) -> None:
    """MeshError when one triangle occurs more than MAX_REPEATS times."""
    _, first, counts = np.unique(np.sort(model.triangles, axis=1), axis=0, return_index=True, return_counts=True)
    if counts.max() > MAX_REPEATS:
        where = ", ".join(f"{x:.4g}" for x in model.vertices[model.triangles[first[np.argmax(counts)]]].mean(axis=0))
        raise MeshError(f"{model.source}: one triangle occurs {counts.max():,} times (near ({where}) m; "
                        f"{int((counts - 1).sum()):,} copies in all); remove the copies")
