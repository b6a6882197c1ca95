"""What a solve returns: capacitance results, their checks, the mutual (SPICE) form,
the reductions of a Maxwell matrix, and the physical constants.

Conventions: the Maxwell matrix ``C`` gives conductor charges ``Q = C V`` (farads);
its diagonal is positive, off-diagonal entries are non-positive, and it is symmetric.
The mutual form ``M`` has ``M[l, k] = -C[l, k]`` (the capacitor between l and k) off
the diagonal and ``M[l, l] = sum_k C[l, k]`` (the capacitor from l to the reference).
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from ..errors import OptionError

#: Vacuum permittivity, F/m (CODATA 2018).
EPS0 = 8.8541878128e-12

#: ``4 pi eps0``, F/m: converts geometric operator units to farads.
FOUR_PI_EPS0 = 4.0 * np.pi * EPS0

#: Tolerance of the sign and dominance checks when the solve's accuracy is not given,
#: relative to the largest diagonal entry (common practice, no source).
SIGN_TOLERANCE = 1e-6

#: Relative accuracy of one solve's matrix entries by method, apart from the mesh's own
#: discretisation error (measured): the dense operator keeps capacitances within about
#: 1e-6 of the all-closed-form matrix (tests/test_operators.py); the fast one within 1e-4
#: of the dense one (tests/test_fast.py). A conductor shielded inside another's cavity,
#: whose capacitance to the reference is exactly zero, came out at 3e-7 of its row on the
#: dense path and -6e-5 on the fast path (8,640 panels; tests/test_capacitance.py).
SOLVER_ACCURACY = {"dense": 1e-6, "fast": 1e-4}

@dataclass(frozen=True)
class MatrixChecks:
    """Properties every physical Maxwell capacitance matrix has.

    asymmetry : max |C - C^T| / max diag C (collocation leaves a small asymmetry;
        it is an indicator of discretisation error)
    positive_diagonal, nonpositive_offdiagonal, diagonally_dominant : bool
    problems : human-readable descriptions of failed checks
    within_accuracy : entries of the wrong sign that are zero within the solve's accuracy
        (a shielded conductor's capacitance to the reference, say), described
    """

    asymmetry: float
    positive_diagonal: bool
    nonpositive_offdiagonal: bool
    diagonally_dominant: bool
    problems: tuple[str, ...] = ()
    within_accuracy: tuple[str, ...] = ()

    @property
    def passed(self) -> bool:
        return not self.problems

    def to_dict(self) -> dict:
        return {"asymmetry": self.asymmetry, "positive_diagonal": self.positive_diagonal,
                "nonpositive_offdiagonal": self.nonpositive_offdiagonal,
                "diagonally_dominant": self.diagonally_dominant, "problems": list(self.problems),
                "within_accuracy": list(self.within_accuracy)}

def entry_tolerance(maxwell: np.ndarray, relative: float) -> np.ndarray:
    """(K, K) farads: how far each Maxwell entry may be off for a relative accuracy
    ``relative``, measured against ``sqrt(C_ll C_kk)`` so weak couplings get the
    absolute accuracy of the strong entries they are computed beside."""
    d = np.abs(np.diag(np.asarray(maxwell, dtype=float)))
    return relative * np.sqrt(np.outer(d, d))

def check_matrix(raw: np.ndarray, names: list[str], *, accuracy: float | None = None,
                 tolerance: np.ndarray | None = None) -> MatrixChecks:
    """Check a raw (unsymmetrised) Maxwell matrix (K, K), farads.

    ``tolerance`` (K, K) farads says how far each entry may be off (a refinement
    study's estimate); else ``accuracy`` (the method's relative accuracy, see
    :data:`SOLVER_ACCURACY`) plus the matrix's own asymmetry gives it through
    :func:`entry_tolerance`; with neither, :data:`SIGN_TOLERANCE` of the largest self
    term. A capacitance to the reference (row sum) may be off by its row's tolerances
    added up. Entries of the wrong sign within their tolerance pass, and are listed in
    ``within_accuracy``.
    """
    c = np.asarray(raw, dtype=float)
    scale = float(np.max(np.abs(np.diag(c)))) or 1.0
    asymmetry = float(np.max(np.abs(c - c.T)) / scale)
    sym = 0.5 * (c + c.T)
    if tolerance is None:
        tolerance = (entry_tolerance(sym, accuracy + asymmetry) if accuracy is not None
                     else np.full(c.shape, SIGN_TOLERANCE * scale))
    tolerance = np.asarray(tolerance, dtype=float)
    problems, small = [], []
    diag_bad = [names[k] for k in range(len(c)) if sym[k, k] <= 0]
    if diag_bad:
        problems.append(f"non-positive self capacitance on {', '.join(diag_bad)}")
    upper = np.triu(np.ones(c.shape, dtype=bool), 1)
    pos = [(names[a], names[b]) for a, b in zip(*np.nonzero(upper & (sym > tolerance)))]
    if pos:
        problems.append("positive coupling between " + "; ".join(f"{a} and {b}" for a, b in pos))
    small += [f"{names[a]} - {names[b]}: coupling {-sym[a, b]:.3g} F is zero within the solve's accuracy "
              f"(±{tolerance[a, b]:.2g} F)" for a, b in zip(*np.nonzero(upper & (sym > 0) & (sym <= tolerance)))]
    row_sum, row_tolerance = sym.sum(axis=1), tolerance.sum(axis=1)
    weak = [names[k] for k in np.flatnonzero(row_sum < -row_tolerance)]
    if weak:
        problems.append(f"negative capacitance to the reference (row sum) on {', '.join(weak)}")
    small += [f"{names[k]} - reference: {row_sum[k]:.3g} F is zero within the solve's accuracy "
              f"(±{row_tolerance[k]:.2g} F)" for k in np.flatnonzero((row_sum < 0) & (row_sum >= -row_tolerance))]
    return MatrixChecks(asymmetry, not diag_bad, not pos, not weak, tuple(problems), tuple(small))

def mutual_form(maxwell: np.ndarray) -> np.ndarray:
    """Mutual (SPICE) form of a Maxwell matrix: couplings off the diagonal, to-reference on it."""
    c = np.asarray(maxwell, dtype=float)
    m = -c.copy()
    np.fill_diagonal(m, c.sum(axis=1))
    return m

def mutual_error(error: np.ndarray) -> np.ndarray:
    """Error bound of the mutual form from that of the Maxwell form (both (K, K), farads):
    the same on couplings, the row sum on the to-reference capacitors."""
    e = np.asarray(error, dtype=float)
    m = e.copy()
    np.fill_diagonal(m, e.sum(axis=1))
    return m

def maxwell_from_charges(sigma: np.ndarray, areas: np.ndarray, labels: np.ndarray, n_conductors: int) -> np.ndarray:
    """Raw Maxwell matrix ``C[l, k] = sum over panels j of l of sigma[j, k] * area[j]``.

    Parameters
    ----------
    sigma : (N, K) C/m^2, charge density for unit voltage on conductor k
    areas : (N,) m^2
    labels : (N,) conductor index of each panel, 0..K-1; -1 panels are left out
    """
    charges = sigma * areas[:, None]
    out = np.zeros((n_conductors, sigma.shape[1]))
    keep = labels >= 0
    np.add.at(out, labels[keep], charges[keep])
    return out


#: How refinement-study values and estimates are obtained, in words (reports, JSON; see
#: :mod:`.convergence`).
ESTIMATE_METHOD = ("Richardson extrapolation over the last three levels with the observed order p per entry; "
                   "estimate |extrapolated - finest| / r^p, at least 1e-4 of sqrt(C_ii C_jj) (adaptive: at least "
                   "the change since the previous level); entries not in the asymptotic range keep the finest "
                   "value with 3x its last change")


@dataclass(frozen=True, repr=False)
class Result:
    """Capacitance matrix of a set of conductors (any media, ground plane, floating parts).

    conductors : names, in matrix order
    capacitance : (K, K) farads, Maxwell form, symmetric part of the raw matrix
    sigma : (N, K) C/m^2, total (free plus bound) surface charge density on each panel
        for 1 V on conductor k and 0 V on the others
    panel_conductor : (N,) index into ``conductors`` of each panel; -1 on interface panels
        and floating conductors
    reference : "infinity" or "ground plane": what the to-reference capacitors connect to
    floating : names of floating conductors, eliminated from the matrix
    panel_areas : (N,) m^2
    n_panels : N
    solve_time : seconds, assembly plus solve
    checks : MatrixChecks of the raw matrix
    error_estimate : (K, K) farads, estimate of |capacitance - converged value| from a
        refinement study (:mod:`~tricharge.bem.convergence`), or None without one
    study : the study's levels, orders and status per entry (plain data), or None
    method : operator used ("dense" or "fast")
    method_reason : why "auto" chose it (estimated seconds of each way), or ""
    converged, iterations, residual : from the linear solve
    accuracy : relative accuracy of the method's matrix entries (:data:`SOLVER_ACCURACY`)
    """

    conductors: tuple[str, ...]
    capacitance: np.ndarray
    sigma: np.ndarray
    panel_conductor: np.ndarray
    panel_areas: np.ndarray
    n_panels: int
    solve_time: float
    checks: MatrixChecks
    method: str
    converged: bool
    iterations: int
    residual: float
    timings: dict = field(default_factory=dict)
    reference: str = "infinity"
    floating: tuple[str, ...] = ()
    error_estimate: np.ndarray | None = None
    study: dict | None = None
    accuracy: float = SOLVER_ACCURACY["dense"]
    method_reason: str = ""

    @property
    def tolerance(self) -> np.ndarray:
        """(K, K) farads: how far each Maxwell entry may be off: the study's estimate,
        else the method's accuracy plus the asymmetry the solve left (see
        :func:`check_matrix`)."""
        if self.error_estimate is not None:
            return self.error_estimate
        return entry_tolerance(self.capacitance, self.accuracy + self.checks.asymmetry)

    @property
    def mutual_tolerance(self) -> np.ndarray:
        """(K, K) farads: :attr:`tolerance` for the mutual form (row sums on the diagonal)."""
        return mutual_error(self.tolerance)

    @property
    def mutual(self) -> np.ndarray:
        """(K, K) farads: mutual (SPICE) form, see :func:`mutual_form`."""
        return mutual_form(self.capacitance)

    def reduced(self, *, nets: dict | None = None, grounded=(), reference: str | None = None) -> "Result":
        """The result after tying conductors into ``nets`` (name -> members), holding
        ``grounded`` conductors at 0 V, and naming the ``reference`` ("infinity", "ground
        plane" or a conductor, which is then grounded). Exact algebra on the Maxwell
        matrix; per-panel densities follow (sums for nets, dropped for grounded)."""
        import dataclasses

        names, matrix, error = self.conductors, self.capacitance, self.error_estimate
        tolerance = self.tolerance
        projection = np.eye(len(names))
        if nets:
            if error is not None:  # triangle inequality on the sums
                error = merge_conductors(error, names, nets)[0]
            tolerance = merge_conductors(tolerance, names, nets)[0]
            matrix, new_names = merge_conductors(matrix, names, nets)
            member_of = {m: net for net, members in nets.items() for m in members}
            projection = np.array([[1.0 if member_of.get(n, n) == new else 0.0 for new in new_names] for n in names])
            names = new_names
        grounded = list(grounded)
        label = self.reference
        if reference not in (None, "infinity", "ground plane"):
            grounded.append(reference)
            label = reference
        elif reference is not None:
            if (reference == "ground plane") != (self.reference == "ground plane"):
                raise OptionError(f"reference {reference!r} does not fit this model, whose reference is "
                                 f"{self.reference}")
        if grounded:
            matrix, kept = ground_conductors(matrix, names, grounded)
            keep = [names.index(n) for n in kept]
            if error is not None:
                error = error[np.ix_(keep, keep)]
            tolerance = tolerance[np.ix_(keep, keep)]
            projection, names = projection[:, keep], kept
            if label == self.reference:
                label = "ground (" + ", ".join(grounded) + ")"
        old_index = np.where(self.panel_conductor >= 0, self.panel_conductor, 0)
        owner = projection[old_index]  # (N, K') membership of each panel's conductor
        panel_conductor = np.where((self.panel_conductor >= 0) & owner.any(axis=1), owner.argmax(axis=1), -1)
        study = self.study
        if study is not None:
            study = dict(study, notes=list(study["notes"]) + [
                f"levels, orders and status are those of the conductors before reduction "
                f"({', '.join(self.conductors)}); the estimates of nets add up their members' (a bound)"])
        return dataclasses.replace(self, conductors=tuple(names), capacitance=matrix, sigma=self.sigma @ projection,
                                   panel_conductor=panel_conductor, reference=label, error_estimate=error, study=study,
                                   checks=dataclasses.replace(check_matrix(matrix, list(names), tolerance=tolerance),
                                                              asymmetry=self.checks.asymmetry))

    def __repr__(self) -> str:
        diag = ", ".join(f"{n}={c:.4g} F" for n, c in zip(self.conductors, np.diag(self.capacitance)))
        return f"Result({len(self.conductors)} conductors, {self.n_panels} panels, {self.method}; C_self: {diag})"

    def to_dict(self) -> dict:
        """Plain data for JSON writers (stable keys: conductors, capacitance_matrix, panels)."""
        return {
            "conductors": list(self.conductors),
            "capacitance_matrix": self.capacitance.tolist(),
            "capacitance_unit": "F",
            "mutual_matrix": self.mutual.tolist(),
            "reference": self.reference,
            "floating_conductors": list(self.floating),
            "panels": int(self.n_panels),
            "method": self.method,
            "method_reason": self.method_reason,
            "converged": self.converged,
            "iterations": self.iterations,
            "residual": self.residual,
            "solve_time_s": self.solve_time,
            "timings_s": dict(self.timings),
            "checks": self.checks.to_dict(),
            "solver_accuracy": self.accuracy,
            "error_estimate": None if self.error_estimate is None else self.error_estimate.tolist(),
            "mutual_error_estimate": None if self.error_estimate is None else mutual_error(
                self.error_estimate).tolist(),
            "error_estimate_method": self.estimate_method,
            "refinement_study": self.study,
        }

    @property
    def estimate_method(self) -> str:
        """How ``error_estimate`` was obtained, in words."""
        if self.error_estimate is None:
            return "none: single solve, discretisation error not estimated"
        return f"{self.study['kind']} refinement study; {ESTIMATE_METHOD}"

@dataclass(frozen=True, repr=False)
class Excitation:
    """The charge for given conductor voltages (floating conductors at given net charge).

    sigma : (N,) C/m^2, total surface charge density on every panel
    potentials : (K,) volts of every conductor (computed for floating ones)
    free_charge : (K,) coulombs on every conductor
    method, converged, iterations, residual : from the linear solve
    """

    sigma: np.ndarray
    potentials: np.ndarray
    free_charge: np.ndarray
    method: str
    converged: bool
    iterations: int
    residual: float

    def __repr__(self) -> str:
        return (f"Excitation({len(self.sigma)} panels, potentials {np.round(self.potentials, 6).tolist()} V, "
                f"{self.method})")


# -- reductions of a Maxwell matrix (exact algebra) ------------------------------------

def ground_conductors(maxwell: np.ndarray, names, grounded) -> tuple[np.ndarray, tuple[str, ...]]:
    """Hold ``grounded`` conductors at 0 V: the Maxwell matrix among the others is the
    sub-block (their charges do not depend on the grounded conductors' charges).

    Returns the (K', K') matrix and the remaining names.
    """
    names = tuple(names)
    missing = sorted(set(grounded) - set(names))
    if missing:
        raise OptionError(f"no conductor named {', '.join(missing)}; the conductors are {', '.join(names)}")
    keep = [k for k, n in enumerate(names) if n not in set(grounded)]
    if not keep:
        raise OptionError("every conductor would be grounded; keep at least one")
    return maxwell[np.ix_(keep, keep)], tuple(names[k] for k in keep)

def merge_conductors(maxwell: np.ndarray, names, nets: dict) -> tuple[np.ndarray, tuple[str, ...]]:
    """Tie conductors into nets at one potential: ``C' = P^T C P`` with ``P[i, j] = 1``
    when conductor i belongs to net j. Conductors not named stay as they are.

    ``nets`` maps a new net name to the conductor names it joins.
    """
    names = tuple(names)
    member_of = {}
    for net, members in nets.items():
        for m in members:
            if m not in names:
                raise OptionError(f"net {net}: no conductor named {m}; the conductors are {', '.join(names)}")
            if m in member_of:
                raise OptionError(f"conductor {m} is in both net {member_of[m]} and net {net}")
            member_of[m] = net
        if net in names and net not in members:
            raise OptionError(f"net {net}: a conductor outside the net has this name; give the net another name")
    new_names = []
    for n in names:
        label = member_of.get(n, n)
        if label not in new_names:
            new_names.append(label)
    projection = np.zeros((len(names), len(new_names)))
    for i, n in enumerate(names):
        projection[i, new_names.index(member_of.get(n, n))] = 1.0
    return projection.T @ maxwell @ projection, tuple(new_names)
