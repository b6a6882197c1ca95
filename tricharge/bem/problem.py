"""The numerical description of a model: panels and what each one is.

A :class:`Problem` is what :mod:`tricharge.pipeline` makes of a model and what every
solver in this package takes; ``bem`` never sees a model file or a ``Model``.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from functools import cached_property

import numpy as np

from .panels import Panels, make_panels

@dataclass(frozen=True, eq=False)
class Problem:
    """Numerical description of a model, in SI units.

    panels : all N panels (conductors and interfaces)
    panel_conductor : (N,) int, conductor index of each panel, -1 on interface panels
    permittivity : (N,) relative permittivity of the medium a conductor panel touches
        (ignored on interface panels)
    contrast : (N,) ``(eps_out - eps_in) / (eps_out + eps_in)`` on interface panels, 0 on
        conductor panels; ``eps_out`` is on the side the normal points into
    floating : (K,) bool per conductor
    ground_z : height of the grounded plane (metres) or None
    permittivity_behind : (N,) relative permittivity behind each conductor sheet panel
        (the face its normal points away from); NaN on closed conductor skins, where the
        metal is; None when not known (every conductor panel then counts as one medium)
    """

    panels: Panels
    panel_conductor: np.ndarray
    permittivity: np.ndarray
    contrast: np.ndarray
    floating: np.ndarray
    ground_z: float | None = None
    names: tuple[str, ...] = field(default_factory=tuple)
    permittivity_behind: np.ndarray | None = None

    @property
    def n_conductors(self) -> int:
        return len(self.floating)

    @property
    def is_conductor_panel(self) -> np.ndarray:
        return self.panel_conductor >= 0

    @cached_property
    def floating_index(self) -> np.ndarray:
        """Conductor indices of the floating conductors, in order."""
        return np.flatnonzero(self.floating)

    @cached_property
    def sheet(self) -> np.ndarray:
        """(N,) True on conductor sheet panels (known only with ``permittivity_behind``)."""
        if self.permittivity_behind is None:
            return np.zeros(len(self.panels), dtype=bool)
        return self.is_conductor_panel & np.isfinite(self.permittivity_behind)

    @cached_property
    def two_media(self) -> np.ndarray:
        """(N,) True on sheet panels with different media on their two faces."""
        return self.sheet & (np.nan_to_num(self.permittivity_behind) != self.permittivity)

    @property
    def conductors_only(self) -> bool:
        """Conductors alone: no interface panel, no plane, none floating (the plain
        single-layer problem)."""
        return bool(self.is_conductor_panel.all() and self.ground_z is None and not self.floating.any())

    @cached_property
    def images(self) -> Panels | None:
        """The panels mirrored in the ground plane, or None without one."""
        if self.ground_z is None:
            return None
        mirrored = self.panels.vertices.copy()
        mirrored[:, 2] = 2.0 * self.ground_z - mirrored[:, 2]
        return Panels(mirrored, self.panels.triangles)

def problem_from_arrays(vertices, triangles, panel_conductor, permittivity=None, contrast=None, floating=None,
                        ground_z=None, names=(), permittivity_behind=None) -> Problem:
    """Convenience constructor (tests, notebooks): arrays in metres; see :class:`Problem`."""
    panels = make_panels(vertices, triangles)
    panel_conductor = np.asarray(panel_conductor, dtype=np.int64)
    n = len(panels)
    k = int(panel_conductor.max()) + 1 if (panel_conductor >= 0).any() else 0
    return Problem(panels, panel_conductor,
                   np.ones(n) if permittivity is None else np.asarray(permittivity, float),
                   np.zeros(n) if contrast is None else np.asarray(contrast, float),
                   np.zeros(k, bool) if floating is None else np.asarray(floating, bool),
                   ground_z, tuple(names) or tuple(f"c{i + 1}" for i in range(k)),
                   None if permittivity_behind is None else np.asarray(permittivity_behind, float))
