"""From a model to a result: the one call most users need."""

from __future__ import annotations

from .bem.capacitance import Result, capacitance_matrix
from .bem.panels import make_panels
from .errors import TrichargeError
from .model import Model


class NotSolvableYet(TrichargeError, NotImplementedError):
    """The model uses a feature the solver does not handle yet; nothing is approximated."""


def _homogeneous_permittivity(model: Model) -> float:
    """The one relative permittivity around all conductors, or NotSolvableYet."""
    missing = []
    if model.interfaces:
        missing.append(f"dielectric interfaces ({', '.join(i.name for i in model.interfaces)})")
    if len({model.medium_of_surface(s) for c in model.conductors for s in c.surfaces}) > 1:
        missing.append("conductors touching different media")
    if model.ground_z is not None:
        missing.append("a ground plane")
    floating = [c.name for c in model.conductors if c.floating]
    if floating:
        missing.append(f"floating conductors ({', '.join(floating)})")
    if missing:
        raise NotSolvableYet(f"{model.source}: this version solves conductors in one homogeneous medium only; "
                             f"the model has {'; '.join(missing)}, which are planned. Use 'tricharge inspect' to "
                             "check the model meanwhile")
    first = model.conductors[0].surfaces[0]
    return model.permittivity(model.medium_of_surface(first))


def solve(model: Model, *, method: str = "auto", tol: float = 1e-6, progress=None) -> Result:
    """Capacitance matrix of the model's conductors (Maxwell form, farads).

    ``method`` is "auto" (dense up to a few thousand panels, fast above), "dense" or
    "fast"; ``tol`` the relative residual of the iterative solve; ``progress(stage, done,
    total)`` is called during long work (see :func:`~tricharge.bem.capacitance.capacitance_matrix`).

    >>> import tricharge
    >>> from tricharge import shapes
    >>> v, t = shapes.sphere(radius=1.0, frequency=4)
    >>> result = tricharge.solve(tricharge.Model.from_arrays(v, t))
    >>> round(float(result.capacitance[0, 0]) * 1e12, 1)  # 4 pi eps0 x 1 m = 111.3 pF; 320 panels
    109.8
    """
    eps_r = _homogeneous_permittivity(model)
    panels = make_panels(model.vertices, model.triangles, source=model.source)
    return capacitance_matrix(panels, model.conductor_labels, model.conductor_names, eps_r=eps_r, method=method,
                              tol=tol, progress=progress)
