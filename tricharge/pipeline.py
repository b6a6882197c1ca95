"""From a model to a result: the one call most users need."""

from __future__ import annotations

from .bem.capacitance import Result, capacitance_matrix
from .bem.operators import NearFieldPolicy
from .bem.panels import make_panels
from .model import Model


def solve(model: Model, *, policy: NearFieldPolicy | None = None) -> Result:
    """Capacitance matrix of the model's conductors.

    >>> import tricharge
    >>> from tricharge import shapes
    >>> v, t = shapes.sphere(radius=1.0, frequency=4)
    >>> result = tricharge.solve(tricharge.Model.from_arrays(v, t))
    >>> round(float(result.capacitance[0, 0]) * 1e12, 1)  # 4 pi eps0 x 1 m = 111.3 pF; 320 panels
    109.8
    """
    panels = make_panels(model.vertices, model.triangles, source=model.source)
    return capacitance_matrix(panels, model.labels, model.conductors, eps_r=model.eps_r, policy=policy)
