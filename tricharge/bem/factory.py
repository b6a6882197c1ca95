"""Which operator and preconditioner a problem gets, and what memory that needs.

The one rule: ``auto`` stores the matrix and factorises it (``dense``) while that is
the faster way, else applies it matrix-free (``fast``: multipole far field, sparse near
corrections, preconditioned GMRES). Where the cross-over lies depends on the kind of
problem, measured here on 2 cores:

* conductors alone (the single-layer operator, with the sparse approximate inverse
  preconditioner of :class:`~tricharge.bem.preconditioners.LocalInverse`): the fast path
  is as fast as dense at 2,400 panels and 2-4x faster from 6,000; dense is kept up to
  3,000 because one LU serves every conductor;
* with dielectric interfaces, a ground plane or floating parts (the general system of
  :mod:`.system`): its matrix-free form needs a wider near field and a two-level
  preconditioner whose set-up dominates; on the 7,876-panel package demo it takes 20 s
  (9 iterations; 16.6 s of it set-up) against 8.4 s dense (bench/package.py), so dense
  is kept up to 12,000 panels (where a dense solve needs about 3.4 GiB).
"""

from __future__ import annotations

from ..errors import OptionError
from .operators import DenseSingleLayer, FastSingleLayer
from .coarse import TwoLevel
from .preconditioners import GeneralLocalInverse, LocalInverse
from .problem import Problem
from .system import FastSystem, StoredSystem

#: Panel counts up to which ``auto`` stores the matrix: conductors alone, and the general system.
AUTO_DENSE_LIMIT = 3000
AUTO_DENSE_LIMIT_GENERAL = 12_000

METHODS = ("auto", "dense", "fast")


def resolve_method(n_panels: int, method: str, *, conductors_only: bool = True) -> str:
    """"dense" or "fast" for a problem of ``n_panels`` panels: ``method`` itself, or the
    rule of this module for "auto". Raises OptionError for any other method."""
    if method not in METHODS:
        raise OptionError(f"method must be auto, dense or fast, got {method!r}")
    if method != "auto":
        return method
    limit = AUTO_DENSE_LIMIT if conductors_only else AUTO_DENSE_LIMIT_GENERAL
    return "dense" if n_panels <= limit else "fast"


def make_operator(problem: Problem, method: str = "auto", *, tol: float = 1e-6, progress=None):
    """The operator of ``problem`` for ``method``: :class:`~.operators.DenseSingleLayer`,
    :class:`~.operators.FastSingleLayer`, :class:`~.system.StoredSystem` or
    :class:`~.system.FastSystem`. ``progress(done, total)`` follows a fast near-field build."""
    chosen = resolve_method(len(problem.panels), method, conductors_only=problem.conductors_only)
    if problem.conductors_only:
        return DenseSingleLayer(problem.panels) if chosen == "dense" else FastSingleLayer(
            problem.panels, tol=tol, progress=progress)
    if chosen == "dense":
        return StoredSystem(problem)
    if progress is not None:
        progress(0, 1)
    return FastSystem(problem, tol=tol)


def make_preconditioner(operator):
    """The preconditioner for a matrix-free operator (None for a stored one): for the
    single layer a sparse approximate inverse from local problems; for the general system
    a coarse solve on clusters followed by local inverses that mix conductor and interface
    rows (:mod:`.coarse`; on the package demo 9 GMRES iterations where local inverses
    alone needed 24)."""
    if operator.method != "fast":
        return None
    if isinstance(operator, FastSystem):
        return TwoLevel(operator, GeneralLocalInverse(operator))
    return LocalInverse(operator)


#: Peak bytes per panel of a fast solve, measured with /usr/bin/time (maximum resident
#: set): conductors alone 13 kB at 100k panels and 10 kB at 1M (bench/fast.py); with a
#: plane, dielectrics or floating parts the near field reaches 8 panel sizes instead of 6.
FAST_BYTES_PER_PANEL = {True: 14_000, False: 40_000}

def memory_estimate(n_panels: int, method: str, *, simple: bool = True, columns: int = 1) -> int:
    """Bytes a solve of ``n_panels`` panels needs at its peak, roughly.

    Dense: the stored matrix, the copy LU factorises, and (with dielectrics or a plane)
    the image block assembled beside it: 16 or 24 bytes per matrix entry. Fast: the
    measured :data:`FAST_BYTES_PER_PANEL` plus GMRES's Krylov vectors (50 per column).
    """
    n = int(n_panels)
    if method == "dense":
        return (16 if simple else 24) * n * n + 20_000 * n
    return FAST_BYTES_PER_PANEL[bool(simple)] * n + 8 * 51 * n * max(int(columns), 1)
