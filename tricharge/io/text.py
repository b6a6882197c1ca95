"""Plain-text tables of results for the terminal."""

from __future__ import annotations

import numpy as np

from ..units import format_eng, prefix_for


def matrix_table(names, matrix, unit: str = "F", digits: int = 5) -> str:
    """Square matrix with row and column names, one engineering prefix for all cells.

    >>> print(matrix_table(["a", "b"], [[2e-12, -1e-12], [-1e-12, 3e-12]]))
              a        b
    a    2.0000  -1.0000
    b   -1.0000   3.0000
    (values in pF)
    """
    m = np.asarray(matrix, dtype=float)
    scale, symbol = prefix_for(np.max(np.abs(m)) if m.size else 0.0)
    if np.max(np.abs(m)) / scale >= 1000:  # keep at most three integer digits
        scale *= 1000
    integer_digits = len(str(int(np.max(np.abs(m)) / scale))) if m.size else 1
    decimals = max(0, digits - integer_digits)
    cells = [[f"{x / scale:.{decimals}f}" for x in row] for row in m]
    width = max([len(n) for n in names] + [len(c) for row in cells for c in row]) + 2
    name_width = max(len(n) for n in names) + 1
    lines = [" " * name_width + "".join(n.rjust(width) for n in names)]
    for n, row in zip(names, cells):
        lines.append(n.ljust(name_width) + "".join(c.rjust(width) for c in row))
    lines.append(f"(values in {symbol}{unit})")
    return "\n".join(lines)


def mutual_list(names, mutual, reference: str = "infinity") -> str:
    """One line per capacitor of the mutual (SPICE) form: couplings, then to the reference."""
    m = np.asarray(mutual, dtype=float)
    k = len(names)
    width = max(len(n) for n in names) * 2 + 5
    lines = []
    for a in range(k):
        for b in range(a + 1, k):
            lines.append(f"  {(names[a] + ' - ' + names[b]).ljust(width)} {format_eng(m[a, b], 'F')}")
    for a in range(k):
        lines.append(f"  {(names[a] + ' - ' + reference).ljust(width)} {format_eng(m[a, a], 'F')}")
    return "\n".join(lines)


def checks_text(checks) -> str:
    """The matrix checks, one per line, with ok / CHECK."""
    def mark(ok):
        return "ok" if ok else "CHECK"

    lines = [
        f"  symmetry        asymmetry {checks.asymmetry:.1e} of the largest self capacitance "
        f"({'ok' if checks.asymmetry < 1e-2 else 'large: refine the mesh'})",
        f"  self terms > 0  {mark(checks.positive_diagonal)}",
        f"  couplings <= 0  {mark(checks.nonpositive_offdiagonal)}",
        f"  row sums >= 0   {mark(checks.diagonally_dominant)}",
    ]
    lines += [f"  problem: {p}" for p in checks.problems]
    return "\n".join(lines)


def plural(count: int, noun: str) -> str:
    """'1 conductor', '3 conductors', '5,120 panels'."""
    return f"{count:,} {noun}{'' if count == 1 else 's'}"


def result_report(result, *, source: str, unit: str, version: str) -> str:
    """The full text the ``solve`` command prints."""
    names = list(result.conductors)
    head = (f"tricharge {version}: {source} (unit {unit}), {plural(len(names), 'conductor')}, "
            f"{plural(result.n_panels, 'panel')}, "
            f"{result.method} solve in {result.solve_time:.2f} s")
    return "\n\n".join([
        head,
        "Capacitance matrix, Maxwell form (Q = C V):\n" + matrix_table(names, result.capacitance),
        "Mutual form (the capacitors of a SPICE netlist):\n" + mutual_list(names, result.mutual),
        "Checks:\n" + checks_text(result.checks),
        "Discretisation error is not estimated yet: refine the mesh and compare to judge it.",
    ])
