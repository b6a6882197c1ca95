"""Shared helpers for the tests (importable as ``helpers``: tests/ is on pytest's pythonpath)."""

import numpy as np
from tricharge.bem.capacitance import capacitance_matrix
from tricharge.bem.panels import make_panels


def solve_shape(vertices, triangles, labels=None, names=None, method="dense", **kwargs):
    """Capacitance result for arrays in metres (labels default to one conductor).

    Reference tests use the dense path unless they say otherwise, so the size of a
    test mesh never changes which solver is being checked.
    """
    panels = make_panels(vertices, triangles)
    labels = np.zeros(len(panels), np.int64) if labels is None else labels
    names = names or [f"c{k + 1}" for k in range(int(labels.max()) + 1)]
    return capacitance_matrix(panels, labels, names, method=method, **kwargs)


def observed_order(sizes, errors):
    """Least-squares slope of log|error| against log(panel size)."""
    return float(np.polyfit(np.log(sizes), np.log(np.abs(errors)), 1)[0])
