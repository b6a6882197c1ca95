"""Everything the terminal shows: tables of results, the inspect summary, the field
report and its cautions, warnings, and progress bars.

Every name that came from a user's file goes through :func:`tricharge.names.printable`
before it is placed in a line, so control characters and escape sequences are shown,
never sent to the terminal.
"""

from __future__ import annotations

import sys

import click
import numpy as np

from .names import printable
from .units import format_eng, prefix_for


def matrix_table(names, matrix, unit: str = "F", digits: int = 5, errors=None) -> str:
    """Square matrix with row and column names, one engineering prefix for all cells;
    with ``errors`` (same shape) every cell reads ``value ± estimate``.

    >>> print(matrix_table(["a", "b"], [[2e-12, -1e-12], [-1e-12, 3e-12]]))
              a        b
    a    2.0000  -1.0000
    b   -1.0000   3.0000
    (values in pF)
    """
    names = [printable(n) for n in names]
    m = np.asarray(matrix, dtype=float)
    scale, symbol = prefix_for(np.max(np.abs(m)) if m.size else 0.0)
    if np.max(np.abs(m)) / scale >= 1000:  # keep at most three integer digits
        scale *= 1000
    integer_digits = len(str(int(np.max(np.abs(m)) / scale))) if m.size else 1
    decimals = max(0, digits - integer_digits)
    cells = [[f"{x / scale:.{decimals}f}" for x in row] for row in m]
    if errors is not None:
        cells = [[f"{c} ± {e / scale:.{decimals}f}" for c, e in zip(row, err)] for row, err in zip(cells, errors)]
    width = max([len(n) for n in names] + [len(c) for row in cells for c in row]) + 2
    name_width = max(len(n) for n in names) + 1
    lines = [" " * name_width + "".join(n.rjust(width) for n in names)]
    for n, row in zip(names, cells):
        lines.append(n.ljust(name_width) + "".join(c.rjust(width) for c in row))
    lines.append(f"(values in {symbol}{unit})")
    return "\n".join(lines)


def mutual_list(names, mutual, reference: str = "infinity", errors=None) -> str:
    """One line per capacitor of the mutual (SPICE) form: couplings, then to the
    reference; with ``errors`` (mutual form of the estimate) each gets ``± estimate``."""
    names, reference = [printable(n) for n in names], printable(reference)
    m = np.asarray(mutual, dtype=float)
    k = len(names)
    width = max(len(n) for n in names) + max(len(n) for n in [*names, reference]) + 3

    def line(a, b, other):
        text = f"  {(names[a] + ' - ' + other).ljust(width)} {format_eng(m[a, b], 'F')}"
        return text if errors is None else f"{text} ± {format_eng(errors[a, b], 'F')}"
    lines = [line(a, b, names[b]) for a in range(k) for b in range(a + 1, k)]
    lines += [line(a, a, reference) for a in range(k)]
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
    lines += [f"  problem: {printable(p)}" for p in checks.problems]
    lines += [f"  note: {printable(p)}" for p in checks.within_accuracy]
    return "\n".join(lines)


def plural(count: int, noun: str) -> str:
    """'1 conductor', '3 conductors', '5,120 panels'."""
    return f"{count:,} {noun}{'' if count == 1 else 's'}"


def result_report(result, *, source: str, unit: str, version: str, meshing_seconds: float | None = None) -> str:
    """The full text the ``solve`` command prints; ``meshing_seconds``: the time taken to
    mesh CAD input, shown in the head line."""
    names = list(result.conductors)
    floating = f"; floating, at zero net charge: {printable(', '.join(result.floating))}" if result.floating else ""
    why = f"; {result.method_reason}" if result.method_reason else ""
    how = (f"fast solve ({result.iterations} GMRES iterations, residual {result.residual:.1e}{why})"
           if result.method == "fast" else f"dense solve{f' ({result.method_reason})' if why else ''}")
    if result.study is not None:
        levels = result.study["panels_per_level"]
        how = (f"{result.study['kind']} refinement study to {levels[-1]:,} panels in {len(levels)} levels, "
               f"{how} on the finest,")
    head = (f"tricharge {version}: {printable(source)} (unit {unit}), {plural(len(names), 'conductor')}, "
            f"{plural(result.n_panels, 'panel')}"
            + ("" if meshing_seconds is None else f" meshed from CAD in {meshing_seconds:.2f} s")
            + f", {how} in {result.solve_time:.2f} s{floating}")
    errors = result.error_estimate
    reference = result.reference
    if errors is None:
        mutual = mutual_list(names, result.mutual, reference)
        closing = ("Discretisation error not estimated (single solve): add --levels 3 or --accuracy 0.5% for "
                   "value ± estimate.")
    else:
        from .bem.results import mutual_error

        mutual = mutual_list(names, result.mutual, reference, mutual_error(errors))
        closing = study_report(result.study)
    kind = "" if errors is None else ", extrapolated ± estimated error"
    return "\n\n".join([
        head,
        f"Capacitance matrix, Maxwell form (Q = C V){kind}:\n" + matrix_table(names, result.capacitance, errors=errors),
        "Mutual form (the capacitors of a SPICE netlist):\n" + mutual,
        "Checks:\n" + checks_text(result.checks),
        closing,
    ])


def study_report(study: dict) -> str:
    """What a refinement study did and how far to trust its estimates (``Result.study``)."""
    from .bem.convergence import ESTIMATE_METHOD, NOT_ASYMPTOTIC, TWO_LEVELS

    status = np.array(study["status"], dtype=object)
    order = np.array([[np.nan if p is None else p for p in row] for row in study["observed_order"]])
    levels = " -> ".join(f"{n:,}" for n in study["panels_per_level"])
    seconds = " + ".join(f"{t:.1f}" for t in study["seconds_per_level"])
    lines = [f"Refinement study ({study['kind']}): panels {levels}; solve times {seconds} s."]
    if study["kind"] == "adaptive":
        lines.append(f"  Target {study['target']:.2%} relative on every entry of at least 1% of its row: "
                     f"{study['stop']}.")
    counts = ", ".join(f"{int((status == s).sum())} {s}" for s in dict.fromkeys(status.ravel()))
    seen = order[np.isfinite(order)]
    orders = f"; observed order {seen.min():.2f}..{seen.max():.2f}" if len(seen) else ""
    lines.append(f"  Entries: {counts}{orders}.")
    if NOT_ASYMPTOTIC in status:
        lines.append("  Entries marked not asymptotic did not converge steadily: they show the finest value with "
                     "3x its last change. Refine further before relying on them.")
    if TWO_LEVELS in status:
        lines.append("  Two levels show no convergence order: each entry is the finer value with 3x its last "
                     "change. Three levels give an extrapolated value and a tighter estimate.")
    lines += [f"  {printable(note)}" for note in study["notes"]]
    lines.append("  A to-reference capacitor's estimate is the sum of its row's estimates (a bound).")
    covers = study.get("covers", "")
    lines.append(f"  Method: {ESTIMATE_METHOD}. " + (
        "The estimate covers the geometry too: every refinement put its new vertices on the CAD surfaces."
        if covers.startswith("geometry") else
        "The estimate is for the mesh's geometry: it says nothing about how well the mesh follows the real part."))
    return "\n".join(lines)


def _table(rows: list[list[str]], right: set[int]) -> list[str]:
    widths = [max(len(r[c]) for r in rows) for c in range(len(rows[0]))]
    return ["  " + "  ".join(cell.rjust(w) if c in right else cell.ljust(w) for c, (cell, w) in
                             enumerate(zip(row, widths))).rstrip() for row in rows]


def survey_report(model, *, version: str) -> str:
    """The text ``inspect`` prints: parts, media, notes, warnings and errors."""
    from .units import metres_per

    scale = metres_per(model.unit)
    u = model.unit
    survey = model.survey
    counts = [plural(len(model.conductors), "conductor")]
    if model.interfaces:
        counts.append(plural(len(model.interfaces), "interface"))
    head = (f"tricharge {version}: {printable(model.source)} (unit {u}): {', '.join(counts)}, "
            f"{plural(model.n_panels, 'panel')}")
    lines = [head]
    ground = f"z = {model.ground_z / scale:g} {u}" if model.ground_z is not None else "none"
    media = ", ".join(f"{printable(m.name)} {m.permittivity:g}" for m in model.media) or "vacuum 1"
    lines.append(f"ground plane: {ground}; background medium: {printable(model.background)}; "
                 f"relative permittivities: {media}")
    header = ["name", "surfaces", "condition" if model.interfaces == () else "condition / sides", "panels",
              f"area {u}2", f"x {u}", f"y {u}", f"z {u}", f"panel size {u}", "worst aspect", "surface"]
    rows = [header]
    for p in survey.parts:
        box = [f"{lo / scale:.4g}..{hi / scale:.4g}" for lo, hi in zip(p.bbox_min, p.bbox_max)]
        rows.append([printable(p.name) + (" (interface)" if p.kind == "interface" else ""),
                     printable(", ".join(p.surfaces)), printable(p.detail), f"{p.panels:,}", f"{p.area / scale**2:.4g}", *box,
                     f"{p.smallest / scale:.3g}..{p.largest / scale:.3g}", f"{p.worst_aspect:.3g}",
                     "closed" if p.closed else "open (thin sheet)" if p.kind == "conductor" else "open"])
    lines += [""] + _table(rows, right={3, 4, 9})
    from .sheets import sheet_faces

    for title, items in (("notes", model.notes + sheet_faces(model).notes), ("warnings", model.warnings + survey.warnings),
                         ("errors", model.problems)):
        if items:
            lines += ["", f"{title}:"] + [f"  - {printable(item)}" for item in items]
    if not model.problems:
        lines += ["", "no errors: the model can be solved"]
    return "\n".join(lines)


#: Cautions are printed when the highest potential in a field solution reaches this many
#: volts, or whenever withstand margins were asked for. 1 kV: the conventional upper limit
#: of "low voltage" for AC installations (IEC 60038, from memory); settable with
#: ``--cautions-from``.
CAUTIONS_FROM_VOLTS = 1000.0

#: The cautions of a high-voltage field report (engineering practice; the tool does not replace it).
CAUTIONS = """Cautions for high-voltage use: these are computed fields on an idealised geometry.
  - Keep generous margins: surface contamination, humidity, altitude (lower air density),
    surface roughness, burrs, ageing and transients all lower the real withstand.
  - Sharp edges and corners have singular fields in theory: model the real radius there.
  - Withstand strengths you give are yours to justify; follow the applicable codes and
    standards, and have the design checked by a qualified engineer."""


def _kv_per_mm(value: float) -> str:
    return f"{value / 1e6:.4g} kV/mm"


def needs_cautions(potentials, margins, threshold: float = CAUTIONS_FROM_VOLTS) -> bool:
    """True when a field solution's highest |potential| reaches ``threshold`` volts, or
    margins were asked for."""
    return bool(len(margins)) or (len(potentials) > 0 and float(np.max(np.abs(potentials))) >= threshold)


def field_report(result, model, *, source: str, version: str, cautions_from: float = CAUTIONS_FROM_VOLTS) -> str:
    """The text the ``field`` command prints; the high-voltage cautions when
    :func:`needs_cautions` says so."""
    from .units import format_eng, metres_per

    scale, unit = metres_per(model.unit), model.unit
    lines = [f"tricharge {version}: {printable(source)} (unit {unit}), {plural(len(result.conductors), 'conductor')}, "
             f"{plural(model.n_panels, 'panel')}, {result.method} solve"]
    rows = [["conductor", "potential", "free charge"]]
    for name, v, q, c in zip(result.conductors, result.potentials, result.free_charge, model.conductors):
        rows.append([printable(name), format_eng(v, "V", keep_zeros=False) + (" (floating)" if c.floating else ""),
                     format_eng(q, "C")])
    lines += [""] + _table(rows, right={1, 2})
    rows = [["part", "#", "|E|", "where (" + unit + ")", "panel " + unit, "feature"]]
    for s in result.spots:
        where = ", ".join(f"{x / scale:.4g}" for x in s.location)
        feature = f"sharp ({s.sharp_angle:.0f} deg)" if s.sharp else ""
        rows.append([printable(result.parts[s.group]), str(s.rank), _kv_per_mm(s.field), where,
                     f"{s.panel_size / scale:.3g}",
                     feature])
    lines += ["", "Highest surface fields (|E| on the surface, the larger side at interfaces):"]
    lines += _table(rows, right={1, 2, 4})
    if any(s.sharp for s in result.spots):
        lines += ["", "Peaks marked sharp sit where neighbouring panels meet at more than 30 degrees: an edge,",
                  "a corner or a curve too coarse for its mesh. The true field there is higher than the panel",
                  "value and grows as the mesh is refined: model the real radius (and mesh it with panels",
                  "several times smaller than that radius) before trusting the number."]
    if result.utilisation is not None:
        lines += ["", f"Gap between the two electrodes: {result.gap / scale:.4g} {unit}; utilisation factor "
                      f"E_mean/E_max = {result.utilisation:.3f} (1 for a uniform field)."]
    if result.margins:
        lines += ["", "Margins against the withstand strengths given:"]
        for medium, e_max, strength in result.margins:
            verdict = "exceeded" if e_max >= strength else f"margin {strength / e_max:.2f}x"
            lines.append(f"  {printable(medium)}: peak {_kv_per_mm(e_max)} against {_kv_per_mm(strength)} ({verdict})")
    if needs_cautions(result.potentials, result.margins, cautions_from):
        lines += ["", CAUTIONS]
    return "\n".join(lines)


def refinement_report(rechecked) -> str:
    """Lines for the peak refinement check: [(part, before V/m, after V/m)]."""
    lines = ["Peak refinement check (panels around each part's peak split into four):"]
    for part, before, after in rechecked:
        change = after / before - 1.0
        verdict = ("grows with the mesh: a sharp edge or corner, or a curve the mesh does not resolve; "
                   "refine there (or model the radius) before using the value" if change > 0.1
                   else "settled to within 10 %")
        lines.append(f"  {printable(part)}: {_kv_per_mm(before)} -> {_kv_per_mm(after)} ({change:+.1%}), {verdict}")
    return "\n".join(lines)


class Terminal:
    """Where the human-readable report goes: stdout, or stderr when an output is written
    to standard output; nothing when quiet."""

    def __init__(self, quiet: bool = False, to_stderr: bool = False):
        self.quiet, self.to_stderr = quiet, to_stderr
        self.pending: list[str] = []

    def say(self, text: str) -> None:
        if not self.quiet:
            click.echo(text, err=self.to_stderr)

    def warn(self, text: str) -> None:
        """Keep a warning for :meth:`flush_warnings`: warnings are shown once the work has
        succeeded, so a run that fails ends in its one error line."""
        self.pending.append(text)

    def flush_warnings(self) -> None:
        for text in dict.fromkeys(self.pending):
            click.echo(f"tricharge: warning: {printable(text)}", err=True)
        self.pending = []

class Progress:
    """Progress bars on stderr for long work; silent when quiet or not a terminal."""

    def __init__(self, quiet: bool):
        self.enabled = not quiet and sys.stderr.isatty()
        self.bar, self.stage = None, None

    def __call__(self, stage: str, done: int, total: int) -> None:
        if not self.enabled:
            return
        from tqdm import tqdm

        if stage != self.stage:
            self.close()
            self.stage = stage
            kind = stage.rsplit(": ", 1)[-1]  # refinement studies prefix "level 2/3: "
            unit = "it" if kind == "iterations" else "panels" if kind == "near field" else "step"
            self.bar = tqdm(total=None if kind == "iterations" else total, desc=stage, unit=unit, leave=False,
                            file=sys.stderr)
        self.bar.update(done - self.bar.n)

    def close(self) -> None:
        if self.bar is not None:
            self.bar.close()
            self.bar = None


def placement_notes(requests, values, model) -> list[str]:
    """Lines saying where sample points lie when that changes how their values were
    obtained: every probe that is not free, and counts for lines and sections."""
    from .bem.evaluation import BELOW_PLANE, INSIDE, NARROW_GAP, NEAR
    from .units import metres_per

    scale, unit, names = metres_per(model.unit), model.unit, model.conductor_names
    notes, numbers = [], {"line": 0, "section": 0}
    for (kind, points, _), sample in zip(requests, values):
        if kind == "probe":
            for k, (point, where) in enumerate(zip(points, sample.where), start=1):
                at = ", ".join(f"{x / scale:.4g}" for x in point)
                if where == INSIDE:
                    text = (f"inside conductor {printable(names[sample.conductor[k - 1]])}: its potential, "
                            "no field")
                elif where == BELOW_PLANE:
                    text = "below the ground plane: potential 0, no field"
                elif where in (NEAR, NARROW_GAP):
                    d, h = sample.distance[k - 1], sample.panel_size[k - 1]
                    text = (f"{d / scale:.3g} {unit} from a surface ({d / h:.2g} panel sizes): " +
                            ("field extrapolated from 0.5-1.5 panel sizes out" if where == NEAR else
                             "in a gap narrower than the mesh resolves, evaluated directly; refine the mesh there"))
                else:
                    continue
                notes.append(f"probe {k} ({at} {unit}) lies {text}")
            continue
        numbers[kind] += 1
        counts = [(int(np.isin(sample.where, (INSIDE, BELOW_PLANE)).sum()), "inside conductors or below the plane "
                   "(potential of the conductor, no field; a gap in charts)"),
                  (int((sample.where == NEAR).sum()), "near a surface (field extrapolated from 0.5-1.5 panel sizes "
                   "out)"),
                  (int((sample.where == NARROW_GAP).sum()), "in gaps narrower than the mesh resolves")]
        said = [f"{n:,} {what}" for n, what in counts if n]
        if said:
            notes.append(f"{kind} {numbers[kind]}: of {len(points):,} points, " + "; ".join(said))
    return notes


def sensitivity_report(sens, result, model, *, top: int = 10) -> str:
    """The largest changes of the mutual-form capacitors when a part moves by a step of
    about a hundredth of the model's size (a round number in the model's unit)."""
    from .bem.results import mutual_form
    from .units import metres_per

    names = [printable(n) for n in result.conductors]
    mutual = result.mutual
    diagonal = float(np.linalg.norm(np.ptp(model.vertices, axis=0)))
    step = 10.0 ** np.floor(np.log10(diagonal / 100.0))
    scale = metres_per(model.unit)
    rows = []
    for p, part in enumerate(sens.parts):
        for d, axis in enumerate("xyz"):
            change = mutual_form(sens.translation[p, d]) * step
            for a in range(len(names)):
                for b in range(a, len(names)):
                    if mutual[a, b] > 1e-3 * np.abs(mutual).max():
                        rows.append((abs(change[a, b]) / mutual[a, b], change[a, b], a, b, part, axis))
    rows.sort(key=lambda row: -row[0])
    reference = printable(result.reference)
    lines = [f"Largest sensitivities (from the solved charges, no extra solve), per {step / scale:g} {model.unit} "
             "of a part moving:"]
    for relative, change, a, b, part, axis in rows[:top]:
        what = f"{names[a]} - {names[b]} coupling" if a != b else f"{names[a]} - {reference}"
        lines.append(f"  {what}: {format_eng(change, 'F', keep_zeros=False)} ({change / abs(mutual[a, b]):+.2%}) with "
                     f"{printable(part)} moving +{axis}")
    lines.append("  (a tolerance budget: multiply by the expected movement in steps; all in the JSON, in F/m)")
    return "\n".join(lines)
