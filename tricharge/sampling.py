"""Sampling the field away from the surface: where the points go, from the text specs
of the command line (probes, lines, plane sections), and what they cost in memory."""

from __future__ import annotations

import numpy as np

from .errors import OptionError
from .names import printable
from .resources import check_memory
from .units import metres_per, parse_numbers

#: Bytes per sample point kept until the run ends: coordinates, potential and field,
#: their CSV line and their JSON record (Python objects), measured roughly (our figure).
BYTES_PER_SAMPLE = 2_000

def check_sample_memory(n_points: int, what: str) -> None:
    """Refuse sampling requests too large for the machine (see :data:`BYTES_PER_SAMPLE`)."""
    check_memory(n_points * BYTES_PER_SAMPLE, f"{what}: {n_points:,} sample points", "ask for fewer points")

def line_points(start, end, count: int) -> np.ndarray:
    """(count, 3) points evenly spaced from ``start`` to ``end`` (both included)."""
    s = np.linspace(0.0, 1.0, int(count))[:, None]
    return np.asarray(start, float) + s * (np.asarray(end, float) - np.asarray(start, float))

def section_grid(model, axis: str, value: float, count: int, margin: float = 0.2):
    """A plane section ``axis = value`` (metres) across the model's bounding box plus
    ``margin`` of its size on each side.

    Returns points (count*count, 3) in VTK order (first in-plane axis fastest), and the
    image's origin (3,), spacing (3,) and dimensions (3,), all in metres.
    """
    k = "xyz".index(axis)
    lo, hi = model.vertices.min(axis=0), model.vertices.max(axis=0)
    pad = margin * (hi - lo)
    lo, hi = lo - pad, hi + pad
    lo[k] = hi[k] = value
    dims = np.where(np.arange(3) == k, 1, int(count))
    axes = [np.linspace(lo[d], hi[d], dims[d]) for d in range(3)]
    zz, yy, xx = np.meshgrid(axes[2], axes[1], axes[0], indexing="ij")
    points = np.column_stack([xx.ravel(), yy.ravel(), zz.ravel()])
    spacing = np.where(dims > 1, (hi - lo) / np.maximum(dims - 1, 1), 1.0)
    return points, lo, spacing, dims


#: Most points one --line may ask for (a line of a million points is already finer than
#: any panel; our choice).
MAX_LINE_POINTS = 1_000_000

def _line_count(text: str, spec: str) -> int:
    count = parse_numbers(text, 1, "--line count")[0]
    if count != int(count) or not 2 <= count <= MAX_LINE_POINTS:
        raise OptionError(f"--line {printable(spec)!r}: the point count must be a whole number from 2 to "
                          f"{MAX_LINE_POINTS:,}")
    return int(count)

def sample_requests(model, probes=(), lines=(), section=None, grid: int = 81) -> list:
    """Sample points from their text specs, in the model's unit: ``probes`` like
    ``"X,Y,Z"``, ``lines`` like ``"X0,Y0,Z0:X1,Y1,Z1[:N]"`` (N points, default 101), a
    ``section`` like ``"z=40"`` with ``grid`` points per side. Returns [(kind, points (M, 3)
    metres, image geometry (origin, spacing, dims) for a section or None)]; OptionError
    names any spec that cannot be read.

    >>> from tricharge import Model, shapes
    >>> model = Model.from_arrays(*shapes.sphere(1.0, 2), unit="mm")
    >>> [(kind, points.shape) for kind, points, _ in sample_requests(model, ["0,0,2"], ["0,0,2:0,0,3:5"])]
    [('probe', (1, 3)), ('line', (5, 3))]
    """
    scale = metres_per(model.unit)
    requests = []
    if probes:
        requests.append(("probe", np.array([parse_numbers(p, 3, "--probe") for p in probes]) * scale, None))
    for text in lines:
        parts = text.split(":")
        if len(parts) not in (2, 3):
            raise OptionError(f"--line {printable(text)!r}: write X0,Y0,Z0:X1,Y1,Z1 or X0,Y0,Z0:X1,Y1,Z1:N")
        count = _line_count(parts[2], text) if len(parts) == 3 else 101
        start, end = (np.array(parse_numbers(p, 3, "--line")) * scale for p in parts[:2])
        requests.append(("line", line_points(start, end, count), None))
    if section is not None:
        axis, sep, value = section.partition("=")
        if not sep or axis.strip() not in ("x", "y", "z"):
            raise OptionError(f"--section {printable(section)!r}: write AXIS=VALUE with AXIS x, y or z, e.g. z=40")
        points, origin, spacing, dims = section_grid(model, axis.strip(), parse_numbers(value, 1, "--section")[0]
                                                     * scale, grid)
        requests.append(("section", points, (origin, spacing, dims)))
    return requests
