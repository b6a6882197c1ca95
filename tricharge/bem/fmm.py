"""Laplace fast multipole sums through ``fmm3dpy`` (Greengard & Rokhlin's method).

Only this module imports fmm3dpy. Sums here use the kernel ``1/|x - y|`` (fmm3dpy's
is ``1/(4 pi |x - y|)``), charges in any unit, and skip a source that coincides with
the evaluation point (fmm3dpy drops the self term when evaluating at sources).

Up to a measured size the sum is done directly by compiled kernels
(:func:`tricharge.bem.sums.potential_sums` and ``gradient_sums``): exact, and cheaper
there than the multipole library's setup and passes.
"""

from __future__ import annotations

import numpy as np

from ..errors import MissingDependency

#: Up to this many source-target interactions the compiled direct sum is faster than the
#: multipole library on this machine (2 cores, idle): measured by bench/farsum.py on random
#: points summed onto themselves, the crossover lies at about 40,000 points with one
#: density (1.6e9 interactions; direct 13x faster at 5,000 points, 3x at 16,000, 1.5x at
#: 30,000, 0.7x at 60,000) and near 60,000 with five densities, with or without
#: gradients; the direct sum is also exact. On graded meshes the library is slower than
#: on random points, so the general system times both above this size (:mod:`.system`).
DIRECT_LIMIT = 1.6e9

#: The same for dipole sums, done directly in numpy blocks (their temporary memory grows
#: with the source count, so they stay small).
DIPOLE_DIRECT_LIMIT = 4e6


#: Seconds per point of one multipole pass at its best (random points, as bench/farsum.py
#: measures): a part per point and a part per point and density (60,000 points: 2.1 s
#: with one density, 7.5 s with five). Graded meshes take longer, never less.
MULTIPOLE_SECONDS_PER_POINT = (1.5e-5, 2.2e-5)


def multipole_seconds_at_least(n_points: int, columns: int) -> float:
    """A lower bound of the seconds one multipole pass over ``n_points`` points with
    ``columns`` densities takes here: a direct sum predicted faster than this needs no trial."""
    return n_points * (MULTIPOLE_SECONDS_PER_POINT[0] + MULTIPOLE_SECONDS_PER_POINT[1] * max(int(columns), 1))


def direct_is_cheaper(n_sources: int, n_targets: int) -> bool:
    """Whether sums of ``n_sources`` charges at ``n_targets`` points go direct (below
    :data:`DIRECT_LIMIT`). Both ways skip a source that coincides with a target (the
    library's direct part skips distances below a tiny threshold: measured, the panel
    centroids given as targets give the same values as evaluating at the sources)."""
    return n_sources * n_targets <= DIRECT_LIMIT


def _fmm3dpy():
    try:
        import fmm3dpy
    except ImportError:  # pragma: no cover - fmm3dpy is a declared dependency
        raise MissingDependency("the fast solver needs fmm3dpy: pip install fmm3dpy") from None
    return fmm3dpy


def fmm_precision(tol: float) -> float:
    """FMM precision for a solver tolerance ``tol``.

    fmm3dpy's achieved accuracy is far better than its requested precision (``eps`` in its
    own API; about 1e-8 achieved at 1e-4, measured, docs/measured.md), and 1e-4 is also its
    fastest setting here, so the precision is 100 tol, capped to [1e-9, 1e-4].
    """
    return float(np.clip(100.0 * tol, 1e-9, 1e-4))


def _as_columns(charges: np.ndarray) -> tuple[np.ndarray, bool]:
    charges = np.asarray(charges, dtype=np.float64)
    return (charges[:, None], True) if charges.ndim == 1 else (charges, False)


def potentials(sources, charges, targets=None, *, precision: float = 1e-4, gradient: bool = False):
    """``phi(x) = sum_j q_j / |x - y_j|`` (and optionally its gradient) at targets.

    Parameters
    ----------
    sources : (N, 3) positions y_j
    charges : (N,) or (N, K) charges, K independent densities summed in one pass
    targets : (M, 3) evaluation points; None evaluates at the sources (self term skipped)
    precision : requested relative precision of the multipole sums
    gradient : also return the gradient with respect to the evaluation point

    Returns
    -------
    phi : (M,) or (M, K); with ``gradient`` also grad : (M, 3) or (M, K, 3)
    """
    sources = np.asarray(sources, dtype=np.float64)
    q, squeeze = _as_columns(charges)
    at_sources = targets is None
    points = sources if at_sources else np.asarray(targets, dtype=np.float64)
    if direct_is_cheaper(len(sources), len(points)):
        phi, grad = direct_sums(sources, q, points, gradient)
    else:
        phi, grad = multipole_sums(sources, q, None if at_sources else points, precision, gradient)
    if squeeze:
        phi, grad = phi[:, 0], (grad[:, 0] if grad is not None else None)
    return (phi, grad) if gradient else phi


def direct_sums(sources, q, points, gradient):
    """Potential (M, K) and gradient (M, K, 3) of charges ``q`` (N, K) at ``points`` by
    direct summation (compiled, over all cores; coincident points skipped); ``gradient``
    False gives None."""
    from .sums import gradient_sums, potential_sums

    sx, sy, sz = (np.ascontiguousarray(np.asarray(sources, dtype=np.float64)[:, d]) for d in range(3))
    qT = np.ascontiguousarray(np.asarray(q, dtype=np.float64).T)
    points = np.ascontiguousarray(points, dtype=np.float64)
    if gradient:
        return gradient_sums(sx, sy, sz, qT, points)
    return potential_sums(sx, sy, sz, qT, points), None


def multipole_sums(sources, q, targets, precision, gradient):
    """The sums of :func:`direct_sums` by fmm3dpy; ``targets`` None evaluates at the sources."""
    fmm3dpy = _fmm3dpy()
    k = q.shape[1]
    flag = 2 if gradient else 1
    kwargs = dict(eps=precision, sources=np.ascontiguousarray(sources.T), nd=k,
                  charges=np.ascontiguousarray(q.T) if k > 1 else np.ascontiguousarray(q[:, 0]))
    if targets is None:
        out = fmm3dpy.lfmm3d(pg=flag, **kwargs)
        pot, grd = out.pot, (out.grad if gradient else None)
    else:
        out = fmm3dpy.lfmm3d(targets=np.ascontiguousarray(targets.T), pgt=flag, **kwargs)
        pot, grd = out.pottarg, (out.gradtarg if gradient else None)
    scale = 4.0 * np.pi
    phi = scale * np.asarray(pot).reshape(k, -1).T
    grad = None
    if gradient:
        grad = scale * np.moveaxis(np.asarray(grd).reshape(k, 3, -1), 2, 0)
    return phi, grad


def dipole_sums(points, dipoles, targets=None, *, precision: float = 1e-6) -> np.ndarray:
    """``S(x) = sum_i d_i . (y_i - x) / |y_i - x|^3`` of dipoles ``d_i`` at ``points`` y_i
    (N, 3), evaluated at ``targets`` (M, 3), or at the points themselves (skipping each
    point's own dipole) when None. ``dipoles`` is (N, 3), or (N, K, 3) for K independent
    sets summed in one pass. With ``d = A n`` this is the solid angle a small patch subtends
    (the flux through it of a unit charge at x); used for Gauss self terms and winding
    numbers. Direct when small, multipole otherwise. Returns (M,) or (M, K)."""
    points = np.asarray(points, dtype=np.float64)
    d = np.asarray(dipoles, dtype=np.float64)
    single = d.ndim == 2
    d = d[:, None, :] if single else d
    at_points = targets is None
    targets = points if at_points else np.asarray(targets, dtype=np.float64)
    if len(points) * len(targets) <= DIPOLE_DIRECT_LIMIT:
        out = np.zeros((len(targets), d.shape[1]))
        for s in range(0, len(targets), 1024):
            diff = points[None, :, :] - targets[s : s + 1024, None, :]  # [m, i] = y_i - x_m
            r = np.linalg.norm(diff, axis=2)
            with np.errstate(divide="ignore", invalid="ignore"):
                weight = np.where(r > 0, 1.0 / r**3, 0.0)
            out[s : s + 1024] = np.einsum("mid,ikd,mi->mk", diff, d, weight)
    else:
        kwargs = dict(eps=precision, sources=np.ascontiguousarray(points.T), nd=d.shape[1],
                      dipvec=np.ascontiguousarray(np.moveaxis(d, 0, 2) if d.shape[1] > 1 else d[:, 0, :].T))
        if at_points:
            pot = _fmm3dpy().lfmm3d(pg=1, **kwargs).pot
        else:
            pot = _fmm3dpy().lfmm3d(targets=np.ascontiguousarray(targets.T), pgt=1, **kwargs).pottarg
        out = -4.0 * np.pi * np.asarray(pot).reshape(d.shape[1], -1).T  # fmm3dpy: d . (x - y) / (4 pi r^3)
    return out[:, 0] if single else out
