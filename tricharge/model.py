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

import numpy as np

from .errors import MeshError
from .mesh import connected_components, validate_surface
from .survey import Survey, orient_parts, survey
from .units import metres_per

VACUUM = "vacuum"


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
    check: InitVar[bool] = True
    problems: tuple[str, ...] = field(init=False, default=())

    def __post_init__(self, check: bool):
        metres_per(self.unit)  # validates the unit name
        v, t = validate_surface(self.vertices, self.triangles, source=self.source)
        object.__setattr__(self, "vertices", v)
        object.__setattr__(self, "triangles", t)
        index = np.asarray(self.surface_index, dtype=np.int64)
        object.__setattr__(self, "surface_index", index)
        _check_references(self)
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
        v = np.asarray(vertices, dtype=np.float64) * metres_per(unit)
        t = np.asarray(triangles)
        if labels is None:
            labels = connected_components(t) if t.ndim == 2 and t.size else np.zeros(len(t), np.int64)
        labels = np.asarray(labels, dtype=np.int64)
        if conductors is None:
            conductors = tuple(f"c{k + 1}" for k in range(int(labels.max()) + 1 if labels.size else 0))
        names = tuple(conductors)
        media, background = (), VACUUM
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
    def conductor_labels(self) -> np.ndarray:
        """(m,) int64: conductor index of each triangle, -1 on interface triangles."""
        return self._labels(self.conductors)

    @cached_property
    def interface_labels(self) -> np.ndarray:
        """(m,) int64: interface index of each triangle, -1 on conductor triangles."""
        return self._labels(self.interfaces)

    def permittivity(self, medium: str) -> float:
        """Relative permittivity of a medium by name (vacuum is 1)."""
        for m in self.media:
            if m.name == medium:
                return m.permittivity
        if medium == VACUUM:
            return 1.0
        raise KeyError(medium)

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
    empty = [model.surfaces[s] for s in range(n_surfaces) if not np.any(model.surface_index == s)]
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
        if not (np.isfinite(md.permittivity) and md.permittivity >= 1.0):
            raise MeshError(f"{src}: medium '{md.name}' has relative permittivity {md.permittivity}; it must be >= 1")
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
        if c.voltage is not None and not np.isfinite(c.voltage):
            raise MeshError(f"{src}: conductor '{c.name}' has voltage {c.voltage}; give a finite number of volts")
        if c.floating and c.voltage is not None:
            raise MeshError(f"{src}: conductor '{c.name}' is floating and has a voltage; choose one")
    if model.ground_z is not None and not np.isfinite(model.ground_z):
        raise MeshError(f"{src}: ground plane height {model.ground_z} is not a finite number")


def _unique(source: str, kind: str, names) -> None:
    names = list(names)
    repeated = sorted({n for n in names if names.count(n) > 1})
    if repeated:
        raise MeshError(f"{source}: {kind} names must be unique, repeated: {', '.join(repeated)}")
    blank = [n for n in names if not str(n).strip()]
    if blank:
        raise MeshError(f"{source}: a {kind} has an empty name; give every {kind} a name")
