"""SPICE subcircuit of a capacitance matrix (mutual form): one port per conductor plus
the reference node; a capacitor for every pair and one from each conductor to the
reference. Node names are made legal and unique; every renaming is reported.

Every text from a user's files (conductor names, the input's file name) reaches the
netlist only as a legal node name or through :func:`tricharge.names.spice_comment`, so
no name can end a comment line and add cards of its own.
"""

from __future__ import annotations

import re
from dataclasses import dataclass

import numpy as np

from ..errors import TrichargeError
from ..names import printable, spice_comment
from ..units import SI_PREFIXES

#: The SI prefixes SPICE reads as scale suffixes for capacitances (case-insensitive in
#: SPICE, where "m" is milli and "meg" mega).
SUFFIXES = ("f", "p", "n", "u", "m")

#: Without a tolerance from the solve, negative capacitances smaller than this fraction
#: of the largest one count as numerical noise (become 0 with a note); larger ones are
#: refused (common practice, no source).
NEGATIVE_TOLERANCE = 1e-6


def spice_value(farads: float, digits: int = 9) -> str:
    """Engineering notation with a SPICE suffix: 2.3e-14 -> '23f'.

    >>> spice_value(2.3e-14), spice_value(1.5e-9), spice_value(4e-19)
    ('23f', '1.5n', '4e-19')
    """
    magnitude = abs(farads)
    for suffix in reversed(SUFFIXES):
        scale = SI_PREFIXES[suffix]
        if magnitude >= scale * (1 - 1e-9):
            return f"{farads / scale:.{digits}g}{suffix}"
    return f"{farads:.{digits}g}"


def legal_names(names) -> tuple[list[str], list[str]]:
    """SPICE node names for conductor names: letters, digits and underscores, starting
    with a letter, unique (case-insensitively), never '0' or 'gnd'. Returns the names and
    notes for every renaming."""
    out, notes, taken = [], [], set()
    for name in names:
        node = re.sub(r"[^A-Za-z0-9_]", "_", name)
        if not node or not node[0].isalpha():
            node = "n" + node
        if node.lower() in ("gnd", "ref"):
            node = node + "_net"
        base, k = node, 2
        while node.lower() in taken:
            node, k = f"{base}_{k}", k + 1
        taken.add(node.lower())
        out.append(node)
        if node != name:
            notes.append(f"conductor '{printable(name)}' is node {node}")
    return out, notes


def subcircuit_name(text: str) -> str:
    """A legal ``.subckt`` name from a file stem: letters, digits, underscores.

    >>> subcircuit_name("my part (v2)"), subcircuit_name("2nd")
    ('my_part__v2_', 'x2nd')
    """
    name = re.sub(r"[^A-Za-z0-9_]", "_", str(text))
    return name if name[:1].isalpha() else "x" + name


@dataclass(frozen=True)
class Subcircuit:
    """The netlist ``text``; notes on renamed nodes (``renamed``) and on capacitors of the
    wrong sign set to zero within the solve's accuracy (``zeroed``); the count and total
    (farads) of couplings left out by ``drop_below``."""

    text: str
    renamed: tuple[str, ...]
    dropped: int
    dropped_total: float
    zeroed: tuple[str, ...] = ()


def _capacitor_name(names, a: int, b: int, reference: str) -> str:
    """'between a and b', or 'between a and ref (infinity)' for a capacitor to the reference."""
    other = f"ref ({reference})" if a == b else names[b]
    return printable(f"between {names[a]} and {other}")


def _signs(m: np.ndarray, names, tolerance, reference: str) -> tuple[str, ...]:
    """Set to zero the capacitors of the wrong sign that lie within ``tolerance``
    (in place) and refuse any beyond it; returns notes on the ones set to zero."""
    if tolerance is None:
        tolerance = np.full(m.shape, NEGATIVE_TOLERANCE * (np.abs(m).max() if m.size else 1.0))
    tolerance = np.asarray(tolerance, dtype=float)
    beyond = m < -tolerance
    if beyond.any():
        a, b = np.unravel_index(np.argmin(np.where(beyond, m / np.maximum(tolerance, 1e-300), 0.0)), m.shape)
        raise TrichargeError(
            f"the matrix has a negative capacitance of {m[a, b]:.3g} F {_capacitor_name(names, a, b, reference)}, "
            f"beyond the solve's accuracy of ±{tolerance[a, b]:.2g} F; a SPICE netlist would accept it silently. "
            "Check the geometry there (parts too close for their panels), refine the mesh, or estimate the error "
            "with --levels 3")
    zeroed = [f"the capacitor {_capacitor_name(names, a, b, reference)} ({m[a, b]:.3g} F) is zero within the "
              f"solve's accuracy (±{tolerance[a, b]:.2g} F): left out" for a, b in zip(*np.nonzero(np.triu(m < 0)))]
    m[m < 0] = 0.0
    return tuple(zeroed)


def subcircuit(mutual: np.ndarray, names, *, name: str = "tricharge", reference: str = "infinity",
               drop_below: float = 0.0, header: tuple[str, ...] = (), tolerance=None) -> Subcircuit:
    """The ``.subckt`` text for a mutual-form matrix (K, K) in farads.

    Parameters
    ----------
    mutual : couplings off the diagonal, capacitance to the reference on it
    names : K conductor names (ports, in this order, then the reference port ``ref``)
    name : the subcircuit's name (made legal with :func:`subcircuit_name`)
    reference : what the ``ref`` port stands for (a comment)
    drop_below : leave out couplings smaller than this fraction of their row's total
        capacitance; the count and total left out are reported
    header : comment lines (provenance)
    tolerance : (K, K) farads, how far each capacitor may be off (the result's
        ``mutual_tolerance``): negative values within it are zero with a note, beyond it
        the matrix is refused. Without it, :data:`NEGATIVE_TOLERANCE` of the largest value.
    """
    m = np.array(mutual, dtype=float)
    k = len(names)
    name = subcircuit_name(name)
    zeroed = _signs(m, names, tolerance, reference)
    nodes, renamed = legal_names(names)
    row_total = m.sum(axis=1)  # self + couplings = Maxwell diagonal
    lines = [f"* {spice_comment(h)}" for h in header]
    lines.append(f"* ports: {' '.join(nodes)} ref   (ref = {spice_comment(reference)})")
    body, dropped, dropped_total, count = [], 0, 0.0, 0
    for a in range(k):
        for b in range(a + 1, k):
            if m[a, b] == 0:
                continue
            if m[a, b] < drop_below * min(row_total[a], row_total[b]):
                dropped, dropped_total = dropped + 1, dropped_total + m[a, b]
                continue
            count += 1
            body.append(f"C{count} {nodes[a]} {nodes[b]} {spice_value(m[a, b])}")
    for a in range(k):
        if m[a, a] > 0:
            count += 1
            body.append(f"C{count} {nodes[a]} ref {spice_value(m[a, a])}")
    if dropped:
        lines.append(f"* {dropped} coupling{'s' if dropped != 1 else ''} below {drop_below:g} of their row total left out: "
                     f"{spice_value(dropped_total)}F in all")
    lines += [f"* {spice_comment(r)}" for r in renamed + list(zeroed)]
    lines.append(f".subckt {name} {' '.join(nodes)} ref")
    lines += body
    lines.append(f".ends {name}")
    return Subcircuit("\n".join(lines) + "\n", tuple(renamed), dropped, dropped_total, zeroed)
