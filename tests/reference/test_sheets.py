"""Zero-thickness conductors (sheets) lying in the plane between two media.

A planar sheet in the plane between two half-spaces of relative permittivities e1 and e2
has exactly (e1 + e2) / 2 times its capacitance in vacuum: the vacuum solution's field is
mirror-symmetric about the plane, so its normal component vanishes on the plane outside
the sheet and the interface condition holds there unchanged, while each half-space holds
its share of the sheet's charge (standard argument; from memory: Wen, IEEE Trans. MTT
17(12), 1969, for coplanar lines on a thick substrate, eps_eff -> (eps_r + 1) / 2). Here a
disk lies in the top face of a dielectric cylinder; the finite cylinder falls short of the
half-space, less and less as it grows.
"""

import numpy as np
import pytest
from scipy.spatial import Delaunay

from tricharge import shapes
from tricharge.mesh import merge_vertices
from tricharge.model import Conductor, Interface, Medium, Model
from tricharge.pipeline import solve, solve_field


def _rings_face(radii, counts, z, up):
    """A planar face of concentric rings of points (the first may be the centre)."""
    points = [[0.0, 0.0]] if radii[0] == 0 else []
    for k, (r, n) in enumerate(zip(radii, counts)):
        if r > 0:
            a = 2 * np.pi * (np.arange(n) + 0.5 * (k % 2)) / n
            points.extend(np.column_stack([r * np.cos(a), r * np.sin(a)]))
    points = np.array(points)
    t = Delaunay(points).simplices.astype(np.int64)
    a, b, c = (points[t[:, i]] for i in range(3))
    turned = ((b[:, 0] - a[:, 0]) * (c[:, 1] - a[:, 1]) - (b[:, 1] - a[:, 1]) * (c[:, 0] - a[:, 0]) < 0) == up
    t[turned] = t[turned][:, [0, 2, 1]]
    return np.column_stack([points, np.full(len(points), z)]), t


def disk_in_block(block: float, eps: float = 4.0, radius: float = 1.0, rings: int = 8, growth: float = 1.25):
    """A disk (the conductor 'disk', a sheet) filling the middle of the top face of a
    dielectric cylinder of radius and depth ``block``, vacuum outside."""
    h = radius / rings
    radii, counts = [0.0] + [k * h for k in range(1, rings + 1)], [1] + [6 * k for k in range(1, rings + 1)]
    step, r = h, radius
    while r < block - 1e-9:
        step, r = step * growth, min(block, r + step * growth)
        radii.append(r)
        counts.append(max(6 * rings, int(round(2 * np.pi * r / step))))
    top_v, top_t = _rings_face(radii, counts, 0.0, True)
    on_disk = (np.linalg.norm(top_v[top_t][:, :, :2], axis=2) <= radius + 1e-9).all(axis=1)
    n = counts[-1]
    bottom = _rings_face([0.0] + list(np.linspace(block / 6, block, 6)),
                         [1] + [max(8, n * k // 6) for k in range(1, 6)] + [n], -block, False)
    angle = 2 * np.pi * (np.arange(n) + 0.5 * ((len(radii) - 1) % 2)) / n
    levels = np.linspace(0.0, -block, 9)
    wall_v = np.concatenate([np.column_stack([block * np.cos(angle), block * np.sin(angle), np.full(n, z)])
                             for z in levels])
    j = np.arange(n)
    wall_t = np.vstack([np.column_stack([L * n + j, (L + 1) * n + j, L * n + (j + 1) % n]) for L in range(8)]
                       + [np.column_stack([L * n + (j + 1) % n, (L + 1) * n + j, (L + 1) * n + (j + 1) % n])
                          for L in range(8)])
    v, t, part = shapes.combine((top_v, top_t[on_disk]), (top_v, top_t[~on_disk]), bottom, (wall_v, wall_t))
    v, t = merge_vertices(v, t, 1e-9 * block)
    return Model(v, t, np.minimum(part, 1), ("disk", "skin"), (Conductor("disk", ("disk",)),),
                 (Interface("skin", ("skin",), "block", "vacuum"),), (Medium("block", eps),), "vacuum")


def test_a_sheet_in_an_interface_tends_to_the_mean_permittivity():
    """(e1 + e2) / 2 = 2.5 times the vacuum value (see the module docstring): the blocks
    of 2, 4 and 8 disk radii give 1.731, 2.048, 2.251 times the same mesh's vacuum value
    (measured); the shortfall falls by 0.59 and 0.55 per doubling, and extrapolating the
    three to an infinite block with their observed order (0.65) gives 2.61, within 5 % of
    2.5 (measured +4.3 %: the order is not yet steady at these sizes).
    Solved as if in one medium it came out 1.0 or 3.8 times."""
    vacuum = solve(disk_in_block(4.0, eps=1.0)).capacitance[0, 0]
    ratio = np.array([solve(disk_in_block(b)).capacitance[0, 0] / vacuum for b in (2.0, 4.0, 8.0)])
    shortfall = 2.5 - ratio
    assert np.all(shortfall > 0) and np.all(0.45 < shortfall[1:] / shortfall[:-1]) and np.all(
        shortfall[1:] / shortfall[:-1] < 0.75), ratio
    order = np.log2((ratio[1] - ratio[0]) / (ratio[2] - ratio[1]))
    limit = ratio[2] + (ratio[2] - ratio[1]) / (2.0**order - 1.0)
    assert limit == pytest.approx(2.5, rel=0.05), (ratio, limit)


@pytest.mark.smoke
def test_fast_and_dense_agree_on_a_sheet_in_an_interface():
    """Also the smoke test of the general system's compiled kernels (grid pair search,
    normal-field near integrals, coarse near-cluster sums, sparse sampling) at the floors."""
    model = disk_in_block(4.0)
    dense = solve(model, method="dense").capacitance[0, 0]
    fast = solve(model, method="fast", tol=1e-8).capacitance[0, 0]
    assert fast == pytest.approx(dense, rel=1e-4)


def test_each_face_of_a_sheet_has_its_own_field():
    """A thin disk of radius R at V in vacuum: on each face at the centre the field is
    2 V / (pi R) (Jackson, Classical Electrodynamics, 3rd ed., 1999, section 3.12; section
    from memory); the panel charge is the two faces' total, so each face has half its
    jump. Within 3 % on the panels nearest the centre (12 rings)."""
    v, t = shapes.disk(1.0, 12)
    result = solve_field(Model.from_arrays(v, t), {"c1": 1.0})
    centre = np.argsort(np.linalg.norm(result.problem.panels.centroids, axis=1))[:6]
    np.testing.assert_allclose(result.surface.outside[centre], 2 / np.pi, rtol=0.03)
    np.testing.assert_allclose(-result.surface.inside[centre], 2 / np.pi, rtol=0.03)


def test_a_floating_sheet_between_two_media_is_refused():
    from dataclasses import replace

    from tricharge.errors import OptionError

    model = disk_in_block(2.0)
    floating = replace(model, conductors=(Conductor("disk", ("disk",), floating=True),), check=False)
    with pytest.raises(OptionError, match="floating sheet in an interface between two media"):
        solve(floating)


def test_the_rim_of_a_sheet_in_an_interface_is_marked_as_a_knife_edge():
    """A sheet's edge is a knife edge, where the field is singular, even where it meets
    the interface it lies in with coplanar neighbours: its hot spots there say so, and
    its middle does not."""
    from tricharge.bem.fields import SHARP_ANGLE, edge_sharpness

    result = solve_field(disk_in_block(2.0), {"disk": 1.0})
    panels, sheet = result.problem.panels, result.problem.sheet
    sharpness = edge_sharpness(panels, sheet)
    corner_radius = np.linalg.norm(panels.corners[:, :, :2], axis=2)
    on_rim = sheet & (np.isclose(corner_radius, 1.0).sum(axis=1) == 2)   # an edge on the rim
    assert on_rim.any() and np.all(sharpness[on_rim] == 180.0)
    assert np.all(sharpness[sheet & (corner_radius.max(axis=1) < 0.8)] < SHARP_ANGLE)
    assert np.all(edge_sharpness(panels)[on_rim] < SHARP_ANGLE)   # without the sheets: coplanar, not sharp
    top = [s for s in result.spots if s.group == 0 and s.rank == 1][0]
    assert top.sharp and np.hypot(*top.location[:2]) > 0.8

