"""Solve ``A x = b`` for one or many right-hand sides with any single-layer operator.

A stored matrix (a :class:`~tricharge.bem.operators.StoredOperator`) is factorised once
by LU and reused for every column of ``b``. Any other :class:`~scipy.sparse.linalg.LinearOperator` goes to
restarted GMRES with all columns in lockstep and an optional preconditioner. Non-convergence is
never silent: it raises :class:`~tricharge.errors.SolverError` carrying the partial
solution, unless the caller passes ``raise_on_failure=False``.
"""

from __future__ import annotations

import warnings
from dataclasses import dataclass

import numpy as np
import scipy.linalg
from scipy.sparse.linalg import LinearOperator

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


def gmres(operator, b, *, tol: float = 1e-8, restart: int = 50, maxiter: int = 200, preconditioner=None,
          callback=None, x0=None):
    """Restarted GMRES for K right-hand sides in lockstep, right-preconditioned.

    Each column has its own Krylov space, but every iteration applies the operator to all
    unconverged columns at once (one multipole pass for K densities is much cheaper than
    K passes). The residual monitored is the one of ``A x = b`` (right preconditioning
    leaves it unchanged). The operator is applied once per iteration and never otherwise:
    a zero start needs no residual pass, and the residual a cycle leaves is formed from
    its Krylov basis and rotations (the Arnoldi relation) instead of by applying A again.

    Parameters
    ----------
    operator : LinearOperator (N, N)
    b : (N, K)
    tol : relative residual asked of every column
    restart : Krylov vectors per cycle
    maxiter : restart cycles at most
    preconditioner : LinearOperator approximating the inverse, or None
    callback : ``callback(iteration, residuals (K,))`` after every iteration
    x0 : (N, K) starting guess (e.g. a coarser mesh's solution), or None for zeros

    Returns
    -------
    x : (N, K); iterations : (K,) int, inner iterations per column; residuals : (K,)
    relative residual of every column
    """
    apply_m = (lambda v: v) if preconditioner is None else preconditioner.matmat
    n, k = b.shape
    x = np.zeros((n, k)) if x0 is None else np.array(x0, dtype=np.float64).reshape(n, k)
    norms = np.linalg.norm(b, axis=0)
    norms[norms == 0] = 1.0
    iterations = np.zeros(k, dtype=int)
    r = np.array(b, dtype=np.float64) if x0 is None else b - operator.matmat(x)
    counter = [0]

    def report(active, residuals):
        counter[0] += 1
        iterations[active] += 1
        if callback is not None:
            everything = np.linalg.norm(r, axis=0) / norms
            everything[active] = residuals
            callback(counter[0], everything)

    for _ in range(maxiter):
        active = np.flatnonzero(np.linalg.norm(r, axis=0) / norms > tol)
        if not len(active):
            break
        update, r[:, active] = _cycle(operator, apply_m, r[:, active], norms[active], tol, restart,
                                      lambda residuals, a=active: report(a, residuals))
        x[:, active] += apply_m(update)
    return x, iterations, np.linalg.norm(r, axis=0) / norms


def _cycle(operator, apply_m, r, norms, tol, restart, report):
    """One GMRES cycle (at most ``restart`` iterations) for the columns of ``r`` (N, K):
    returns the update before preconditioning, and the residual it leaves (from the
    Arnoldi relation). ``report(relative residuals (K,))`` after every iteration."""
    n, ka = r.shape
    beta = np.linalg.norm(r, axis=0)
    basis = np.zeros((restart + 1, n, ka))
    basis[0] = r / beta
    h = np.zeros((ka, restart + 1, restart))
    g = np.zeros((ka, restart + 1))
    g[:, 0] = beta
    cs, sn = np.zeros((ka, restart)), np.zeros((ka, restart))
    for j in range(restart):
        w = operator.matmat(apply_m(basis[j]))
        for i in range(j + 1):  # modified Gram-Schmidt
            hij = np.einsum("nk,nk->k", basis[i], w)
            w -= basis[i] * hij
            h[:, i, j] = hij
        h[:, j + 1, j] = np.linalg.norm(w, axis=0)
        with np.errstate(divide="ignore", invalid="ignore"):
            basis[j + 1] = np.where(h[:, j + 1, j] > 0, w / h[:, j + 1, j], 0.0)
        for i in range(j):  # previous Givens rotations on the new column
            hi, hi1 = h[:, i, j].copy(), h[:, i + 1, j].copy()
            h[:, i, j] = cs[:, i] * hi + sn[:, i] * hi1
            h[:, i + 1, j] = -sn[:, i] * hi + cs[:, i] * hi1
        rho = np.hypot(h[:, j, j], h[:, j + 1, j])
        rho[rho == 0] = 1.0
        cs[:, j], sn[:, j] = h[:, j, j] / rho, h[:, j + 1, j] / rho
        h[:, j, j], h[:, j + 1, j] = rho, 0.0
        g[:, j + 1] = -sn[:, j] * g[:, j]
        g[:, j] = cs[:, j] * g[:, j]
        residuals = np.abs(g[:, j + 1]) / norms
        report(residuals)
        if np.all(residuals <= tol):
            break
    m = j + 1
    update, left = np.zeros((n, ka)), np.zeros((n, ka))
    for c in range(ka):
        y = scipy.linalg.solve_triangular(h[c, :m, :m], g[c, :m])
        update[:, c] = basis[:m, :, c].T @ y
        left[:, c] = basis[: m + 1, :, c].T @ _residual_coordinates(g[c, m], cs[c, :m], sn[c, :m])
    return update, left


def _residual_coordinates(last: float, cs: np.ndarray, sn: np.ndarray) -> np.ndarray:
    """Coordinates in the Krylov basis of the residual a GMRES cycle leaves: the rotated
    right-hand side's last entry, rotated back (the transposed Givens rotations in
    reverse order)."""
    z = np.zeros(len(cs) + 1)
    z[-1] = last
    for i in range(len(cs) - 1, -1, -1):
        z[i], z[i + 1] = cs[i] * z[i] - sn[i] * z[i + 1], sn[i] * z[i] + cs[i] * z[i + 1]
    return z


def solve_linear(operator: LinearOperator, b, *, tol: float = 1e-8, maxiter: int = 200,
                 preconditioner: LinearOperator | None = None, restart: int = 50,
                 raise_on_failure: bool = True, callback=None, x0=None) -> LinearSolution:
    """Solve ``operator @ x = b``.

    Parameters
    ----------
    operator : (N, N) LinearOperator; direct LU for a StoredOperator
    b : (N,) or (N, K) right-hand sides
    tol : relative residual asked of GMRES
    maxiter : GMRES restart cycles
    preconditioner : approximate inverse for GMRES (ignored by LU)
    raise_on_failure : raise :class:`SolverError` when GMRES misses ``tol``
    callback : ``callback(iteration, residuals)`` after every GMRES iteration
    x0 : starting guess for GMRES, shaped like ``b`` (ignored by LU)

    Returns
    -------
    LinearSolution with ``x`` of shape (N, K) (K = 1 for a vector ``b``).
    """
    b = np.asarray(b, dtype=np.float64)
    b = b[:, None] if b.ndim == 1 else b
    if b.shape[0] != operator.shape[0]:
        raise ValueError(f"right-hand side has {b.shape[0]} rows, the operator {operator.shape[0]}")
    from .operators import StoredOperator

    if isinstance(operator, StoredOperator):
        x, method, iterations = _solve_lu(operator.matrix, b), "lu", 0
        residual = relative_residual(operator, x, b)  # one matrix product: cheap beside the LU
    else:
        x, per_column, residuals = gmres(operator, b, tol=tol, restart=restart, maxiter=maxiter,
                                         preconditioner=preconditioner, callback=callback, x0=x0)
        method, iterations, residual = "gmres", int(per_column.max()), float(residuals.max())
    converged = bool(np.isfinite(residual) and residual <= max(tol, 1e-10) * 10)
    solution = LinearSolution(x, method, converged, iterations, residual)
    if not converged and raise_on_failure:
        err = SolverError(
            f"{method} did not reach the tolerance {tol:g}: relative residual {residual:.2e} after {iterations}"
            " iterations; refine needle-shaped panels, check for nearly touching surfaces, or loosen the tolerance"
            " (it sets how exactly the charges satisfy the boundary conditions)"
        )
        err.partial = solution
        raise err
    return solution
