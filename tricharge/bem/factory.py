"""Which operator and preconditioner a problem gets, and what memory that needs.

The one rule: ``auto`` stores the matrix and factorises it (``dense``) where that is
estimated to be faster for the problem at hand, else applies it matrix-free (``fast``:
far field summed directly or by multipoles, sparse near corrections, preconditioned
GMRES); never stored when the matrix would not fit in memory. The estimates
(:mod:`.cost`) count the near pairs the fast path would correct, so a strongly graded
mesh (the package demo: 2,300 near pairs per conductor panel) and a uniform one of the
same size are told apart; the reason is shown in the head line. Measured on 2 cores
(bench/auto.py): a 3,920-panel sphere 1.3 s stored, 0.4 s matrix-free; the package demo
(7,876 panels, dielectrics, plane, a floating part) 10.5 s stored, 5.4 s matrix-free.
"""

from __future__ import annotations

from ..errors import OptionError
from .cost import Choice, choose
from .operators import DenseSingleLayer, FastSingleLayer
from .coarse import TwoLevel
from .preconditioners import GeneralLocalInverse, LocalInverse
from .problem import Problem
from .system import FastSystem, StoredSystem

METHODS = ("auto", "dense", "fast")


def check_method(method: str) -> None:
    """Raise OptionError for a method other than auto, dense or fast."""
    if method not in METHODS:
        raise OptionError(f"method must be auto, dense or fast, got {method!r}")


def memory_method(n_panels: int, method: str, *, conductors_only: bool = True) -> str:
    """The method whose memory a solve of ``n_panels`` must have: ``method`` itself, or
    for "auto" the one that needs less (auto never stores a matrix that does not fit)."""
    check_method(method)
    if method != "auto":
        return method
    dense, fast = (memory_estimate(n_panels, m, simple=conductors_only) for m in ("dense", "fast"))
    return "dense" if dense <= fast else "fast"


def choose_method(problem: Problem, method: str = "auto", columns: int = 1) -> Choice:
    """How ``problem`` is solved for ``columns`` right-hand sides: ``method`` itself, or
    for "auto" the cheaper by the estimates of :mod:`.cost`, with the reason."""
    from ..resources import available_memory

    check_method(method)
    if method != "auto":
        return Choice(method)
    n = len(problem.panels)
    available = available_memory()
    dense_bytes = memory_estimate(n, "dense", simple=problem.conductors_only, columns=columns)
    return choose(problem, columns, dense_fits=available is None or dense_bytes <= available)


def make_operator(problem: Problem, method: str = "auto", *, tol: float = 1e-6, progress=None, columns: int = 1):
    """The operator of ``problem`` for ``method``: :class:`~.operators.DenseSingleLayer`,
    :class:`~.operators.FastSingleLayer`, :class:`~.system.StoredSystem` or
    :class:`~.system.FastSystem`, with the :class:`~.cost.Choice` that picked it as
    ``choice``. ``progress(done, total)`` follows a fast near-field build."""
    choice = choose_method(problem, method, columns)
    if problem.conductors_only:
        operator = DenseSingleLayer(problem.panels) if choice.method == "dense" else FastSingleLayer(
            problem.panels, tol=tol, progress=progress)
    elif choice.method == "dense":
        operator = StoredSystem(problem)
    else:
        if progress is not None:
            progress(0, 1)
        operator = FastSystem(problem, tol=tol)
    operator.choice = choice
    return operator


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
