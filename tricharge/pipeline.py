"""From a model to a result: the one call most users need."""

from __future__ import annotations

import numpy as np

from .bem.capacitance import Result, solve_capacitance
from .bem.panels import make_panels
from .bem.system import Problem
from .model import Model


def problem_of(model: Model) -> Problem:
    """The numerical problem of a model: every panel's role, permittivities, plane."""
    panels = make_panels(model.vertices, model.triangles, source=model.source)
    conductor = model.conductor_labels
    permittivity = np.ones(model.n_panels)
    contrast = np.zeros(model.n_panels)
    surface_eps = np.array([model.permittivity(model.medium_of_surface(s)) for s in model.surfaces])
    on_conductor = conductor >= 0
    permittivity[on_conductor] = surface_eps[model.surface_index[on_conductor]]
    for k, interface in enumerate(model.interfaces):
        outside, inside = model.permittivity(interface.outside), model.permittivity(interface.inside)
        contrast[model.interface_labels == k] = (outside - inside) / (outside + inside)
    floating = np.array([c.floating for c in model.conductors], dtype=bool)
    return Problem(panels, conductor, permittivity, contrast, floating, model.ground_z, model.conductor_names)


def solve(model: Model, *, method: str = "auto", tol: float = 1e-6, progress=None) -> Result:
    """Capacitance matrix of the model's conductors (Maxwell form, farads).

    ``method`` is "auto" (dense up to a few thousand panels, fast above), "dense" or
    "fast"; ``tol`` the relative residual of the iterative solve; ``progress(stage, done,
    total)`` is called during long work (see :func:`~tricharge.bem.capacitance.solve_capacitance`).
    Floating conductors carry zero net charge and are left out of the matrix; with a
    ground plane the plane is the reference of the mutual form.

    >>> import tricharge
    >>> from tricharge import shapes
    >>> v, t = shapes.sphere(radius=1.0, frequency=4)
    >>> result = tricharge.solve(tricharge.Model.from_arrays(v, t))
    >>> round(float(result.capacitance[0, 0]) * 1e12, 1)  # 4 pi eps0 x 1 m = 111.3 pF; 320 panels
    109.8
    """
    return solve_capacitance(problem_of(model), method=method, tol=tol, progress=progress)
