"""The model: conductor surfaces in SI units, validated, independent of any file.

Build one from arrays (:meth:`Model.from_arrays`) or from a mesh file with
:func:`tricharge.load`. A model is immutable; everything the solver needs is here.
"""

from __future__ import annotations

from dataclasses import dataclass
import numpy as np

from .errors import MeshError
from .mesh import connected_components, validate_surface
from .units import metres_per


@dataclass(frozen=True, eq=False)
class Model:
    """Conductors in a homogeneous medium.

    vertices : (n, 3) float64, metres
    triangles : (m, 3) int64
    labels : (m,) int64, conductor index of each triangle, 0..K-1
    conductors : K names, in matrix order
    unit : the length unit the user works in (for display only; data are in metres)
    source : where the model came from (a file name), used in messages
    eps_r : relative permittivity of the medium around the conductors
    """

    vertices: np.ndarray
    triangles: np.ndarray
    labels: np.ndarray
    conductors: tuple[str, ...]
    unit: str = "m"
    source: str = "<arrays>"
    eps_r: float = 1.0

    def __post_init__(self):
        metres_per(self.unit)  # validates the unit name
        labels = np.asarray(self.labels)
        k = len(self.conductors)
        if labels.shape != (len(self.triangles),):
            raise MeshError(f"{self.source}: {labels.shape} labels for {len(self.triangles)} triangles")
        if k == 0:
            raise MeshError(f"{self.source}: the model has no conductors")
        if len(set(self.conductors)) != k:
            dupes = sorted({n for n in self.conductors if self.conductors.count(n) > 1})
            raise MeshError(f"{self.source}: conductor names must be unique, repeated: {', '.join(dupes)}")
        if labels.size and (labels.min() < 0 or labels.max() >= k):
            raise MeshError(f"{self.source}: conductor labels must lie in 0..{k - 1}")
        empty = [self.conductors[c] for c in range(k) if not np.any(labels == c)]
        if empty:
            raise MeshError(f"{self.source}: conductors without triangles: {', '.join(empty)}")
        if not (np.isfinite(self.eps_r) and self.eps_r >= 1.0):
            raise MeshError(f"{self.source}: relative permittivity must be >= 1, got {self.eps_r}")
        v, t = validate_surface(self.vertices, self.triangles, source=self.source)
        object.__setattr__(self, "vertices", v)
        object.__setattr__(self, "triangles", t)
        object.__setattr__(self, "labels", labels.astype(np.int64))

    @classmethod
    def from_arrays(cls, vertices, triangles, labels=None, conductors=None, *, unit: str = "m",
                    source: str = "<arrays>", eps_r: float = 1.0) -> "Model":
        """Build a model from arrays given in ``unit`` (converted to metres here).

        Parameters
        ----------
        vertices : (n, 3) in ``unit``
        triangles : (m, 3) integer indices
        labels : (m,) conductor index per triangle; default: one conductor per connected
            component, numbered by each component's lowest triangle index
        conductors : names; default ``c1, c2, ...``
        """
        v = np.asarray(vertices, dtype=np.float64) * metres_per(unit)
        t = np.asarray(triangles)
        if labels is None:
            labels = connected_components(t) if t.ndim == 2 and t.size else np.zeros(len(t), np.int64)
        labels = np.asarray(labels, dtype=np.int64)
        if conductors is None:
            conductors = tuple(f"c{k + 1}" for k in range(int(labels.max()) + 1 if labels.size else 0))
        return cls(v, t, labels, tuple(conductors), unit, source, float(eps_r))

    @property
    def n_panels(self) -> int:
        return len(self.triangles)

    def __repr__(self) -> str:
        return f"Model({self.source!r}, {len(self.conductors)} conductors, {self.n_panels} panels, unit {self.unit})"
