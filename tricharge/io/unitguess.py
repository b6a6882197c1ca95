"""The warning for coordinates read as metres for want of a unit, when the model's size
says they are probably millimetres."""

from __future__ import annotations

import numpy as np


#: Without a unit, a model at least this many metres across (bounding-box diagonal) is
#: reported as possibly in millimetres: the parts tricharge is made for (packages,
#: boards, insulators) are centimetres to decimetres, so their millimetre coordinates
#: read as metres come out 1 m to 1 km across, while a real model of a metre or more
#: is rare and only gets a harmless warning (common practice, no source).
UNITLESS_WARNING_SIZE = 1.0


def unit_warnings(source: str, vertices: np.ndarray, triangles: np.ndarray, fix: str) -> tuple[str, ...]:
    """The warning for coordinates read as metres for want of a unit when the model is
    UNITLESS_WARNING_SIZE or more across; ``fix`` says how to give the unit."""
    used = vertices[np.unique(triangles)] if len(triangles) else vertices[:0]
    if not used.size or not np.isfinite(used).all():
        return ()
    with np.errstate(over="ignore"):
        diagonal = float(np.linalg.norm(np.ptp(used, axis=0)))
    if not UNITLESS_WARNING_SIZE <= diagonal < np.inf:
        return ()
    return (f"{source}: no unit given, coordinates read as metres: the model is {diagonal:.3g} m across; if they "
            f"are millimetres, {fix}",)
