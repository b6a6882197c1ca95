"""The solve driver: the charge for unit voltages (the capacitance matrix) or for applied
voltages, on any :class:`~tricharge.bem.problem.Problem`.

Unknowns are scaled charge densities ``sigma / (4 pi eps0)`` (volts per metre), so the
geometric operators of :mod:`.operators` and :mod:`.system` stay well scaled; the factor
is applied here, once, on the way in and out.
"""

from __future__ import annotations

import time

import numpy as np

from ..errors import SolverError
from .factory import make_operator, make_preconditioner
from .fields import free_charge_density
from .panels import Panels
from .problem import Problem
from .results import FOUR_PI_EPS0, SOLVER_ACCURACY, Excitation, Result, check_matrix, maxwell_from_charges
from .solvers import solve_linear


def capacitance_matrix(panels: Panels, labels, names, *, eps_r: float = 1.0, method: str = "auto",
                       tol: float = 1e-6, progress=None) -> Result:
    """Maxwell capacitance matrix of conductors in a homogeneous medium.

    Parameters
    ----------
    panels : all conductor panels (N)
    labels : (N,) int, conductor index 0..K-1 of each panel
    names : K conductor names
    eps_r : relative permittivity of the surrounding medium
    method, tol, progress : see :func:`solve_capacitance`

    Returns
    -------
    Result with the capacitance in farads.
    """
    labels = np.asarray(labels, dtype=np.int64)
    k = len(names)
    if labels.shape != (len(panels),) or labels.min() < 0 or labels.max() >= k:
        raise ValueError(f"labels must be ({len(panels)},) integers in 0..{k - 1}")
    problem = Problem(panels, labels, np.full(len(panels), float(eps_r)), np.zeros(len(panels)),
                      np.zeros(k, bool), None, tuple(names))
    return solve_capacitance(problem, method=method, tol=tol, progress=progress)

def solve_capacitance(problem: Problem, *, method: str = "auto", tol: float = 1e-6, progress=None,
                      start=None) -> Result:
    """Maxwell capacitance matrix among the non-floating conductors of a problem.

    Parameters
    ----------
    problem : panels and what each one is (see :class:`~tricharge.bem.system.Problem`)
    method : "dense" (stored matrix, LU), "fast" (matrix-free, GMRES) or "auto" (the one
        estimated cheaper, :mod:`.cost`)
    tol : relative residual asked of the iterative solve (fast path)
    progress : optional ``progress(stage, done, total)``; stages "near field",
        "preconditioner" and "iterations" (done = iteration, total = the cap)
    start : (N, K') C/m^2, a guess of ``sigma`` for the iterative solve (a coarser mesh's
        solution carried over in a refinement study), or None

    Returns
    -------
    Result with the capacitance in farads (floating conductors at zero net charge).
    """
    panels = problem.panels
    report = progress or (lambda stage, done, total: None)
    driven = np.flatnonzero(~problem.floating)
    if not len(driven):
        raise SolverError("every conductor is floating: at least one needs a potential to define a capacitance")
    t0 = time.perf_counter()
    operator, preconditioner = _prepare(problem, method, tol, report, columns=len(driven))
    t1 = time.perf_counter()
    n = len(panels)
    rhs = np.zeros((operator.shape[0], len(driven)))
    rhs[:n] = problem.panel_conductor[:, None] == driven[None, :]  # 1 V on one conductor per column
    x0 = None
    if start is not None:  # floating potentials (rows after n) start at zero
        x0 = np.zeros_like(rhs)
        x0[:n] = np.asarray(start, dtype=np.float64) / FOUR_PI_EPS0
    solution = _solve(operator, rhs, tol, preconditioner, report, x0=x0)
    t2 = time.perf_counter()
    sigma = solution.x[:n] * FOUR_PI_EPS0
    labels = np.full(n, -1, dtype=np.int64)
    labels[np.isin(problem.panel_conductor, driven)] = np.searchsorted(driven, problem.panel_conductor[np.isin(problem.panel_conductor,
                                                                                                    driven)])
    free = free_charge_density(problem, sigma)
    raw = maxwell_from_charges(free, panels.areas, labels, len(driven))
    names = tuple(problem.names[k] for k in driven)
    accuracy = SOLVER_ACCURACY[operator.method]
    return Result(
        conductors=names, capacitance=0.5 * (raw + raw.T), sigma=sigma, panel_conductor=labels,
        panel_areas=panels.areas, n_panels=n, solve_time=t2 - t0,
        checks=check_matrix(raw, list(names), accuracy=accuracy), accuracy=accuracy,
        method=operator.method, method_reason=operator.choice.reason, converged=solution.converged,
        iterations=solution.iterations,
        residual=solution.residual, timings={"assembly": t1 - t0, "solve": t2 - t1},
        reference="ground plane" if problem.ground_z is not None else "infinity",
        floating=tuple(problem.names[k] for k in problem.floating_index),
    )

def _prepare(problem: Problem, method: str, tol: float, report, columns: int = 1):
    """The operator for ``problem`` and, on the fast path, its preconditioner (see :mod:`.factory`)."""
    operator = make_operator(problem, method, tol=tol, progress=lambda done, total: report("near field", done, total),
                             columns=columns)
    preconditioner = None
    if operator.method == "fast":
        report("preconditioner", 0, 1)
        preconditioner = make_preconditioner(operator)
        report("preconditioner", 1, 1)
    return operator, preconditioner

def _solve(operator, rhs, tol, preconditioner, report, maxiter: int = 20, x0=None):
    return solve_linear(operator, rhs, tol=tol, preconditioner=preconditioner, restart=50, maxiter=maxiter,
                        callback=lambda it, res: report("iterations", it, 50 * maxiter), x0=x0)

def solve_voltages(problem: Problem, voltages, net_charge=None, *, method: str = "auto", tol: float = 1e-8,
                   progress=None) -> Excitation:
    """Surface charge for applied voltages.

    Parameters
    ----------
    problem : see :class:`~tricharge.bem.system.Problem`
    voltages : (K,) volts per conductor (ignored for floating conductors)
    net_charge : (K,) coulombs per floating conductor (default 0; ignored for others)
    """
    voltages = np.asarray(voltages, dtype=np.float64)
    charge = np.zeros(problem.n_conductors) if net_charge is None else np.asarray(net_charge, dtype=np.float64)
    report = progress or (lambda stage, done, total: None)
    operator, preconditioner = _prepare(problem, method, tol, report)
    n = len(problem.panels)
    rhs = np.zeros((operator.shape[0], 1))
    driven = problem.is_conductor_panel & ~problem.floating[np.maximum(problem.panel_conductor, 0)]
    rhs[:n][driven, 0] = voltages[problem.panel_conductor[driven]]
    rhs[n:, 0] = charge[problem.floating_index] / FOUR_PI_EPS0
    solution = _solve(operator, rhs, tol, preconditioner, report)
    sigma = solution.x[:n, 0] * FOUR_PI_EPS0
    potentials = voltages.copy()
    potentials[problem.floating_index] = solution.x[n:, 0]
    free = np.zeros(problem.n_conductors)
    on = problem.is_conductor_panel
    np.add.at(free, problem.panel_conductor[on], free_charge_density(problem, sigma)[on] * problem.panels.areas[on])
    return Excitation(sigma, potentials, free, operator.method, solution.converged, solution.iterations,
                      solution.residual)
