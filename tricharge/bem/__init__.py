"""Numerics of the boundary-element method: panels, integrals, operators, solvers.

This subpackage depends on numpy and scipy only. It never opens files, prints, or
imports plotting or mesh-file libraries; it takes arrays and returns arrays and
dataclasses.
"""
