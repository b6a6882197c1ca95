"""Command line: parse arguments, call the library, report. No numerics here.

Every command follows the same order, so a mistake costs seconds, not a solve: options
and output paths are checked first (:class:`~tricharge.io.files.Outputs`), then the
input is read and the outputs are checked against every file it names, then memory and
optional libraries, and only then the work; the files are written together at the end.

Exit status: 0 success, 2 bad input (one line on stderr), 1 internal error, 130 interrupted.
"""

from __future__ import annotations

import os
import sys
from importlib import resources
from pathlib import Path

import click

from . import __version__
from .errors import OptionError, TrichargeError
from .names import printable
from .units import LENGTH_UNITS, parse_fraction, parse_numbers, parse_quantity

#: Built-in demos (our own invented scenarios), files in tricharge/data/ (links to meshes/).
DEMOS = {"hv": "demo_hv.toml", "header": "demo_header.msh", "package": "demo_package.toml"}
DEFAULT_DEMO = "hv"


class _Terminal:
    """Where the human-readable report goes: stdout, or stderr when an output is written
    to standard output; nothing when quiet."""

    def __init__(self, quiet: bool = False, to_stderr: bool = False):
        self.quiet, self.to_stderr = quiet, to_stderr

    def say(self, text: str) -> None:
        if not self.quiet:
            click.echo(text, err=self.to_stderr)

    @staticmethod
    def warn(text: str) -> None:
        click.echo(f"tricharge: warning: {printable(text)}", err=True)


class _Progress:
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


def _plan(input_path: Path, outputs: dict):
    """Check every output path before any work. ``outputs`` maps a key to (option name,
    path or None, text?); returns the plan and the targets by key."""
    from .io.files import Outputs

    plan = Outputs(inputs=[input_path])
    targets = {key: plan.add(option, path, text=text) for key, (option, path, text) in outputs.items()}
    return plan, targets


def _load(input_path: Path, unit: str | None, plan, terminal: _Terminal, *, method: str | None = None,
          check: bool = True):
    """Read the model, check the outputs against every file it names, print its warnings."""
    from .io.modelfile import load

    model = load(input_path, unit=unit, check=check)
    plan.add_inputs(model.inputs)
    for warning in model.warnings + (model.survey.warnings if check else ()):
        terminal.warn(warning)
    return model


def _commit(plan, terminal: _Terminal, stage_all) -> None:
    """Stage every output with ``stage_all(stage) -> notes``, write them together, then
    say what was written."""
    if not plan.targets:
        return
    with plan.transaction() as stage:
        notes = stage_all(stage) or []
    terminal.say("")
    for path in plan.written:
        terminal.say(f"wrote {'standard output' if str(path) == '-' else printable(path)}")
    for note in notes:
        terminal.say(note)


@click.group(context_settings={"help_option_names": ["-h", "--help"]})
@click.version_option(__version__, prog_name="tricharge")
def cli():
    """Capacitance matrices and surface fields of 3D conductors (boundary elements)."""


_unit_option = click.option("--unit", "unit", type=click.Choice(list(LENGTH_UNITS)), default=None,
                            help="Length unit of the mesh coordinates [default: m, or the model file's unit].")
_json_option = click.option("--json", "json_path", type=click.Path(dir_okay=False, allow_dash=True, path_type=Path),
                            help="Also write the result as JSON to this file (- for standard output).")
_quiet_option = click.option("--quiet", "-q", is_flag=True, help="Print nothing but errors and warnings.")
_volts_option = click.option("--volts", "volts", multiple=True, metavar="NAME=VALUE",
                             help="Voltage of a conductor, e.g. hv=50kV (repeatable); overrides the model file.")
_method_option = click.option("--method", type=click.Choice(["auto", "dense", "fast"]), default="auto",
                              show_default=True,
                              help="dense: stored matrix and LU (small models); fast: multipole and GMRES, memory "
                                   "growing linearly; auto: dense up to 3,000 panels (12,000 with dielectrics, a "
                                   "plane or floating parts).")
_tol_option = click.option("--tol", type=click.FloatRange(1e-12, 1e-2), default=1e-6, show_default=True,
                           help="Relative residual of the iterative (fast) solve.")
_file = click.Path(dir_okay=False, path_type=Path)
_text_file = click.Path(dir_okay=False, allow_dash=True, path_type=Path)


def _reductions(merge, grounded, reference) -> dict:
    nets = {}
    for item in merge:
        net, sep, members = item.partition("=")
        if not sep or not net.strip() or not members.strip():
            raise OptionError(f"--merge {printable(item)!r}: write NET=A,B")
        nets[net.strip()] = [m.strip() for m in members.split(",")]
    return dict(nets=nets, grounded=list(grounded), reference={"plane": "ground plane"}.get(reference, reference))


@cli.command()
@click.argument("input_path", metavar="INPUT", type=click.Path(path_type=Path))
@_unit_option
@_json_option
@_method_option
@_tol_option
@click.option("--merge", multiple=True, metavar="NET=A,B,...", help="Tie conductors into one net (repeatable).")
@click.option("--ground", "grounded", multiple=True, metavar="NAME",
              help="Hold a conductor at 0 V as part of the reference (repeatable).")
@click.option("--reference", metavar="infinity|plane|NAME",
              help="The reference node of the mutual form: infinity, the ground plane, or a conductor.")
@click.option("--spice", "spice_path", type=_text_file, help="Write a SPICE subcircuit (.subckt) of the matrix.")
@click.option("--drop-below", type=click.FloatRange(0.0, 1.0), default=0.0, show_default=True,
              help="In the SPICE file, leave out couplings below this fraction of their row's total.")
@click.option("--csv", "csv_path", type=_text_file, help="Write the matrix as CSV (conductor names as header).")
@click.option("--npz", "npz_path", type=_file, help="Write the matrices (both forms) and names as a NumPy .npz.")
@click.option("--form", type=click.Choice(["maxwell", "mutual"]), default="maxwell", show_default=True,
              help="Which form the CSV holds.")
@click.option("--vtu", "vtu_path", type=_file,
              help="Write the panels with their charge density and field per conductor at 1 V (.vtu).")
@click.option("--levels", type=click.IntRange(1, 4), default=1, show_default=True,
              help="Solve on this many meshes, each with every panel split into four, and extrapolate: the "
                   "matrix then reads value ± estimated error. Costs 1.1-2x a solve on the finest mesh (16x the "
                   "panels at 3 levels).")
@click.option("--accuracy", metavar="PERCENT",
              help="Refine where the charge crowds until every entry of at least 1%% of its row has an "
                   "estimated error below this, e.g. 0.5%%.")
@click.option("--max-panels", type=click.IntRange(100, 10_000_000), default=200_000, show_default=True,
              help="Panel budget of --accuracy.")
@click.option("--study-png", "study_png", type=_file,
              help="Chart the refinement study (needs --levels or --accuracy) as a PNG.")
@_quiet_option
def solve(input_path: Path, unit: str | None, json_path: Path | None, method: str, tol: float, merge, grounded,
          reference, spice_path, drop_below, csv_path, npz_path, form, vtu_path, levels: int, accuracy,
          max_panels: int, study_png: Path | None, quiet: bool):
    """Capacitance matrix of the conductors in INPUT: a surface mesh (.msh .stl .obj .ply
    .vtk .vtu) or a model file (.toml) that says what the mesh surfaces are.

    In a bare mesh each Gmsh physical surface group is one conductor; without groups,
    each connected piece of surface is one, named c1, c2, ... .
    """
    if study_png is not None and levels == 1 and accuracy is None:
        raise OptionError("--study-png charts a refinement study: add --levels 3 or --accuracy 0.5%")
    if accuracy is not None and levels > 1:
        raise OptionError("--levels and --accuracy are two ways to estimate the error; give one of them")
    study = dict(levels=levels)
    if accuracy is not None:
        study = dict(accuracy=parse_fraction(accuracy, what="--accuracy"), max_panels=max_panels)
    plan, targets = _plan(input_path, {
        "json": ("--json", json_path, True), "spice": ("--spice", spice_path, True),
        "csv": ("--csv", csv_path, True), "npz": ("--npz", npz_path, False), "vtu": ("--vtu", vtu_path, False),
        "study_png": ("--study-png", study_png, False)})
    if study_png is not None:
        from .extras import require

        require("viz", "--study-png")
    _solve_and_report(input_path, unit, plan, targets, _Terminal(quiet, plan.to_stdout), method=method, tol=tol,
                      reductions=_reductions(merge, grounded, reference), form=form, drop_below=drop_below,
                      study=study)


def _solve_and_report(input_path: Path, unit, plan, targets, terminal: _Terminal, *, method="auto", tol=1e-6,
                      reductions=None, form="maxwell", drop_below=0.0, study=None) -> None:
    from .io import outputs
    from .io.text import plural, result_report
    from .pipeline import check_reductions, solve

    model = _load(input_path, unit, plan, terminal)
    reductions = reductions or dict(nets={}, grounded=[], reference=None)
    check_reductions(model, **reductions)
    terminal.say(f"read {printable(input_path.name)}: {plural(len(model.conductors), 'conductor')} "
                 f"({printable(', '.join(model.conductor_names))}), {plural(model.n_panels, 'panel')}; solving ...")
    progress = _Progress(terminal.quiet)
    try:
        full = solve(model, method=method, tol=tol, progress=progress, **(study or {}))
    finally:
        progress.close()
    result = full
    if reductions["nets"] or reductions["grounded"] or reductions["reference"]:
        result = full.reduced(**reductions)
    terminal.say(result_report(result, source=input_path.name, unit=model.unit, version=__version__))
    origin = outputs.provenance(model, command="solve")

    def stage_all(stage):
        notes = outputs.stage_solve(stage, targets, result, full, model, origin, form=form, drop_below=drop_below)
        if targets.get("study_png") is not None:
            from .viz.plots import convergence_chart

            stage.bytes(targets["study_png"], convergence_chart(full.conductors, full.study, full.capacitance,
                                                                full.error_estimate))
        return notes

    _commit(plan, terminal, stage_all)


def _pairs(values, parse, what: str) -> dict:
    """NAME=VALUE options into a dict, values parsed by ``parse``."""
    out = {}
    for item in values:
        name, sep, value = item.partition("=")
        if not sep or not name.strip():
            raise OptionError(f"{what} {printable(item)!r}: write NAME=VALUE, e.g. hv=12kV")
        out[name.strip()] = parse(value, what=f"{what} {printable(name.strip())}")
    return out


def _voltages(volts) -> dict:
    return _pairs(volts, lambda v, what: parse_quantity(v, "V", what=what), "--volts")


@cli.command()
@click.argument("input_path", metavar="INPUT", type=click.Path(path_type=Path))
@_unit_option
@_volts_option
@click.option("--withstand", multiple=True, metavar="MEDIUM=STRENGTH",
              help="Withstand field strength of a medium, e.g. air=3kV/mm, for margins (repeatable).")
@click.option("--top", type=click.IntRange(1, 100), default=5, show_default=True,
              help="Hot spots listed per conductor and interface.")
@click.option("--probe", multiple=True, metavar="X,Y,Z", help="Sample the field at this point (repeatable).")
@click.option("--line", "lines", multiple=True, metavar="X0,Y0,Z0:X1,Y1,Z1[:N]",
              help="Sample N points (default 101) along a line (repeatable).")
@click.option("--line-png", "line_png", type=_file, help="Chart |E| along the first --line as a PNG.")
@click.option("--section", metavar="AXIS=VALUE", help="Sample a plane section, e.g. z=40, across the model.")
@click.option("--grid", type=click.IntRange(2, 1001), default=81, show_default=True,
              help="Points per side of the section.")
@click.option("--samples", "samples_path", type=_text_file,
              help="Write the samples (probes, lines, section) as CSV (- for standard output).")
@click.option("--vtk", "vtk_path", type=_file, help="Write the section as a VTK image (.vti) for ParaView.")
@click.option("--vtu", "vtu_path", type=_file,
              help="Write the panels with charge density and fields (.vtu) for ParaView.")
@click.option("--refine-peaks", is_flag=True,
              help="Solve again with each part's peak region split finer and report how much the peak moved.")
@_json_option
@_method_option
@_quiet_option
def field(input_path: Path, unit: str | None, volts, withstand, top: int, probe, lines, line_png, section, grid: int,
          samples_path: Path | None, vtk_path: Path | None, vtu_path: Path | None, refine_peaks: bool,
          json_path: Path | None, method: str, quiet: bool):
    """Surface fields and hot spots of INPUT with applied voltages (model file or --volts)."""
    from .io import outputs
    from .io.text import field_report
    from .pipeline import applied_voltages, check_sample_memory, solve_field
    from .units import metres_per, parse_field_strength

    if line_png is not None and not lines:
        raise OptionError("--line-png charts a line: give --line too")
    if vtk_path is not None and section is None:
        raise OptionError("--vtk writes the plane section: give --section too, e.g. --section z=0")
    voltages = _voltages(volts)
    strengths = _pairs(withstand, parse_field_strength, "--withstand")
    plan, targets = _plan(input_path, {
        "json": ("--json", json_path, True), "samples": ("--samples", samples_path, True),
        "vtk": ("--vtk", vtk_path, False), "vtu": ("--vtu", vtu_path, False), "line_png": ("--line-png", line_png, False)})
    if line_png is not None:
        from .extras import require

        require("viz", "--line-png")
    terminal = _Terminal(quiet, plan.to_stdout)
    model = _load(input_path, unit, plan, terminal)
    applied_voltages(model, voltages)  # names and values checked before the solve
    requests = _sample_requests(model, probe, lines, section, grid)
    if requests and samples_path is None and vtk_path is None and line_png is None and json_path is None:
        raise OptionError("samples asked for but no output: add --samples FILE.csv (or --vtk for a section)")
    if requests:
        check_sample_memory(sum(len(points) for _, points, _ in requests), "--probe/--line/--section")
    progress = _Progress(quiet)
    try:
        result = solve_field(model, voltages, method=method, top=top, withstand=strengths, progress=progress)
    finally:
        progress.close()
    terminal.say(field_report(result, model, source=input_path.name, version=__version__))
    rechecked = []
    if refine_peaks:
        from .io.text import refinement_report
        from .pipeline import refine_peaks as recheck

        rechecked = recheck(result, model, method=method)
        terminal.say("\n" + refinement_report(rechecked))
    values = [result.sample(points) for _, points, _ in requests]
    origin = outputs.provenance(model, command="field")

    def stage_all(stage):
        samples = outputs.stage_samples(stage, targets, model, requests, values) if requests else []
        if line_png is not None:
            stage.bytes(targets["line_png"], _line_chart(model, requests, values, input_path, lines[0]))
        if targets["vtu"] is not None:
            from .io.export import write_vtu

            stage.file(targets["vtu"], lambda path: write_vtu(path, model.vertices, model.triangles,
                                                              outputs.field_vtu_data(result),
                                                              {"metres_per_unit": metres_per(model.unit)}))
        stage.text(targets["json"], outputs.field_json(result, samples, rechecked, origin))
        if targets["vtu"] is not None:
            return [f"part ids in {targets['vtu'].shown}: "
                    + ", ".join(f"{k} {printable(p)}" for k, p in enumerate(result.parts))]
        return []

    _commit(plan, terminal, stage_all)


def _line_chart(model, requests, values, input_path: Path, line: str) -> bytes:
    import numpy as np

    from .units import metres_per
    from .viz.plots import line_profile

    k = next(k for k, (kind, _, _) in enumerate(requests) if kind == "line")
    points, (_, e) = requests[k][1], values[k]
    distance = np.linalg.norm(points - points[0], axis=1) / metres_per(model.unit)
    return line_profile(distance, np.linalg.norm(e, axis=1), unit=model.unit,
                        title=f"{input_path.name}: field along {line}")


#: Most points one --line may ask for (a line of a million points is already finer than
#: any panel; our choice).
MAX_LINE_POINTS = 1_000_000


def _line_count(text: str, spec: str) -> int:
    count = parse_numbers(text, 1, "--line count")[0]
    if count != int(count) or not 2 <= count <= MAX_LINE_POINTS:
        raise OptionError(f"--line {printable(spec)!r}: the point count must be a whole number from 2 to "
                          f"{MAX_LINE_POINTS:,}")
    return int(count)


def _sample_requests(model, probes, lines, section, grid) -> list:
    """[(kind, points (M, 3) metres, image geometry or None)] from the sampling options."""
    import numpy as np

    from .pipeline import line_points, section_grid
    from .units import metres_per

    scale = metres_per(model.unit)
    requests = []
    if probes:
        requests.append(("probe", np.array([parse_numbers(p, 3, "--probe") for p in probes]) * scale, None))
    for text in lines:
        parts = text.split(":")
        if len(parts) not in (2, 3):
            raise OptionError(f"--line {printable(text)!r}: write X0,Y0,Z0:X1,Y1,Z1 or X0,Y0,Z0:X1,Y1,Z1:N")
        count = _line_count(parts[2], text) if len(parts) == 3 else 101
        start, end = (np.array(parse_numbers(p, 3, "--line")) * scale for p in parts[:2])
        requests.append(("line", line_points(start, end, count), None))
    if section is not None:
        axis, sep, value = section.partition("=")
        if not sep or axis.strip() not in ("x", "y", "z"):
            raise OptionError(f"--section {printable(section)!r}: write AXIS=VALUE with AXIS x, y or z, e.g. z=40")
        points, origin, spacing, dims = section_grid(model, axis.strip(), parse_numbers(value, 1, "--section")[0]
                                                     * scale, grid)
        requests.append(("section", points, (origin, spacing, dims)))
    return requests


@cli.command()
@click.argument("input_path", metavar="INPUT", type=click.Path(path_type=Path))
@_unit_option
@_volts_option
@click.option("--png", "png_path", type=_file, help="Write the picture here.")
@click.option("--quantity", type=click.Choice(["field", "charge"]), default="field", show_default=True,
              help="Colour by |E| or by free surface charge density.")
@click.option("--log", "log_scale", is_flag=True, help="Logarithmic colour scale.")
@click.option("--view", "view_name", type=click.Choice(["iso", "top", "front", "side"]), default="iso",
              show_default=True)
@click.option("--interactive", is_flag=True, help="Open a window (needs a display) instead of a file.")
@_method_option
@_quiet_option
def view(input_path: Path, unit, volts, png_path, quantity, log_scale, view_name, interactive, method, quiet):
    """Picture of INPUT's surface field: a mesh or model file (solved with its voltages or
    --volts), or a .vtu written by 'field --vtu' (shown without solving again)."""
    from .extras import require

    if interactive and not os.environ.get("DISPLAY") and png_path is None:
        raise OptionError("--interactive needs a display and none is set (DISPLAY); give --png FILE instead")
    if not interactive and png_path is None:
        raise OptionError("say where the picture goes: --png FILE (or --interactive with a display)")
    plan, targets = _plan(input_path, {"png": ("--png", png_path, False)})
    require("viz", "tricharge view")
    terminal = _Terminal(quiet)
    voltages = _voltages(volts)
    from .io.saved import read_saved_field

    saved = read_saved_field(input_path) if input_path.suffix.lower() == ".vtu" else None
    if saved is not None:
        from .viz import saved_picture

        picture = saved_picture(saved, quantity=quantity, log=log_scale)
    else:
        from .pipeline import applied_voltages, solve_field
        from .viz import field_picture

        model = _load(input_path, unit, plan, terminal)
        applied_voltages(model, voltages)
        progress = _Progress(quiet)
        try:
            solved = solve_field(model, voltages, method=method, progress=progress)
        finally:
            progress.close()
        picture, _ = field_picture(model, solved, quantity=quantity, log=log_scale)
    from .viz.render import render_png, show

    if interactive and os.environ.get("DISPLAY"):
        show(picture, view=view_name)
    if targets["png"] is not None:
        _commit(plan, terminal, lambda stage: stage.file(targets["png"],
                                                         lambda path: render_png(picture, path, view=view_name)))
    elif interactive:
        terminal.warn("no display: nothing was shown; give --png FILE to write the picture")


@cli.command()
@click.argument("input_path", metavar="INPUT", type=click.Path(path_type=Path))
@click.option("--html", "html_path", type=_text_file, required=True,
              help="Write the report here (one self-contained file; - for standard output).")
@_unit_option
@_volts_option
@_method_option
@click.option("--levels", type=click.IntRange(1, 4), default=1, show_default=True,
              help="Refinement levels for the capacitance: 2 or more add value ± estimate and a chart.")
@_quiet_option
def report(input_path: Path, html_path: Path, unit, volts, method, levels: int, quiet):
    """A report of INPUT a designer can hand on: model, capacitance matrix in both forms,
    checks, and, when every conductor has a voltage, hot spots with cautions and pictures."""
    from .extras import require
    from .io.outputs import provenance
    from .pipeline import applied_voltages, solve, solve_field
    from .viz.report import build_report

    plan, targets = _plan(input_path, {"html": ("--html", html_path, True)})
    require("viz", "tricharge report")
    terminal = _Terminal(quiet, plan.to_stdout)
    voltages = _voltages(volts)
    model = _load(input_path, unit, plan, terminal)
    driven = all(c.floating or c.voltage is not None or c.name in voltages for c in model.conductors)
    if driven or voltages:
        applied_voltages(model, voltages)
    progress = _Progress(quiet)
    try:
        result = solve(model, method=method, levels=levels, progress=progress)
        field_result = solve_field(model, voltages, method=method, progress=progress) if driven else None
    finally:
        progress.close()
    page = build_report(model, result, field_result, title=f"tricharge report: {input_path.name}",
                        provenance=provenance(model, command="report"))
    _commit(plan, terminal, lambda stage: stage.text(targets["html"], page))


@cli.command()
@click.argument("input_path", metavar="INPUT", type=click.Path(path_type=Path))
@_unit_option
def inspect(input_path: Path, unit: str | None):
    """Show what tricharge makes of INPUT (a mesh or a .toml model file): parts, sizes, problems.

    Exit status 2 when the model has errors that stop a solve.
    """
    from .errors import MeshError
    from .io.modelfile import load
    from .io.text import survey_report

    model = load(input_path, unit=unit, check=False)
    click.echo(survey_report(model, version=__version__))
    if model.problems:
        more = f" (and {len(model.problems) - 1} more, listed above)" if len(model.problems) > 1 else ""
        raise MeshError(model.problems[0] + more)


@cli.command()
@click.argument("name", type=click.Choice(list(DEMOS)), default=DEFAULT_DEMO)
@_json_option
@_quiet_option
@click.option("--inspect", "inspect_only", is_flag=True, help="Show the model summary instead of solving.")
def demo(name: str, json_path: Path | None, quiet: bool, inspect_only: bool):
    """Solve a built-in demo NAME: hv (default), header or package.

    \b
    hv       a high-voltage rod with a grading ring facing a grounded disk, in air
    header   a three-pin header over a shield plate, homogeneous medium
    package  a four-lead package in mold compound over a ground plane
    """
    with resources.as_file(resources.files("tricharge") / "data" / DEMOS[name]) as path:
        if inspect_only:
            inspect.callback(path, "mm" if path.suffix == ".msh" else None)
            return
        plan, targets = _plan(path, {"json": ("--json", json_path, True)})
        _solve_and_report(path, "mm" if path.suffix == ".msh" else None, plan, targets,
                          _Terminal(quiet, plan.to_stdout))


def _error(text: str) -> int:
    click.echo(f"tricharge: error: {printable(text)}", err=True)
    return 2


def main(argv: list[str] | None = None) -> int:
    """Run the command line in-process and return the exit status (for tests and ``run``)."""
    no_args = getattr(click.exceptions, "NoArgsIsHelpError", ())  # click >= 8.2
    try:
        cli.main(args=argv, prog_name="tricharge", standalone_mode=False)
    except click.exceptions.Exit as exc:
        return exc.exit_code
    except (click.exceptions.Abort, KeyboardInterrupt):
        click.echo("tricharge: interrupted; no output was written", err=True)
        return 130
    except no_args as exc:
        click.echo(exc.format_message())
        return 2
    except click.ClickException as exc:
        return _error(exc.format_message())
    except TrichargeError as exc:
        return _error(str(exc))
    except RecursionError:
        return _error("the input is nested too deeply to be read; simplify it")
    except MemoryError:
        return _error("ran out of memory; use --method fast, a coarser mesh or fewer refinement levels")
    except OSError as exc:  # the file system refused: a user's matter, said in one line
        where = f"{exc.filename}: " if exc.filename else ""
        return _error(f"{where}{exc.strerror or exc}; check the path, its permissions and the free space")
    except Exception as exc:  # an internal error: say so in one line, traceback on request
        if os.environ.get("TRICHARGE_DEBUG"):
            raise
        click.echo(f"tricharge: internal error: {type(exc).__name__}: {printable(exc)} "
                   "(set TRICHARGE_DEBUG=1 for a traceback, and please report it)", err=True)
        return 1
    return 0


def run() -> None:
    """Console-script entry point."""
    sys.exit(main())
