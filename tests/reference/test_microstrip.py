"""A strip over a ground plane on a finite dielectric slab against the microstrip formula.

Source: Hammerstad & Jensen, "Accurate models for microstrip computer-aided design",
IEEE MTT-S International Microwave Symposium Digest (1980) 407-409: the zero-thickness
strip's capacitance per unit length in air (docs/references.md row 8, constants from
memory, there checked against an independent 2-D solution to 1.5e-5) and the same
paper's effective permittivity (its formula and constants from memory here). Our strip
has thickness 0.02 h and the slab is 10 h wide and as long as the strip, so the
acceptance limit is 5 % per unit length, with end effects removed by differencing two
lengths.
"""

import numpy as np
import pytest

from tricharge.bem.capacitance import solve_capacitance
from tricharge.bem.results import EPS0
from tricharge.bem.problem import problem_from_arrays
from tricharge.mesh import merge_vertices
from tricharge.shapes import grid_face


def hammerstad_jensen(u: float, eps_r: float) -> float:
    """Capacitance per unit length / eps0 of a zero-thickness microstrip, width/height u."""
    f = 6.0 + (2.0 * np.pi - 6.0) * np.exp(-((30.666 / u) ** 0.7528))
    air = 2.0 * np.pi / np.log(f / u + np.sqrt(1.0 + (2.0 / u) ** 2))
    a = 1.0 + np.log((u**4 + (u / 52.0) ** 2) / (u**4 + 0.432)) / 49.0 + np.log(1.0 + (u / 18.1) ** 3) / 18.7
    b = 0.564 * ((eps_r - 0.9) / (eps_r + 3.0)) ** 0.053
    eps_eff = (eps_r + 1.0) / 2.0 + (eps_r - 1.0) / 2.0 * (1.0 + 10.0 / u) ** (-a * b)
    return eps_eff * air


def test_formula_reproduces_the_published_air_values():
    """docs/references.md row 8: C'/eps0 = 2.97989872 at u = 1 and 7.63107732 at u = 5 in air."""
    assert hammerstad_jensen(1.0, 1.0) == pytest.approx(2.97989872, rel=1e-8)
    assert hammerstad_jensen(5.0, 1.0) == pytest.approx(7.63107732, rel=1e-8)


def microstrip(length, eps_r, h=1.0, w=1.0, t=0.02, slab=10.0, step=0.25, edge_cells=6):
    """Strip (conductor 0) on a slab resting on the plane z = 0; the slab's top and sides
    are interface panels (inside the slab's permittivity, outside air), its bottom is
    left out (it lies in the ground plane). The strip's bottom face fills the hole in
    the slab's top and touches the slab; its top and sides touch air. Across the width
    the mesh is graded (cosine spacing) towards the strip's edges, where charge crowds."""
    ex, ey, ez = np.eye(3)
    n_y, n_z = int(round(length / step)), int(round(h / step))
    side = (slab - w) / 2
    n_side = int(round(side / step)) + edge_cells
    x_bands = [(-slab / 2, -w / 2, n_side), (-w / 2, w / 2, int(round(w / step)) + edge_cells),
               (w / 2, slab / 2, n_side)]
    parts = []  # (vertices, triangles, role): role 0 strip in slab, 1 strip in air, 2 interface
    for k, (x0, x1, n) in enumerate(x_bands):
        v, tri = grid_face(np.array([x0, 0.0, h]), (x1 - x0) * ex, length * ey, n, n_y, True)
        parts.append((v, tri[:, ::-1] if k == 1 else tri, 0 if k == 1 else 2))  # strip bottom faces down
        v, tri = grid_face(np.array([x0, 0.0, 0.0]), (x1 - x0) * ex, h * ez, n, n_z, False)  # end y = 0
        parts.append((v, tri, 2))
        v, tri = grid_face(np.array([x0, length, 0.0]), h * ez, (x1 - x0) * ex, n_z, n, False)  # end y = L
        parts.append((v, tri, 2))
        if k == 1:
            for origin, a, b, na, nb in (((x0, 0, h + t), (x1 - x0) * ex, length * ey, n, n_y),
                                         ((x0, 0, h), (x1 - x0) * ex, t * ez, n, 1),
                                         ((x0, length, h), t * ez, (x1 - x0) * ex, 1, n)):
                v, tri = grid_face(np.array(origin, float), a, b, na, nb, origin[2] == h + t)
                parts.append((v, tri, 1))
    for origin, a, b, na, nb in (((-slab / 2, 0, 0), h * ez, length * ey, n_z, n_y),
                                 ((slab / 2, 0, 0), length * ey, h * ez, n_y, n_z),
                                 ((-w / 2, 0, h), t * ez, length * ey, 1, n_y),
                                 ((w / 2, 0, h), length * ey, t * ez, n_y, 1)):
        v, tri = grid_face(np.array(origin, float), a, b, na, nb, False)
        parts.append((v, tri, 2 if origin[2] == 0 else 1))
    vertices, triangles, roles, offset = [], [], [], 0
    for v, tri, role in parts:
        vertices.append(v)
        triangles.append(tri + offset)
        roles.append(np.full(len(tri), role))
        offset += len(v)
    v, t_all = merge_vertices(np.vstack(vertices), np.vstack(triangles), 1e-9)
    roles = np.concatenate(roles)
    conductor = np.where(roles < 2, 0, -1)
    permittivity = np.where(roles == 0, eps_r, 1.0)
    contrast = np.where(roles == 2, (1.0 - eps_r) / (1.0 + eps_r), 0.0)
    return problem_from_arrays(v, t_all, conductor, permittivity, contrast, ground_z=0.0)


@pytest.mark.parametrize("eps_r", [pytest.param(1.0, marks=pytest.mark.slow), 4.0])
def test_microstrip_per_unit_length(eps_r):
    """Measured here: +3.3 % in air (the strip's 0.02 h thickness adds about 1.6 % by the
    same paper's thickness correction), +0.2 % with eps_r = 4."""
    lengths = (3.0, 6.0)
    capacitance = [solve_capacitance(microstrip(L, eps_r), method="auto").capacitance[0, 0] for L in lengths]
    per_length = (capacitance[1] - capacitance[0]) / (lengths[1] - lengths[0]) / EPS0
    assert per_length == pytest.approx(hammerstad_jensen(1.0, eps_r), rel=0.05)


@pytest.mark.slow
def test_fast_and_dense_agree_on_the_microstrip():
    problem = microstrip(3.0, 4.0)
    dense = solve_capacitance(problem, method="dense").capacitance[0, 0]
    fast = solve_capacitance(problem, method="fast", tol=1e-7).capacitance[0, 0]
    assert fast == pytest.approx(dense, rel=1e-4)


def sheet_microstrip(length, eps_r, w=1.0, h=1.0, margin=5.0, step=0.25, edge_cells=8):
    """A zero-thickness strip filling the middle of a slab's top face, over the plane z = 0."""
    ex, ey, ez = np.eye(3)
    slab = w + 2 * margin
    n_y, n_z = int(round(length / step)), int(round(h / step))
    n_side = int(round(margin / step)) + edge_cells
    bands = [(-slab / 2, -w / 2, n_side), (-w / 2, w / 2, int(round(w / step)) + edge_cells), (w / 2, slab / 2, n_side)]
    parts = []
    for k, (x0, x1, n) in enumerate(bands):
        v, tri = grid_face(np.array([x0, 0.0, h]), (x1 - x0) * ex, length * ey, n, n_y, True)
        parts.append((v, tri, 0 if k == 1 else 2))
        for v, tri in (grid_face(np.array([x0, 0.0, 0.0]), (x1 - x0) * ex, h * ez, n, n_z, False),
                       grid_face(np.array([x0, length, 0.0]), h * ez, (x1 - x0) * ex, n_z, n, False)):
            parts.append((v, tri, 2))
    for origin, a, b, na, nb in (((-slab / 2, 0, 0), h * ez, length * ey, n_z, n_y),
                                 ((slab / 2, 0, 0), length * ey, h * ez, n_y, n_z)):
        v, tri = grid_face(np.array(origin, float), a, b, na, nb, False)
        parts.append((v, tri, 2))
    vs, ts, roles, off = [], [], [], 0
    for v, tri, role in parts:
        vs.append(v); ts.append(tri + off); roles.append(np.full(len(tri), role)); off += len(v)
    v, t = merge_vertices(np.vstack(vs), np.vstack(ts), 1e-9)
    roles = np.concatenate(roles)
    conductor = np.where(roles == 0, 0, -1)
    behind = np.where(roles == 0, eps_r, np.nan)
    contrast = np.where(roles == 2, (1.0 - eps_r) / (1.0 + eps_r), 0.0)
    return problem_from_arrays(v, t, conductor, np.ones(len(t)), contrast, ground_z=0.0, permittivity_behind=behind)


@pytest.mark.parametrize("eps_r, u", [(1.0, 1.0), (4.0, 1.0), (10.0, 1.0),
                                      pytest.param(4.0, 5.0, marks=pytest.mark.slow),
                                      pytest.param(10.0, 5.0, marks=pytest.mark.slow)])
def test_zero_thickness_microstrip_on_a_substrate(eps_r, u):
    """The formula's own case: a zero-thickness strip lying in the substrate's top face
    (a sheet with air in front and the substrate behind; docs/design.md gives its free
    charge). Hammerstad & Jensen (1980), zero-thickness C' with the same paper's effective
    permittivity (from memory). Measured: +1.5 % in air (the mesh: 0.25 h panels), -0.2 %
    to +0.9 % on substrates of eps_r 4 and 10 at u = 1 and 5; accepted within 3.5 %."""
    lengths = (3.0, 6.0)
    capacitance = [solve_capacitance(sheet_microstrip(L, eps_r, w=u), method="auto").capacitance[0, 0]
                   for L in lengths]
    per_length = (capacitance[1] - capacitance[0]) / (lengths[1] - lengths[0]) / EPS0
    assert per_length == pytest.approx(hammerstad_jensen(u, eps_r), rel=0.035)
