"""Solve ``A x = b`` for one or many right-hand sides with any single-layer operator.

A stored matrix (``operator.matrix``) is factorised once by LU and reused for every
column of ``b``. Any other :class:`~scipy.sparse.linalg.LinearOperator` goes to
restarted GMRES, column by column, with an optional preconditioner. Non-convergence is
never silent: it raises :class:`~tricharge.errors.SolverError` carrying the partial
solution, unless the caller passes ``raise_on_failure=False``.
"""

from __future__ import annotations

import warnings
from dataclasses import dataclass

import numpy as np
import scipy.linalg
from scipy.sparse.linalg import LinearOperator, gmres

from ..errors import SolverError


@dataclass(frozen=True, repr=False)
class LinearSolution:
    """Solution of a linear system.

    x : (N, K) float64, one column per right-hand side
    method : "lu" or "gmres"
    converged : every column met the tolerance (always True for LU unless singular)
    iterations : largest GMRES iteration count over the columns (0 for LU)
    residual : largest relative residual ``|A x - b| / |b|`` over the columns
    """

    x: np.ndarray
    method: str
    converged: bool
    iterations: int
    residual: float

    def __repr__(self) -> str:
        return (f"LinearSolution(method={self.method!r}, columns={self.x.shape[1]}, converged={self.converged}, "
                f"iterations={self.iterations}, residual={self.residual:.2e})")


def relative_residual(operator: LinearOperator, x: np.ndarray, b: np.ndarray) -> float:
    """Largest ``|A x_k - b_k| / |b_k|`` over columns k (columns with b_k = 0 use |A x_k|)."""
    r = operator.matmat(x) - b
    norms = np.linalg.norm(b, axis=0)
    return float(np.max(np.linalg.norm(r, axis=0) / np.where(norms > 0, norms, 1.0)))


def _solve_lu(matrix: np.ndarray, b: np.ndarray) -> np.ndarray:
    with np.errstate(all="ignore"), warnings.catch_warnings():
        warnings.simplefilter("ignore", scipy.linalg.LinAlgWarning)  # singularity is reported below
        lu = scipy.linalg.lu_factor(matrix, check_finite=False)
    if not np.all(np.isfinite(lu[0])) or np.any(np.diag(lu[0]) == 0):
        raise SolverError("the system matrix is singular: look for duplicate or overlapping panels in the mesh")
    return scipy.linalg.lu_solve(lu, b, check_finite=False)


def _solve_gmres(operator, b, tol, maxiter, preconditioner, restart):
    x = np.zeros_like(b)
    iterations = np.zeros(b.shape[1], dtype=int)
    for k in range(b.shape[1]):
        count = 0

        def _count(_):
            nonlocal count
            count += 1

        x[:, k], _ = gmres(operator, b[:, k], rtol=tol, atol=0.0, restart=restart, maxiter=maxiter,
                           M=preconditioner, callback=_count, callback_type="pr_norm")
        iterations[k] = count
    return x, int(iterations.max())


def solve_linear(operator: LinearOperator, b, *, tol: float = 1e-8, maxiter: int = 200,
                 preconditioner: LinearOperator | None = None, restart: int = 50,
                 raise_on_failure: bool = True) -> LinearSolution:
    """Solve ``operator @ x = b``.

    Parameters
    ----------
    operator : (N, N) LinearOperator; direct LU when it has a ``matrix`` attribute
    b : (N,) or (N, K) right-hand sides
    tol : relative residual asked of GMRES
    maxiter : GMRES restart cycles
    preconditioner : approximate inverse for GMRES (ignored by LU)
    raise_on_failure : raise :class:`SolverError` when GMRES misses ``tol``

    Returns
    -------
    LinearSolution with ``x`` of shape (N, K) (K = 1 for a vector ``b``).
    """
    b = np.asarray(b, dtype=np.float64)
    b = b[:, None] if b.ndim == 1 else b
    if b.shape[0] != operator.shape[0]:
        raise ValueError(f"right-hand side has {b.shape[0]} rows, the operator {operator.shape[0]}")
    if hasattr(operator, "matrix"):
        x, method, iterations = _solve_lu(operator.matrix, b), "lu", 0
    else:
        x, iterations = _solve_gmres(operator, b, tol, maxiter, preconditioner, restart)
        method = "gmres"
    residual = relative_residual(operator, x, b)
    converged = bool(np.isfinite(residual) and residual <= max(tol, 1e-10) * 10)
    solution = LinearSolution(x, method, converged, iterations, residual)
    if not converged and raise_on_failure:
        err = SolverError(
            f"{method} did not reach the tolerance {tol:g}: relative residual {residual:.2e} after {iterations}"
            " iterations; refine needle-shaped panels, check for overlapping surfaces, or raise the iteration limit"
        )
        err.partial = solution
        raise err
    return solution
