"""Coplanar strips: two zero-thickness strips of width w side by side across a gap s, in
vacuum and lying in the top face of a thick dielectric block.

Sources. Conformal mapping gives the capacitance per unit length of coplanar strips
between two half-spaces of relative permittivities 1 and eps_r as
C = eps0 * (eps_r + 1) / 2 * K(k') / K(k), with k = s / (s + 2 w), k' = sqrt(1 - k^2) and
K the complete elliptic integral of the first kind (Gupta, Garg, Bahl & Bhartia,
"Microstrip Lines and Slotlines", 2nd ed., Artech House, 1996, the coplanar strips
chapter; chapter and notation from memory; the effective permittivity (eps_r + 1) / 2
for a very thick substrate as in Wen, IEEE Trans. MTT 17(12), 1969, from memory). The
factor (eps_r + 1) / 2 is also exact for any planar sheets in the plane between two
half-spaces (the vacuum field is mirror-symmetric about the plane; see test_sheets.py).

Checked here: the vacuum value per unit length (end effects removed by differencing two
lengths), and the ratio of the strips' differential capacitance on a finite block to the
same mesh's vacuum value, which tends to (eps_r + 1) / 2 as the block grows.
"""

import numpy as np
import pytest
from scipy.special import ellipk

from tricharge import shapes
from tricharge.bem.results import EPS0
from tricharge.mesh import merge_vertices
from tricharge.model import Conductor, Interface, Medium, Model
from tricharge.pipeline import solve


def line_capacitance(model) -> float:
    """Q / (V1 - V2) of the two strips driven at +V/2 and -V/2 (F, or F/m by difference)."""
    c = solve(model).capacitance
    return float(c[0, 0] - c[0, 1] + c[1, 1] - c[1, 0]) / 4.0


def conformal_mapping(w: float, s: float) -> float:
    """Vacuum capacitance per unit length of coplanar strips, F/m (module docstring)."""
    k = s / (s + 2.0 * w)
    return EPS0 * ellipk(1.0 - k**2) / ellipk(k**2)  # scipy's ellipk takes m = k^2


def free_strips(length: float, w: float = 1.0, s: float = 1.0, across: int = 10) -> Model:
    """Two strips along x in vacuum, graded towards their edges, 4 panels per unit length."""
    a = shapes.plate((length, w), (int(4 * length), across), center=(0.0, s / 2 + w / 2, 0.0), graded=True)
    b = shapes.plate((length, w), (int(4 * length), across), center=(0.0, -s / 2 - w / 2, 0.0), graded=True)
    v, t, labels = shapes.combine(a, b)
    return Model.from_arrays(v, t, labels)


def test_coplanar_strips_in_vacuum_match_conformal_mapping():
    """w = s = 1: per unit length within 0.5 % (measured -0.25 % with 10 panels across
    each strip, -0.95 % with 6: the error falls with the mesh)."""
    per_length = (line_capacitance(free_strips(20.0)) - line_capacitance(free_strips(10.0))) / 10.0
    assert per_length == pytest.approx(conformal_mapping(1.0, 1.0), rel=5e-3)


def _spaced(a: float, b: float, first: float, growth: float = 1.3) -> np.ndarray:
    """Coordinates from a to b, the first step ``first``, each next one ``growth`` times longer."""
    out, x, h, d = [a], a, first, np.sign(b - a)
    while abs(b - x) > 1.5 * h:
        x += d * h
        out.append(x)
        h *= growth
    return np.array(out + [b])


def _edge_graded(a: float, b: float, n: int) -> np.ndarray:
    return a + (b - a) * (1.0 - np.cos(np.linspace(0.0, np.pi, n + 1))) / 2.0


def _grid_face(u, v, point, outward):
    """Triangles of the grid u x v placed by ``point(U, V)``, normals along ``outward``."""
    uu, vv = np.meshgrid(u, v, indexing="ij")
    p = point(uu, vv).reshape(-1, 3)
    index = np.arange(len(u) * len(v)).reshape(len(u), len(v))
    a, b, c, d = (index[:-1, :-1].ravel(), index[1:, :-1].ravel(), index[1:, 1:].ravel(), index[:-1, 1:].ravel())
    t = np.concatenate([np.stack([a, b, c], 1), np.stack([a, c, d], 1)])
    turned = np.cross(p[t[:, 1]] - p[t[:, 0]], p[t[:, 2]] - p[t[:, 0]]) @ np.asarray(outward, float) < 0
    t[turned] = t[turned][:, ::-1]
    return p, t


def strips_on_block(block: float, eps_r: float, length: float = 4.0, w: float = 1.0, s: float = 1.0,
                    across: int = 8, step: float = 0.25) -> Model:
    """The strips (conductors 'a' and 'b', sheets) cut from the top face (z = 0) of a
    dielectric box reaching ``block`` beyond them on every side and ``block`` deep."""
    edge = s / 2 + w
    xs = np.concatenate([_spaced(0.0, -block, step)[::-1], np.arange(step, length, step),
                         _spaced(length, length + block, step)])
    strip = _edge_graded(s / 2, edge, across)
    outer = np.concatenate([strip[1:], _spaced(edge, edge + block, strip[-1] - strip[-2])[1:]])
    ys = np.concatenate([-outer[::-1], _edge_graded(-s / 2, s / 2, 4), outer])
    zs = _spaced(0.0, -block, step)
    x0, x1, y0, y1, z0 = xs[0], xs[-1], ys[0], ys[-1], zs[-1]
    faces = [_grid_face(xs, ys, lambda u, v: np.stack([u, v, 0 * u], -1), (0, 0, 1)),
             _grid_face(xs, ys, lambda u, v: np.stack([u, v, 0 * u + z0], -1), (0, 0, -1)),
             _grid_face(xs, zs, lambda u, v: np.stack([u, 0 * u + y0, v], -1), (0, -1, 0)),
             _grid_face(xs, zs, lambda u, v: np.stack([u, 0 * u + y1, v], -1), (0, 1, 0)),
             _grid_face(ys, zs, lambda u, v: np.stack([0 * u + x0, u, v], -1), (-1, 0, 0)),
             _grid_face(ys, zs, lambda u, v: np.stack([0 * u + x1, u, v], -1), (1, 0, 0))]
    offsets = np.cumsum([0] + [len(p) for p, _ in faces])
    v, t = merge_vertices(np.vstack([p for p, _ in faces]),
                          np.vstack([tri + o for (_, tri), o in zip(faces, offsets)]), 1e-9)
    c = v[t].mean(axis=1)
    on_strips = (np.abs(c[:, 2]) < 1e-12) & (c[:, 0] > 0) & (c[:, 0] < length) & (np.abs(c[:, 1]) > s / 2) & (
        np.abs(c[:, 1]) < edge)
    surface = np.where(on_strips, np.where(c[:, 1] > 0, 0, 1), 2)
    return Model(v, t, surface, ("a", "b", "skin"), (Conductor("a", ("a",)), Conductor("b", ("b",))),
                 (Interface("skin", ("skin",), "block", "vacuum"),), (Medium("block", eps_r),), "vacuum")


def _ratio(block: float, eps_r: float) -> float:
    return line_capacitance(strips_on_block(block, eps_r)) / line_capacitance(strips_on_block(block, 1.0))


def test_coplanar_strips_on_a_thick_block_tend_to_the_mean_permittivity():
    """eps_r = 4: (4 + 1) / 2 = 2.5. Blocks reaching 2 and 4 strip widths beyond the
    strips: 2.411 and 2.482 (measured, -3.6 % and -0.73 %); the differential mode's field
    falls fast, so the shortfall falls about 5x per doubling of the block."""
    ratio = np.array([_ratio(b, 4.0) for b in (2.0, 4.0)])
    shortfall = 2.5 - ratio
    assert np.all(shortfall > 0) and shortfall[1] < shortfall[0] / 3.0, ratio
    assert ratio[1] == pytest.approx(2.5, rel=0.015)


@pytest.mark.slow
@pytest.mark.parametrize("eps_r", [4.0, 10.0])
def test_coplanar_strips_on_a_large_block_are_within_a_few_tenths_of_a_percent(eps_r):
    """A block reaching 8 strip widths beyond the strips: within 0.4 % of (eps_r + 1) / 2
    (measured -0.12 % at eps_r = 4)."""
    assert _ratio(8.0, eps_r) == pytest.approx((eps_r + 1.0) / 2.0, rel=4e-3)
