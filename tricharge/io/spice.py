"""SPICE subcircuit of a capacitance matrix (mutual form): one port per conductor plus
the reference node; a capacitor for every pair and one from each conductor to the
reference. Node names are made legal and unique; every renaming is reported."""

from __future__ import annotations

import re
from dataclasses import dataclass

import numpy as np

from ..errors import TrichargeError

#: SPICE scale suffixes (case-insensitive in SPICE; "meg" is mega, "m" is milli).
_SUFFIXES = [(1e-15, "f"), (1e-12, "p"), (1e-9, "n"), (1e-6, "u"), (1e-3, "m")]

#: Mutual capacitances more negative than this fraction of the row's self capacitance are
#: refused; smaller negative values are numerical noise and become 0 (with a note).
NEGATIVE_TOLERANCE = 1e-6


def spice_value(farads: float, digits: int = 9) -> str:
    """Engineering notation with a SPICE suffix: 2.3e-14 -> '23f'.

    >>> spice_value(2.3e-14), spice_value(1.5e-9), spice_value(4e-19)
    ('23f', '1.5n', '4e-19')
    """
    magnitude = abs(farads)
    for scale, suffix in reversed(_SUFFIXES):
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
            notes.append(f"conductor '{name}' is node {node}")
    return out, notes


@dataclass(frozen=True)
class Subcircuit:
    text: str
    renamed: tuple[str, ...]
    dropped: int
    dropped_total: float


def subcircuit(mutual: np.ndarray, names, *, name: str = "tricharge", reference: str = "infinity",
               drop_below: float = 0.0, header: tuple[str, ...] = ()) -> Subcircuit:
    """The ``.subckt`` text for a mutual-form matrix (K, K) in farads.

    Parameters
    ----------
    mutual : couplings off the diagonal, capacitance to the reference on it
    names : K conductor names (ports, in this order, then the reference port ``ref``)
    reference : what the ``ref`` port stands for (a comment)
    drop_below : leave out couplings smaller than this fraction of their row's total
        capacitance; the count and total left out are reported
    header : comment lines (provenance)
    """
    m = np.array(mutual, dtype=float)
    k = len(names)
    scale = np.abs(np.diag(m)).max() if k else 1.0
    if np.any(m < -NEGATIVE_TOLERANCE * scale):
        worst = np.unravel_index(np.argmin(m), m.shape)
        raise TrichargeError(
            f"the matrix has a negative capacitance ({m[worst]:.3g} F between {names[worst[0]]} and "
            f"{names[worst[1]]}); a SPICE netlist would accept it silently. Refine the mesh there")
    m[m < 0] = 0.0
    nodes, renamed = legal_names(names)
    row_total = m.sum(axis=1)  # self + couplings = Maxwell diagonal
    lines = [f"* {h}" for h in header]
    lines.append(f"* ports: {' '.join(nodes)} ref   (ref = {reference})")
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
    lines += [f"* {r}" for r in renamed]
    lines.append(f".subckt {name} {' '.join(nodes)} ref")
    lines += body
    lines.append(f".ends {name}")
    return Subcircuit("\n".join(lines) + "\n", tuple(renamed), dropped, dropped_total)
