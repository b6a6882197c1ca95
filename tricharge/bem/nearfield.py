"""Near-field integration: which rule each target/panel pair gets, and the sparse
corrections that turn a point-charge (far-rule) sum into accurate integrals.

Distances are measured from the target to the panel's centroid in units of that panel's
size (longest edge). Close pairs get the closed-form integrals of :mod:`.integrals`
(compiled twins in :mod:`.kernels`), middle ones higher Dunavant rules, far ones the
far rule, whose points act as point charges in a direct or multipole sum (:mod:`.fmm`).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..mesh import PairFinder, pairs_within
from .integrals import point_rule_field, point_rule_potential, triangle_field
from .panels import QUADRATURE_RULES, Panels

@dataclass(frozen=True)
class NearFieldPolicy:
    """Which integration rule each target/panel pair gets.

    Distances are from the target to the panel's centroid, in units of that panel's
    size (longest edge). Closer than ``closed_form_within``: exact closed form; closer
    than ``near_within``: the Dunavant rule of degree ``near_degree``; closer than
    ``mid_within``: degree ``mid_degree``; farther: the rule of degree ``far_degree``,
    whose points act as point charges (what a fast multipole method evaluates).

    ``DENSE_POLICY`` keeps every matrix entry within about 5e-5 of the exact integral
    and capacitances within about 1e-6 of the all-exact matrix; ``FAST_POLICY`` puts one
    point per panel in the multipole part and corrects pairs within 6 panel sizes, which
    keeps capacitances within about 1e-4 (both checked in tests/test_operators.py).
    """

    closed_form_within: float = 2.0
    near_within: float = 4.0
    near_degree: int = 5
    mid_within: float = 4.0
    mid_degree: int = 2
    far_degree: int = 2

    def __post_init__(self):
        if not 0 < self.closed_form_within <= self.near_within <= self.mid_within:
            raise ValueError(f"NearFieldPolicy needs 0 < closed_form_within <= near_within <= mid_within, got {self}")
        degrees = (self.near_degree, self.mid_degree, self.far_degree)
        if any(d not in QUADRATURE_RULES for d in degrees):
            raise ValueError(f"NearFieldPolicy degrees must be among {sorted(QUADRATURE_RULES)}, got {self}")

    @property
    def corrected_within(self) -> float:
        """Pairs closer than this (panel sizes) get something other than the far rule."""
        return self.mid_within

DENSE_POLICY = NearFieldPolicy()

FAST_POLICY = NearFieldPolicy(mid_within=6.0, far_degree=1)


#: Integration rules of :class:`FastSystem`: one point per panel beyond 8 panel sizes.
#: The normal-field rows need the wider correction zone: on a sphere in a dielectric
#: shell (4,160 panels) the capacitance differed from the dense path's by 1.9e-4 with
#: 6 sizes and by 2e-5 with 8.
GENERAL_FAST_POLICY = NearFieldPolicy(mid_within=8.0, far_degree=1)


def near_pairs(targets: np.ndarray, panels: Panels, within: float) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """All target/panel pairs closer than ``within`` panel sizes.

    Parameters
    ----------
    targets : (M, 3) metres
    panels : the N source panels
    within : distance limit in units of each panel's size

    Returns
    -------
    i : (p,) int64 target indices
    j : (p,) int64 panel indices
    rel : (p,) float64 distance target-to-centroid divided by the panel's size
    """
    i, j, distance = pairs_in_grid(targets, panels.centroids, within * panels.sizes)
    return i, j, np.divide(distance, panels.sizes[j], out=distance)


#: Cubes per axis beyond which a group's grid would be too fine to number (a few
#: tiny panels far apart): the k-d tree search of :func:`tricharge.mesh.pairs_within` then.
GRID_LIMIT = 2**20


def pairs_in_grid(targets, centers, radii) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """All (target i, center j) with ``|targets[i] - centers[j]| < radii[j]``, as
    :func:`tricharge.mesh.pairs_within` (the same pairs), sorted by target, so that they
    form the rows of a CSR matrix as they come: centers are grouped by radius in powers
    of two, each group binned in cubes as large as its largest radius, and every target
    visits the 27 cubes around it in a compiled search over both cores
    (:func:`~tricharge.bem.kernels.grid_pairs`; on the package demo's 15 million near
    pairs about 5x faster than the k-d trees): one pass counts, one writes in place.

    targets (M, 3), centers (N, 3) metres, radii (N,) > 0; returns i (p,) int64,
    j (p,) int64, distance (p,) float64 metres."""
    from .kernels import grid_pairs

    targets = np.ascontiguousarray(targets, dtype=np.float64)
    centers = np.ascontiguousarray(centers, dtype=np.float64)
    radii = np.ascontiguousarray(radii, dtype=np.float64)
    if not len(targets) or not len(centers):
        return np.zeros(0, np.int64), np.zeros(0, np.int64), np.zeros(0)
    size_class = np.floor(np.log2(radii / radii.min())).astype(np.int64)
    groups = []  # ("grid", its arguments, count per target) or ("tree", its pairs, count per target)
    for c in np.unique(size_class):
        group = np.flatnonzero(size_class == c)
        cell = float(radii[group].max())
        origin = centers[group].min(axis=0)
        shape = np.floor((centers[group].max(axis=0) - origin) / cell).astype(np.int64) + 1
        if shape.max() > GRID_LIMIT:
            i, j, distance = pairs_within(targets, centers[group], radii[group])
            order = np.argsort(i, kind="stable")
            groups.append(("tree", (i[order], group[j[order]], distance[order]), np.bincount(i, minlength=len(targets))))
            continue
        cube = np.floor((centers[group] - origin) / cell).astype(np.int64)
        number = cube[:, 0] + shape[0] * (cube[:, 1] + shape[1] * cube[:, 2])
        order = np.argsort(number, kind="stable")
        keys, first = np.unique(number[order], return_index=True)
        arguments = (targets, centers, radii, group[order].astype(np.int64), keys,
                     np.append(first, len(group)).astype(np.int64), origin, cell, shape)
        none = np.zeros(0, np.int64), np.zeros(0, np.int64), np.zeros(0)
        groups.append(("grid", arguments, grid_pairs(*arguments, np.zeros(1, np.int64), *none, False)))
    per_target = sum(counts for _, _, counts in groups)
    start = np.concatenate([[0], np.cumsum(per_target)]).astype(np.int64)
    out = np.empty(start[-1], np.int64), np.empty(start[-1], np.int64), np.empty(start[-1])
    at = start[:-1].copy()  # where each target's pairs of the next group go
    for how, work, counts in groups:
        if how == "tree":  # its pairs, sorted by target
            i = work[0]
            rank = np.arange(len(i)) - np.repeat(np.concatenate([[0], np.cumsum(counts)[:-1]]), counts)
            for k in range(3):
                out[k][at[i] + rank] = work[k]
        else:
            grid_pairs(*work, at, *out, True)
        at += counts
    return out

def kernel_arrays(panels: Panels, policy: NearFieldPolicy) -> tuple:
    """The arrays :func:`tricharge.bem.kernels.near_values` takes after the pair lists:
    corners, sizes, the near/mid/far rule points and weights, and the two distance limits."""
    near_pts, near_w = panels.quadrature(policy.near_degree)
    mid_pts, mid_w = panels.quadrature(policy.mid_degree)
    far_pts, far_w = panels.quadrature(policy.far_degree)
    return (panels.corners, panels.sizes, near_pts, near_w, mid_pts, mid_w, far_pts, far_w,
            float(policy.closed_form_within), float(policy.near_within))

def pair_integrals(points: np.ndarray, panels: Panels, j: np.ndarray, rel: np.ndarray,
                   policy: NearFieldPolicy, kind: str = "potential", *, minus_far: bool = False) -> np.ndarray:
    """Integrals for explicit point/panel pairs closer than ``policy.corrected_within``.

    Parameters
    ----------
    points : (p, 3) metres
    panels : source panels; ``j`` (p,) indexes them
    rel : (p,) distance in panel sizes (from :func:`near_pairs`)
    kind : "potential" (returns (p,) metres) or "field" (returns (p, 3), dimensionless)
    minus_far : subtract the far-rule value (potential only): the near correction
    """
    points = np.ascontiguousarray(points, dtype=np.float64)
    if kind == "potential":
        from .kernels import near_values

        index = np.arange(len(points), dtype=np.int64)
        return near_values(points, index, np.asarray(j, np.int64), np.asarray(rel, np.float64),
                           *kernel_arrays(panels, policy), minus_far)
    out = np.empty((len(points), 3))
    closed = rel < policy.closed_form_within
    out[closed] = triangle_field(points[closed], panels.corners[j[closed]])
    near = ~closed & (rel < policy.near_within)
    mid = ~closed & ~near
    for mask, degree in ((near, policy.near_degree), (mid, policy.mid_degree)):
        qp, qw = panels.quadrature(degree)
        out[mask] = point_rule_field(points[mask], qp[j[mask]], qw[j[mask]])
    if minus_far:
        out -= far_rule_pairs(points, panels, j, policy, kind)
    return out

def far_rule_pairs(points: np.ndarray, panels: Panels, j: np.ndarray, policy: NearFieldPolicy,
                   kind: str = "potential") -> np.ndarray:
    """What the far rule gives for explicit pairs; near corrections subtract this.

    A rule point within 1e-9 panel sizes of the evaluation point contributes nothing,
    as in a multipole sum, which skips a source sitting on its target.
    """
    qp, qw = panels.quadrature(policy.far_degree)
    rule = point_rule_potential if kind == "potential" else point_rule_field
    gap = np.linalg.norm(qp[j] - points[:, None, :], axis=2)
    weights = np.where(gap > 1e-9 * panels.sizes[j][:, None], qw[j], 0.0)
    with np.errstate(divide="ignore", invalid="ignore"):
        values = rule(points, qp[j], weights)
    return np.where(np.isfinite(values), values, 0.0)

def near_corrections(panels: Panels, policy: NearFieldPolicy, *, chunk: int = 20_000, progress=None):
    """Sparse (N, N) CSR matrix: accurate value minus far-rule value for every pair within
    ``policy.corrected_within`` panel sizes (the far rule of a pair at distance 0, which
    the multipole sum skips, counts as 0). Memory O(N): about 280 entries per panel with
    FAST_POLICY. ``progress(done, total)`` is called after each chunk of targets.
    """
    from scipy import sparse

    n = len(panels)
    finder = PairFinder(panels.centroids, policy.corrected_within * panels.sizes)
    blocks = []
    arrays = kernel_arrays(panels, policy)
    from .kernels import near_values

    for s in range(0, n, chunk):
        targets = panels.centroids[s : s + chunk]
        i, j, distance = finder.query(targets)
        values = near_values(targets, i, j, distance / panels.sizes[j], *arrays, True)
        blocks.append(sparse.csr_matrix((values, (i, j.astype(np.int32))), shape=(len(targets), n)))
        del i, j, distance, values
        if progress is not None:
            progress(min(s + chunk, n), n)
    return _stack_rows(blocks, n)

def _stack_rows(blocks: list, n_columns: int):
    """Stack CSR row blocks into one CSR matrix, freeing each block once copied, so the
    peak memory is about one copy of the entries rather than two."""
    from scipy import sparse

    nnz = sum(b.nnz for b in blocks)
    n_rows = sum(b.shape[0] for b in blocks)
    index_type = np.int32 if max(nnz, n_columns) < 2**31 else np.int64
    data = np.empty(nnz)
    indices = np.empty(nnz, dtype=index_type)
    indptr = np.empty(n_rows + 1, dtype=index_type)
    indptr[0] = 0
    row = at = 0
    while blocks:
        b = blocks.pop(0)
        data[at : at + b.nnz] = b.data
        indices[at : at + b.nnz] = b.indices
        indptr[row + 1 : row + 1 + b.shape[0]] = b.indptr[1:] + at
        row, at = row + b.shape[0], at + b.nnz
        del b
    return sparse.csr_matrix((data, indices, indptr), shape=(n_rows, n_columns))


def near_correction_rows(targets, panels: Panels, policy: NearFieldPolicy, kind: str, normals=None):
    """Sparse (M, N) near corrections of the far rule for arbitrary targets: accurate
    minus far-rule values for pairs within ``policy.corrected_within`` panel sizes; for
    ``kind="field"`` the normal component ``n_i . F``. (:func:`near_corrections` is the
    same for the panels' own centroids, built in chunks with progress.)"""
    from scipy import sparse

    from .kernels import near_normal_field_values, near_values

    targets = np.ascontiguousarray(targets, dtype=np.float64)
    i, j, rel = near_pairs(targets, panels, policy.corrected_within)  # sorted by target: CSR rows as they come
    if kind == "field":
        values = near_normal_field_values(targets, np.ascontiguousarray(normals, dtype=np.float64), i, j, rel,
                                          *kernel_arrays(panels, policy), True)
    else:
        values = near_values(targets, i, j, rel, *kernel_arrays(panels, policy), True)
    del rel
    indptr = np.concatenate([[0], np.cumsum(np.bincount(i, minlength=len(targets)))])
    del i
    index = np.int32 if max(len(values), len(panels)) < 2**31 else np.int64
    return sparse.csr_matrix((values, j.astype(index), indptr.astype(index)), shape=(len(targets), len(panels)))
