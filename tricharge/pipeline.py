"""From a model to a result: the one call most users need."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .bem.capacitance import solve_capacitance, solve_voltages
from .bem.factory import memory_estimate, memory_method
from .bem.fields import hot_spots, potential_and_field, surface_field
from .bem.panels import make_panels
from .bem.problem import Problem
from .bem.results import Result
from .errors import OptionError
from .model import Model
from .resources import check_memory


def problem_of(model: Model) -> Problem:
    """The numerical problem of a model: every panel's role, permittivities (on both faces
    of conductor sheets, :mod:`tricharge.sheets`), interface contrasts, the plane."""
    from .sheets import sheet_faces

    panels = make_panels(model.vertices, model.triangles, source=model.source)
    conductor = model.panel_conductor
    faces = sheet_faces(model)
    on_conductor = conductor >= 0
    permittivity = np.where(on_conductor, faces.front, 1.0)
    contrast = np.zeros(model.n_panels)
    for k, interface in enumerate(model.interfaces):
        outside, inside = model.permittivity(interface.outside), model.permittivity(interface.inside)
        contrast[model.panel_interface == k] = (outside - inside) / (outside + inside)
    floating = np.array([c.floating for c in model.conductors], dtype=bool)
    two_media = faces.sheet & (faces.behind != faces.front)
    for k in np.flatnonzero(floating):
        if two_media[conductor == k].any():
            raise OptionError(f"{model.source}: conductor '{model.conductors[k].name}' is a floating sheet in an "
                              "interface between two media, which tricharge cannot solve yet; give it a thickness or "
                              "a fixed voltage")
    return Problem(panels, conductor, permittivity, contrast, floating, model.ground_z, model.conductor_names,
                   permittivity_behind=np.where(faces.sheet, faces.behind, np.nan))


def solve(model: Model, *, method: str = "auto", tol: float = 1e-6, progress=None, levels: int = 1,
          accuracy: float | None = None, max_panels: int = 200_000, project=None) -> Result:
    """Capacitance matrix of the model's conductors (Maxwell form, farads).

    ``method`` is "auto" (dense up to a few thousand panels, fast above), "dense" or
    "fast"; ``tol`` the relative residual of the iterative solve; ``progress(stage, done,
    total)`` is called during long work (see :func:`~tricharge.bem.capacitance.solve_capacitance`).
    Floating conductors carry zero net charge and are left out of the matrix; with a
    ground plane the plane is the reference of the mutual form.

    Error estimates (see :mod:`tricharge.bem.convergence`): ``levels`` >= 2 solves the
    model and ``levels - 1`` uniform refinements of it and extrapolates; ``accuracy`` (a
    fraction, e.g. 0.005) refines adaptively until every entry that matters has a relative
    estimate below it or the next mesh would exceed ``max_panels``. Either way the result
    carries ``error_estimate`` (farads) and ``study``; ``project`` (default: the model's own,
    which a CAD file gives) moves new vertices onto
    an exact surface (tests). Per-panel data stay on the model's own panels.

    >>> import tricharge
    >>> from tricharge import shapes
    >>> v, t = shapes.sphere(radius=1.0, frequency=4)
    >>> result = tricharge.solve(tricharge.Model.from_arrays(v, t))
    >>> round(float(result.capacitance[0, 0]) * 1e12, 1)  # 4 pi eps0 x 1 m = 111.3 pF; 320 panels
    109.8
    """
    from .bem import convergence

    if accuracy is not None and levels > 1:
        raise OptionError("ask for either a uniform study (levels) or an adaptive one (accuracy), not both")
    if not isinstance(levels, int) or not 1 <= levels <= 6:
        raise OptionError(f"levels must be a whole number from 1 to 6, got {levels!r}")
    finest = max_panels if accuracy is not None else model.n_panels * 4 ** (levels - 1)
    check_solve_memory(model, method, finest, what="the finest level of the refinement study" if finest !=
                       model.n_panels else None)
    problem = problem_of(model)
    project = model.project if project is None else project
    if accuracy is not None:
        if max_panels <= len(problem.panels):
            raise OptionError(f"{model.source}: the panel budget {max_panels:,} is not above the model's "
                              f"{len(problem.panels):,} panels; raise it")
        return convergence.adaptive_study(problem, accuracy, max_panels=max_panels, project=project, method=method,
                                          tol=tol, progress=progress).result
    if levels > 1:
        return convergence.uniform_study(problem, levels, project=project, method=method, tol=tol,
                                         progress=progress).result
    return solve_capacitance(problem, method=method, tol=tol, progress=progress)


def check_reductions(model: Model, nets: dict | None = None, grounded=(), reference: str | None = None) -> None:
    """Check ``--merge``/``--ground``/``--reference`` names against the model before any
    solve (OptionError naming the bad one): the same algebra as
    :meth:`~tricharge.bem.capacitance.Result.reduced`, on a stand-in matrix."""
    from .bem.results import ground_conductors, merge_conductors

    names = tuple(c.name for c in model.conductors if not c.floating)
    matrix = np.eye(len(names))
    if nets:
        matrix, names = merge_conductors(matrix, names, nets)
    grounded = list(grounded)
    if reference not in (None, "infinity", "ground plane"):
        grounded.append(reference)
    elif reference is not None and (reference == "ground plane") != (model.ground_z is not None):
        own = "ground plane" if model.ground_z is not None else "infinity"
        raise OptionError(f"reference {reference!r} does not fit this model, whose reference is {own}")
    if grounded:
        ground_conductors(matrix, names, grounded)


def is_simple(model: Model) -> bool:
    """Conductors alone: no interfaces, no ground plane, nothing floating."""
    return not model.interfaces and model.ground_z is None and not any(c.floating for c in model.conductors)


def check_solve_memory(model: Model, method: str, n_panels: int | None = None, *, what: str | None = None) -> None:
    """Refuse (OptionError, with advice) a solve of ``n_panels`` (default: the model's)
    whose estimated memory (:func:`~tricharge.bem.factory.memory_estimate`) exceeds
    what the machine has available. ``method`` may be "auto"."""
    n = model.n_panels if n_panels is None else int(n_panels)
    _check_memory_of(n, method, is_simple(model), len(model.conductors), what or model.source)


def check_panel_memory(n_panels: int, method: str, what: str) -> None:
    """The memory check of a solve from the panel count alone, before the model is built
    and its geometry checked (a minute on millions of panels): refuses only what would not
    fit even as conductors alone with one right-hand side, the smallest estimate;
    :func:`check_solve_memory` checks the model itself afterwards."""
    _check_memory_of(int(n_panels), method, True, 1, what)


def _check_memory_of(n: int, method: str, simple: bool, columns: int, what: str) -> None:
    chosen = memory_method(n, method, conductors_only=simple)
    needed = memory_estimate(n, chosen, simple=simple, columns=columns)
    advice = ("use --method fast (memory growing linearly with the panel count)" if chosen == "dense" else
              "use a coarser mesh, fewer refinement levels or a lower --max-panels")
    check_memory(needed, f"{what}: a {chosen} solve of {n:,} panels", advice)


#: Points evaluated at a time, so near-field pair lists stay bounded (our choice).
SAMPLE_CHUNK = 20_000


@dataclass(frozen=True, repr=False)
class FieldResult:
    """Fields for applied voltages.

    conductors : names; potentials : (K,) V; free_charge : (K,) C
    surface : per-panel surface fields (:class:`~tricharge.bem.fields.SurfaceField`)
    parts : names of the parts hot spots refer to (conductors, then interfaces)
    groups : (N,) index into ``parts`` of every panel
    spots : hot spots, ``spot.group`` indexing ``parts``
    margins : per medium with a withstand strength: (medium, E_max V/m, withstand V/m)
    gap : shortest distance between the two driven electrodes (m), when there are two
    utilisation : E_mean / E_max for that gap (Schwaiger's factor), or None
    """

    conductors: tuple[str, ...]
    potentials: np.ndarray
    free_charge: np.ndarray
    surface: object
    parts: tuple[str, ...]
    groups: np.ndarray
    spots: list
    margins: list
    gap: float | None
    utilisation: float | None
    method: str
    converged: bool
    iterations: int
    residual: float
    problem: Problem
    sigma: np.ndarray

    def sample(self, points):
        """Potential, field and placement at ``points`` (M, 3) metres, anywhere: inside a
        conductor (its potential, no field), near a surface (the field extrapolated from
        where it is accurate), or free; see :mod:`tricharge.bem.evaluation`. Returns
        :class:`~tricharge.bem.evaluation.Samples`. Points are taken :data:`SAMPLE_CHUNK`
        at a time, so memory does not grow with M beyond the results."""
        from .bem.evaluation import Samples, sample_field, surface_values

        points = np.atleast_2d(np.asarray(points, dtype=np.float64))
        panels, images = self.problem.panels, self.problem.images
        values = surface_values(self.problem, self.surface, self.groups)

        def direct(q):
            return potential_and_field(q, panels, self.sigma, images=images)

        parts = [sample_field(points[s : s + SAMPLE_CHUNK], self.problem, self.sigma, self.potentials, direct, values)
                 for s in range(0, len(points), SAMPLE_CHUNK)]
        if len(parts) == 1:
            return parts[0]
        return Samples(*(np.concatenate([getattr(p, name) for p in parts]) for name in
                         ("potential", "field", "where", "distance", "panel_size", "conductor")))

    def __repr__(self) -> str:
        peak = max((s.field for s in self.spots), default=0.0)
        return f"FieldResult({len(self.conductors)} conductors, peak |E| {peak:.4g} V/m, {self.method})"


def applied_voltages(model: Model, overrides: dict[str, float] | None = None) -> np.ndarray:
    """(K,) volts: the model file's values, replaced by ``overrides``; floating ones 0."""
    overrides = dict(overrides or {})
    unknown = sorted(set(overrides) - set(model.conductor_names))
    if unknown:
        raise OptionError(f"{model.source}: no conductor named {', '.join(unknown)}; the model has "
                          f"{', '.join(model.conductor_names)}")
    volts = np.zeros(len(model.conductors))
    for k, c in enumerate(model.conductors):
        if c.floating:
            if c.name in overrides:
                raise OptionError(f"{model.source}: conductor '{c.name}' is floating; it takes no voltage")
            continue
        value = overrides.get(c.name, c.voltage)
        if value is None:
            raise OptionError(f"{model.source}: conductor '{c.name}' has no voltage; give one with "
                              f"--volts {c.name}=VALUE or volts = ... in the model file")
        volts[k] = value
    return volts


def solve_field(model: Model, voltages: dict[str, float] | None = None, *, method: str = "auto", tol: float = 1e-8,
                top: int = 5, withstand: dict[str, float] | None = None, progress=None) -> FieldResult:
    """Surface fields, hot spots and margins for applied voltages.

    ``voltages`` override the model's ``volts`` per conductor name; ``withstand`` gives a
    withstand field strength (V/m) per medium name, for the margins.
    """
    volts = applied_voltages(model, voltages)
    check_solve_memory(model, method)
    problem = problem_of(model)
    charge = np.array([c.net_charge for c in model.conductors])
    excitation = solve_voltages(problem, volts, charge, method=method, tol=tol, progress=progress)
    surface = surface_field(problem, excitation.sigma)
    groups = part_index(model)
    parts = model.conductor_names + tuple(i.name for i in model.interfaces)
    spots = hot_spots(problem.panels, surface.magnitude, groups, top=top, sheet=problem.sheet)
    margins = _margins(model, surface, withstand or {})
    gap, utilisation = _utilisation(model, volts, surface)
    return FieldResult(model.conductor_names, excitation.potentials, excitation.free_charge, surface, parts, groups,
                       spots, margins, gap, utilisation, excitation.method, excitation.converged,
                       excitation.iterations, excitation.residual, problem, excitation.sigma)


def part_index(model: Model) -> np.ndarray:
    """(m,) part index per triangle: conductors first, then interfaces."""
    groups = model.panel_conductor.copy()
    on_interface = model.panel_interface >= 0
    groups[on_interface] = len(model.conductors) + model.panel_interface[on_interface]
    return groups


def _panel_media(model: Model):
    """Per panel: the medium on the outside (and, for interface panels, the inside)."""
    outside = np.array([model.medium_of_surface(model.surfaces[s]) for s in model.surface_index], dtype=object)
    inside = np.full(model.n_panels, None, dtype=object)
    for k, interface in enumerate(model.interfaces):
        on = model.panel_interface == k
        outside[on], inside[on] = interface.outside, interface.inside
    return outside, inside


def _margins(model: Model, surface, withstand: dict[str, float]):
    known = {m.name for m in model.media} | {model.background}
    unknown = sorted(set(withstand) - known)
    if unknown:
        raise OptionError(f"{model.source}: no medium named {', '.join(unknown)}; the model has {', '.join(sorted(known))}")
    outside, inside = _panel_media(model)
    side_out = np.hypot(surface.outside, surface.tangential)
    side_in = np.hypot(surface.inside, surface.tangential)
    margins = []
    for medium, strength in withstand.items():
        values = np.concatenate([side_out[outside == medium], side_in[inside == medium]])
        if len(values):
            margins.append((medium, float(values.max()), float(strength)))
    return margins


def _utilisation(model: Model, volts: np.ndarray, surface):
    """Schwaiger's utilisation factor E_mean / E_max for exactly two driven electrodes."""
    driven = [k for k, c in enumerate(model.conductors) if not c.floating]
    if len(driven) != 2 or volts[driven[0]] == volts[driven[1]]:
        return None, None
    from scipy.spatial import cKDTree

    a, b = (model.vertices[np.unique(model.triangles[model.panel_conductor == k])] for k in driven)
    gap = float(cKDTree(b).query(a)[0].min())
    e_max = float(surface.magnitude[model.panel_conductor >= 0].max())
    return gap, abs(volts[driven[0]] - volts[driven[1]]) / gap / e_max



def refine_peaks(result: FieldResult, model: Model, *, radius_panels: float = 4.0, method: str = "auto",
                 tol: float = 1e-8):
    """Solve again with the panels around every rank-1 hot spot split into four, and
    return [(part name, old peak V/m, new peak V/m)] — how much each peak moved.

    A peak that grows markedly under refinement sits on a singular feature (an edge or
    corner): its value is a property of the mesh, not of the design.
    """
    from .bem.refinement import split_triangles

    problem = result.problem
    panels = problem.panels
    peaks = [s for s in result.spots if s.rank == 1]
    near = np.zeros(len(panels), dtype=bool)
    for spot in peaks:
        near |= np.linalg.norm(panels.centroids - np.array(spot.location), axis=1) < radius_panels * spot.panel_size
    vertices, triangles, parent = split_triangles(panels.vertices, panels.triangles, near)
    refined = Problem(make_panels(vertices, triangles, source=model.source), problem.panel_conductor[parent],
                      problem.permittivity[parent], problem.contrast[parent], problem.floating, problem.ground_z,
                      problem.names, problem.permittivity_behind[parent])
    charge = np.array([c.net_charge for c in model.conductors])
    sigma = solve_voltages(refined, result.potentials, charge, method=method, tol=tol).sigma
    magnitude = surface_field(refined, sigma).magnitude
    groups = result.groups[parent]
    centroids = refined.panels.centroids
    out = []
    for spot in peaks:
        around = (groups == spot.group) & (
            np.linalg.norm(centroids - np.array(spot.location), axis=1) < radius_panels * spot.panel_size)
        out.append((result.parts[spot.group], spot.field, float(magnitude[around].max())))
    return out


def sensitivity(model: Model, result: Result):
    """Derivatives (F/m) of ``result``'s Maxwell matrix with respect to moving each
    conductor surface of ``model`` (its mesh groups, e.g. a bond wire) rigidly along x, y
    and z, and to growing it outward: :class:`~tricharge.bem.sensitivity.Sensitivity`.
    From the solved charges alone (no extra solve)."""
    from .bem.sensitivity import sensitivities

    problem = problem_of(model)
    owned = {s for c in model.conductors for s in c.surfaces}
    names = tuple(s for s in model.surfaces if s in owned)
    part_of_surface = np.array([names.index(s) if s in owned else -1 for s in model.surfaces])
    part = np.where(model.panel_conductor >= 0, part_of_surface[model.surface_index], -1)
    return sensitivities(problem, result.sigma, result.panel_conductor, part, names)
