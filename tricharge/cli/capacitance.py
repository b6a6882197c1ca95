"""Commands about the capacitance matrix: solve, inspect, demo."""

from __future__ import annotations

from importlib import resources
from pathlib import Path

import click

from .. import __version__
from ..errors import OptionError
from ..names import printable
from ..terminal import Progress, Terminal
from ..units import parse_fraction
from .common import (FILE, TEXT_FILE, cad_options, cli, commit, json_option, load_model, method_option,
                     parse_reductions, plan_outputs, quiet_option, tol_option, unit_option)

#: Built-in demos (our own invented scenarios), files in tricharge/data/ (links to meshes/).
DEMOS = {"hv": "demo_hv.toml", "header": "demo_header.msh", "package": "demo_package.toml",
         "bushing": "demo_bushing.toml"}
#: Demos solved with a refinement study (CAD input: new vertices go onto the CAD surfaces).
DEMO_STUDIES = {"bushing": dict(levels=2)}
DEFAULT_DEMO = "hv"


@cli.command()
@click.argument("input_path", metavar="INPUT", type=click.Path(path_type=Path))
@unit_option
@cad_options
@json_option
@method_option
@tol_option
@click.option("--merge", multiple=True, metavar="NET=A,B,...", help="Tie conductors into one net (repeatable).")
@click.option("--ground", "grounded", multiple=True, metavar="NAME",
              help="Hold a conductor at 0 V as part of the reference (repeatable).")
@click.option("--reference", metavar="infinity|plane|NAME",
              help="The reference node of the mutual form: infinity, the ground plane, or a conductor.")
@click.option("--spice", "spice_path", type=TEXT_FILE, help="Write a SPICE subcircuit (.subckt) of the matrix.")
@click.option("--drop-below", type=click.FloatRange(0.0, 1.0), default=0.0, show_default=True,
              help="In the SPICE file, leave out couplings below this fraction of their row's total.")
@click.option("--csv", "csv_path", type=TEXT_FILE, help="Write the matrix as CSV (conductor names as header).")
@click.option("--npz", "npz_path", type=FILE, help="Write the matrices (both forms) and names as a NumPy .npz.")
@click.option("--form", type=click.Choice(["maxwell", "mutual"]), default="maxwell", show_default=True,
              help="Which form the CSV holds.")
@click.option("--vtu", "vtu_path", type=FILE,
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
@click.option("--sensitivity", "with_sensitivity", is_flag=True,
              help="Also compute how every capacitance changes when each conductor surface moves (from the solved "
                   "charges, no extra solve); the largest are printed, all go to the JSON.")
@click.option("--study-png", "study_png", type=FILE,
              help="Chart the refinement study (needs --levels or --accuracy) as a PNG.")
@quiet_option
def solve(input_path: Path, unit: str | None, json_path: Path | None, method: str, tol: float, merge, grounded,
          reference, spice_path, drop_below, csv_path, npz_path, form, vtu_path, levels: int, accuracy,
          max_panels: int, with_sensitivity: bool, study_png: Path | None, quiet: bool):
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
    plan, targets = plan_outputs(input_path, {
        "json": ("--json", json_path, True), "spice": ("--spice", spice_path, True),
        "csv": ("--csv", csv_path, True), "npz": ("--npz", npz_path, False), "vtu": ("--vtu", vtu_path, False),
        "study_png": ("--study-png", study_png, False)})
    if study_png is not None:
        from ..extras import require

        require("viz", "--study-png")
    solve_and_report(input_path, unit, plan, targets, Terminal(quiet, plan.to_stdout), method=method, tol=tol,
                      reductions=parse_reductions(merge, grounded, reference), form=form, drop_below=drop_below,
                      study=study, with_sensitivity=with_sensitivity)


def solve_and_report(input_path: Path, unit, plan, targets, terminal: Terminal, *, method="auto", tol=1e-6,
                      reductions=None, form="maxwell", drop_below=0.0, study=None, with_sensitivity=False) -> None:
    from ..io import outputs
    from ..terminal import plural, result_report
    from ..pipeline import check_reductions, solve

    model = load_model(input_path, unit, plan, terminal, method=method)
    reductions = reductions or dict(nets={}, grounded=[], reference=None)
    check_reductions(model, **reductions)
    terminal.say(f"read {printable(input_path.name)}: {plural(len(model.conductors), 'conductor')} "
                 f"({printable(', '.join(model.conductor_names))}), {plural(model.n_panels, 'panel')}; solving ...")
    progress = Progress(terminal.quiet)
    try:
        full = solve(model, method=method, tol=tol, progress=progress, **(study or {}))
    finally:
        progress.close()
    result = full
    if reductions["nets"] or reductions["grounded"] or reductions["reference"]:
        result = full.reduced(**reductions)
    terminal.say(result_report(result, source=input_path.name, unit=model.unit, version=__version__,
                               meshing_seconds=getattr(model.project, "meshing_seconds", None)))
    origin = outputs.provenance(model, command="solve")
    if with_sensitivity:
        from ..pipeline import sensitivity
        from ..terminal import sensitivity_report

        sens = sensitivity(model, full).reduced(full.conductors, **reductions)
        terminal.say("\n" + sensitivity_report(sens, result, model))
        origin = dict(origin, sensitivity=sens.to_dict())

    def stage_all(stage):
        notes = outputs.stage_solve(stage, targets, result, full, model, origin, form=form, drop_below=drop_below)
        if targets.get("study_png") is not None:
            from ..viz.plots import convergence_chart

            stage.bytes(targets["study_png"], convergence_chart(full.conductors, full.study, full.capacitance,
                                                                full.error_estimate))
        return notes

    commit(plan, terminal, stage_all)


@cli.command()
@click.argument("input_path", metavar="INPUT", type=click.Path(path_type=Path))
@unit_option
@cad_options
def inspect(input_path: Path, unit: str | None):
    """Show what tricharge makes of INPUT (a mesh or a .toml model file): parts, sizes, problems.

    Exit status 2 when the model has errors that stop a solve.
    """
    from ..errors import MeshError
    from ..io.files import Outputs
    from ..terminal import survey_report

    plan = Outputs(inputs=[input_path])
    model = load_model(input_path, unit, plan, Terminal(True), check=False)
    click.echo(survey_report(model, version=__version__))
    if model.problems:
        more = f" (and {len(model.problems) - 1} more, listed above)" if len(model.problems) > 1 else ""
        raise MeshError(model.problems[0] + more)
    commit(plan, Terminal(False), lambda stage: [])  # --mesh-out, if given


@cli.command()
@click.argument("name", type=click.Choice(list(DEMOS)), default=DEFAULT_DEMO)
@json_option
@quiet_option
@click.option("--inspect", "inspect_only", is_flag=True, help="Show the model summary instead of solving.")
def demo(name: str, json_path: Path | None, quiet: bool, inspect_only: bool):
    """Solve a built-in demo NAME: hv (default), header or package.

    \b
    hv       a high-voltage rod with a grading ring facing a grounded disk, in air
    header   a three-pin header over a shield plate, homogeneous medium
    package  a four-lead package in mold compound over a ground plane
    bushing  a rod with a shield ring through a grounded plate in an epoxy collar,
             meshed from CAD (STEP) and solved with an error estimate (cad extra)
    """
    with resources.as_file(resources.files("tricharge") / "data" / DEMOS[name]) as path:
        if inspect_only:
            inspect.callback(path, "mm" if path.suffix == ".msh" else None)
            return
        plan, targets = plan_outputs(path, {"json": ("--json", json_path, True)})
        solve_and_report(path, "mm" if path.suffix == ".msh" else None, plan, targets,
                          Terminal(quiet, plan.to_stdout), study=DEMO_STUDIES.get(name))
