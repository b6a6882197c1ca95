"""What a solve costs each way, estimated for the problem at hand: the rule of ``auto``.

A stored (dense) solve costs the assembly of N^2 entries and an LU factorisation of
2/3 N^3 flops; a matrix-free (fast) solve costs its set-up, which grows with the number
of near pairs it corrects (the near field reaches 6 or 8 panel sizes of each source
panel, so a strongly graded mesh, with large panels near small ones, has many more
pairs per panel than a uniform one), and GMRES iterations, each about one far-field sum
over the panels (and their images). The near pairs are counted on a sample of the
panels; the rates are measured on the development machine (2 cores, idle) by
``bench/auto.py``, which prints the estimates beside the measured times. The stored
solve is also taken when it is affordable (AFFORDABLE_SECONDS), for its accuracy; where
the machine has too little memory for the stored matrix, ``auto`` is matrix-free
whatever the estimate.

The estimates are rough (within about a factor of two, bench/auto.py); they only need
to tell the two ways apart where one is clearly cheaper, and near the cross-over either
choice costs about the same.
"""

from __future__ import annotations

from dataclasses import dataclass, field

#: Seconds per stored matrix entry assembled (near entries integrated accurately), by
#: kind of problem (conductors alone: the single layer; else the general system).
ASSEMBLY_SECONDS = {True: 6.0e-8, False: 1.2e-7}
#: Flops per second of the LU factorisation (LAPACK through scipy, both cores).
LU_FLOPS = 1.1e11
#: Set-up seconds of the matrix-free operator and its preconditioner: per panel (local
#: inverses, the coarse level) and per near pair (the corrections), by kind of problem.
SETUP_SECONDS_PER_PANEL = {True: 3.0e-5, False: 1.5e-4}
SETUP_SECONDS_PER_PAIR = {True: 2.1e-7, False: 6.0e-8}
#: Seconds per far-field interaction (source, target) in one GMRES iteration: a part
#: for the distance and a part per right-hand side (the compiled direct sum and the rest
#: of the iteration).
ITERATION_SECONDS = (6.7e-10, 3.3e-10)
#: GMRES iterations to expect (measured: 7-12 on the checks and demos at tol 1e-6).
ITERATIONS = 10
#: A stored solve estimated to take no longer than this is chosen even when the
#: matrix-free one would be quicker: its entries are more accurate (about 1e-6 against
#: 1e-4, see results.SOLVER_ACCURACY), which a refinement study's extrapolation needs
#: (our choice; a second costs a user nothing).
AFFORDABLE_SECONDS = 2.0
#: Every SAMPLE-th panel's near pairs are counted.
SAMPLE = 16


@dataclass(frozen=True)
class Choice:
    """How a problem is solved and why: ``method`` "dense" or "fast"; ``reason`` one
    line for the head line; ``seconds`` the two estimates (empty when not chosen by cost)."""

    method: str
    reason: str = ""
    seconds: dict = field(default_factory=dict)


def near_pairs_estimate(problem, within: float) -> float:
    """The number of target/panel pairs closer than ``within`` panel sizes (of the
    source panel), counted for every SAMPLE-th panel as target and scaled up."""
    from .nearfield import pairs_in_grid

    panels = problem.panels
    targets = panels.centroids[::SAMPLE]
    i, _, _ = pairs_in_grid(targets, panels.centroids, within * panels.sizes)
    images = 0
    if problem.images is not None:
        images = len(pairs_in_grid(targets, problem.images.centroids, within * problem.images.sizes)[0])
    return (len(i) + images) * len(panels) / max(len(targets), 1)


def estimate_seconds(problem, columns: int) -> dict:
    """{"dense": s, "fast": s}: the estimated seconds of each way for ``columns``
    right-hand sides (see the module docstring)."""
    from .nearfield import FAST_POLICY, GENERAL_FAST_POLICY

    simple = bool(problem.conductors_only)
    n = len(problem.panels)
    dense = ASSEMBLY_SECONDS[simple] * n * n + (2.0 / 3.0) * n ** 3 / LU_FLOPS
    policy = FAST_POLICY if simple else GENERAL_FAST_POLICY
    sources = n * (2 if problem.images is not None else 1)
    per_interaction = ITERATION_SECONDS[0] + ITERATION_SECONDS[1] * max(int(columns), 1)
    fast = (SETUP_SECONDS_PER_PANEL[simple] * n
            + SETUP_SECONDS_PER_PAIR[simple] * near_pairs_estimate(problem, policy.corrected_within)
            + ITERATIONS * per_interaction * sources * n)
    return {"dense": float(dense), "fast": float(fast)}


def choose(problem, columns: int, *, dense_fits: bool = True) -> Choice:
    """The cheaper way to solve ``problem`` for ``columns`` right-hand sides, with the
    reason in words; matrix-free when the stored matrix would not fit in memory."""
    if not dense_fits:  # nothing to estimate (and large models skip the pair count)
        return Choice("fast", "auto: the stored matrix would not fit in memory")
    seconds = estimate_seconds(problem, columns)
    shown = f"estimated {_seconds(seconds['dense'])} stored against {_seconds(seconds['fast'])} matrix-free"
    if seconds["dense"] <= seconds["fast"]:
        return Choice("dense", f"auto: {shown}", seconds)
    if seconds["dense"] <= AFFORDABLE_SECONDS:
        return Choice("dense", f"auto: {shown}; stored is the more accurate, and under "
                               f"{AFFORDABLE_SECONDS:g} s", seconds)
    return Choice("fast", f"auto: {shown}", seconds)


def _seconds(value: float) -> str:
    return f"{value:.2g} s" if value < 100 else f"{value:,.0f} s"
