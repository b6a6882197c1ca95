"""What every command shares: the command group, the common options, and the order of
work (check outputs, read, check outputs against every input, work, write together)."""

from __future__ import annotations

from pathlib import Path

import click

from .. import __version__
from ..errors import OptionError
from ..names import printable
from ..terminal import Terminal
from ..units import LENGTH_UNITS, parse_quantity


def plan_outputs(input_path: Path, outputs: dict):
    """Check every output path before any work. ``outputs`` maps a key to (option name,
    path or None, text?); returns the plan and the targets by key."""
    from ..io.files import Outputs

    plan = Outputs(inputs=[input_path])
    targets = {key: plan.add(option, path, text=text) for key, (option, path, text) in outputs.items()}
    return plan, targets


def load_model(input_path: Path, unit: str | None, plan, terminal: Terminal, *, method: str | None = None,
          check: bool = True):
    """Read the model, check the outputs against every file it names, keep its warnings
    (shown when the run has succeeded, see :func:`commit`). With ``method``, a solve that
    cannot fit in memory is refused as soon as the panels are counted, before the
    geometry checks."""
    from ..io.cad import meshing
    from ..io.modelfile import load
    from ..pipeline import check_panel_memory
    from ..terminal import Progress

    name = printable(input_path.name)
    precheck = None if method is None else (lambda n_panels: check_panel_memory(n_panels, method, name))
    settings = click.get_current_context().meta.get("cad")
    progress = Progress(terminal.quiet)
    try:
        with meshing(cad_meshing(settings, unit, progress)):
            model = load(input_path, unit=unit, check=check, precheck=precheck)
    finally:
        progress.close()
    _plan_mesh_out(plan, model, settings)
    plan.add_inputs(model.inputs)
    for warning in model.warnings + (model.survey.warnings if check else ()):
        terminal.warn(warning)
    return model


def commit(plan, terminal: Terminal, stage_all) -> None:
    """Stage every output with ``stage_all(stage) -> notes``, write them together, then
    show the warnings kept and say what was written. Every command ends here."""
    if not plan.targets and not plan.staged_early:
        terminal.flush_warnings()
        return
    with plan.transaction() as stage:
        for write in plan.staged_early:
            write(stage)
        notes = stage_all(stage) or []
    terminal.flush_warnings()
    terminal.say("")
    for path in plan.written:
        terminal.say(f"wrote {'standard output' if str(path) == '-' else printable(path)}")
    for note in notes:
        terminal.say(note)


@click.group(context_settings={"help_option_names": ["-h", "--help"]})
@click.version_option(__version__, prog_name="tricharge")
def cli():
    """Capacitance matrices and surface fields of 3D conductors (boundary elements)."""


unit_option = click.option("--unit", "unit", type=click.Choice(list(LENGTH_UNITS)), default=None,
                            help="Length unit of the mesh coordinates [default: m, or the model file's unit].")
json_option = click.option("--json", "json_path", type=click.Path(dir_okay=False, allow_dash=True, path_type=Path),
                            help="Also write the result as JSON to this file (- for standard output).")
quiet_option = click.option("--quiet", "-q", is_flag=True, help="Print nothing but errors and warnings.")
volts_option = click.option("--volts", "volts", multiple=True, metavar="NAME=VALUE",
                             help="Voltage of a conductor, e.g. hv=50kV (repeatable); overrides the model file.")
method_option = click.option("--method", type=click.Choice(["auto", "dense", "fast"]), default="auto",
                              show_default=True,
                              help="dense: stored matrix and LU (small models); fast: matrix-free and GMRES, memory "
                                   "growing linearly; auto: the one estimated cheaper for this model (dense also "
                                   "when under 2 s), said in the head line.")
tol_option = click.option("--tol", type=click.FloatRange(1e-12, 1e-2), default=1e-6, show_default=True,
                           help="Relative residual of the iterative (fast) solve.")
cautions_option = click.option(
    "--cautions-from", "cautions_from", metavar="VOLTS", default="1kV", show_default=True,
    help="Show the high-voltage cautions when the highest potential reaches this (always with --withstand).")
FILE = click.Path(dir_okay=False, path_type=Path)
TEXT_FILE = click.Path(dir_okay=False, allow_dash=True, path_type=Path)


def parse_reductions(merge, grounded, reference) -> dict:
    nets = {}
    for item in merge:
        net, sep, members = item.partition("=")
        if not sep or not net.strip() or not members.strip():
            raise OptionError(f"--merge {printable(item)!r}: write NET=A,B")
        nets[net.strip()] = [m.strip() for m in members.split(",")]
    return dict(nets=nets, grounded=list(grounded), reference={"plane": "ground plane"}.get(reference, reference))


def parse_pairs(values, parse, what: str) -> dict:
    """NAME=VALUE options into a dict, values parsed by ``parse``."""
    out = {}
    for item in values:
        name, sep, value = item.partition("=")
        if not sep or not name.strip():
            raise OptionError(f"{what} {printable(item)!r}: write NAME=VALUE, e.g. hv=12kV")
        out[name.strip()] = parse(value, what=f"{what} {printable(name.strip())}")
    return out


def parse_voltages(volts) -> dict:
    return parse_pairs(volts, lambda v, what: parse_quantity(v, "V", what=what), "--volts")


def _keep_cad(ctx, param, value):
    ctx.meta.setdefault("cad", {})[param.name] = value
    return value


def cad_options(command):
    """Options for meshing CAD input (STEP, IGES, BREP), kept in the click context; a
    model file's [meshing] table fills in those not given."""
    def option(*names, **kw):
        return click.option(*names, expose_value=False, callback=_keep_cad, **kw)

    options = [
        option("--panel-size", "panel_size", metavar="LENGTH",
               help="CAD input: target panel size, e.g. 0.2mm (a number is in --unit) [default: a twentieth of "
                    "the model's size]."),
        option("--per-radian", "per_radian", type=click.FloatRange(0.1, 100), metavar="N",
               help="CAD input: panels per radian where surfaces curve [default: 2]."),
        option("--across-gaps", "across_gaps", type=click.IntRange(0, 100), metavar="N",
               help="CAD input: at least N panels across every gap between two parts (0: off) [default: 3]."),
        option("--edge-grading", "edge_grading", type=click.FloatRange(0.01, 1.0), metavar="F",
               help="CAD input: panels on sharp edges F times the panel size (1: off) [default: 0.3]."),
        option("--cad-unit", "cad_unit", type=click.Choice(list(LENGTH_UNITS)),
               help="CAD input: the unit the file's numbers are really in, replacing the one a STEP or IGES "
                    "file declares (for BREP, as --unit)."),
        option("--mesh-out", "mesh_out", type=click.Path(dir_okay=False, path_type=Path),
               help="CAD input: also write the mesh made from it (.msh, names as physical groups)."),
    ]
    for one in reversed(options):
        command = one(command)
    return command


def cad_meshing(settings: dict | None, unit: str | None, progress=None):
    """The :class:`~tricharge.io.cadmesh.Meshing` of the CAD options (lengths to metres)."""
    from ..io.cadmesh import Meshing, parse_length

    settings = settings or {}
    size = settings.get("panel_size")
    if size is not None:
        size = parse_length(size, unit or "m", "--panel-size")
    return Meshing(size, settings.get("per_radian"), settings.get("across_gaps"), settings.get("edge_grading"),
                   progress=progress, unit=unit, cad_unit=settings.get("cad_unit"))


def _plan_mesh_out(plan, model, settings) -> None:
    """The CAD options need CAD input (given with a mesh they would be ignored); --mesh-out
    is checked now (it must not name an input) and written with the run's outputs."""
    given = [f"--{name.replace('_', '-')}" for name, value in (settings or {}).items() if value is not None]
    if given and model.project is None:
        raise OptionError(f"{' and '.join(given)} {'is' if len(given) == 1 else 'are'} for CAD input (.step .stp .iges "
                          f".igs .brep); this input is a mesh already: leave {'it' if len(given) == 1 else 'them'} out")
    path = (settings or {}).get("mesh_out")
    if path is None:
        return
    if path.suffix.lower() != ".msh":
        raise OptionError(f"--mesh-out {printable(path)}: write a Gmsh .msh file (end the name with .msh)")
    from ..io.export import write_gmsh

    target = plan.add("--mesh-out", path, text=False)
    plan.staged_early.append(lambda stage: stage.file(target, lambda out: write_gmsh(out, model)))
