"""Single-layer operators: the map from panel charge density to potential at targets.

Operators here are geometric: entry ``(i, j)`` is ``integral over panel j of
1/|x_i - y| dA_y`` in metres. The physical potential is that times
``sigma_j / (4 pi eps0)``. Scaling by ``4 pi eps0`` happens once, in
:mod:`tricharge.bem.capacitance`, which keeps the linear algebra well scaled.

Every operator is a :class:`scipy.sparse.linalg.LinearOperator`, so solvers and
preconditioners never need to know whether the matrix is stored (dense) or applied
by a fast method.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy.spatial.distance import cdist
from scipy.sparse.linalg import LinearOperator

from ..mesh import pairs_within
from .integrals import point_rule_field, point_rule_potential, triangle_field, triangle_potential
from .panels import QUADRATURE_RULES, Panels

#: Columns assembled per block in the dense fill (bounds the temporary to ~8 MB per 1k rows).
_COLUMN_BLOCK = 1024


@dataclass(frozen=True)
class NearFieldPolicy:
    """Which integration rule each target/panel pair gets.

    Distances are from the target to the panel's centroid, in units of that panel's
    size (longest edge). Closer than ``closed_form_within``: exact closed form; closer
    than ``near_within``: the Dunavant rule of degree ``near_degree``; farther: the rule
    of degree ``far_degree`` (its points act as point charges, which is what a fast
    multipole method evaluates). The defaults keep every matrix entry within about
    1e-3 relative of the exact integral and capacitances within about 1e-4 of the
    all-exact matrix (checked in tests/test_operators.py).
    """

    closed_form_within: float = 2.0
    near_within: float = 4.0
    near_degree: int = 5
    far_degree: int = 2

    def __post_init__(self):
        if not 0 < self.closed_form_within <= self.near_within:
            raise ValueError(f"NearFieldPolicy needs 0 < closed_form_within <= near_within, got {self}")
        if self.near_degree not in QUADRATURE_RULES or self.far_degree not in QUADRATURE_RULES:
            raise ValueError(f"NearFieldPolicy degrees must be among {sorted(QUADRATURE_RULES)}, got {self}")


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
    i, j, distance = pairs_within(targets, panels.centroids, within * panels.sizes)
    rel = distance / panels.sizes[j]
    return i, j, rel


def pair_integrals(points: np.ndarray, panels: Panels, j: np.ndarray, rel: np.ndarray,
                   policy: NearFieldPolicy, kind: str = "potential") -> np.ndarray:
    """Integrals for explicit point/panel pairs closer than ``policy.near_within``.

    Parameters
    ----------
    points : (p, 3) metres
    panels : source panels; ``j`` (p,) indexes them
    rel : (p,) distance in panel sizes (from :func:`near_pairs`)
    kind : "potential" (returns (p,) metres) or "field" (returns (p, 3), dimensionless)
    """
    exact, rule = (triangle_potential, point_rule_potential) if kind == "potential" else (triangle_field, point_rule_field)
    out = np.empty((len(points),) if kind == "potential" else (len(points), 3))
    closed = rel < policy.closed_form_within
    out[closed] = exact(points[closed], panels.corners[j[closed]])
    qp, qw = panels.quadrature(policy.near_degree)
    out[~closed] = rule(points[~closed], qp[j[~closed]], qw[j[~closed]])
    return out


def far_rule_pairs(points: np.ndarray, panels: Panels, j: np.ndarray, policy: NearFieldPolicy,
                   kind: str = "potential") -> np.ndarray:
    """What the far rule gives for explicit pairs; near corrections subtract this."""
    qp, qw = panels.quadrature(policy.far_degree)
    rule = point_rule_potential if kind == "potential" else point_rule_field
    return rule(points, qp[j], qw[j])


def assemble_single_layer(targets: np.ndarray, panels: Panels, policy: NearFieldPolicy | None = None) -> np.ndarray:
    """Dense single-layer matrix, (M, N) float64 in Fortran order, metres.

    Every pair first gets the far rule (distances by ``cdist``, in column blocks);
    pairs closer than ``policy.near_within`` panel sizes are then overwritten.
    """
    policy = policy or NearFieldPolicy()
    targets = np.asarray(targets, dtype=np.float64)
    matrix = np.zeros((len(targets), len(panels)), order="F")
    qp, qw = panels.quadrature(policy.far_degree)
    with np.errstate(divide="ignore"):
        for s in range(0, len(panels), _COLUMN_BLOCK):
            cols = slice(s, s + _COLUMN_BLOCK)
            block = matrix[:, cols].T  # C-ordered view (panels, targets) of the Fortran matrix
            for q in range(qw.shape[1]):
                r = cdist(qp[cols, q], targets)
                np.divide(qw[cols, q, None], r, out=r)
                block += r
    i, j, rel = near_pairs(targets, panels, policy.near_within)
    matrix[i, j] = pair_integrals(targets[i], panels, j, rel, policy)
    return matrix


class DenseSingleLayer(LinearOperator):
    """Stored single-layer matrix for collocation at the panel centroids.

    Memory is ``8 N^2`` bytes (800 MB at 10k panels), so this is the choice for up to
    roughly 10-15k panels. Solve with :func:`tricharge.bem.solvers.solve_linear`,
    which factorises it once for any number of right-hand sides.
    """

    method = "dense"

    def __init__(self, panels: Panels, policy: NearFieldPolicy | None = None):
        self.panels = panels
        self.matrix = assemble_single_layer(panels.centroids, panels, policy)
        super().__init__(dtype=np.float64, shape=self.matrix.shape)

    def _matvec(self, x):
        return self.matrix @ x

    def _matmat(self, x):
        return self.matrix @ x
