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
    from ..io.modelfile import load
    from ..pipeline import check_panel_memory

    name = printable(input_path.name)
    precheck = None if method is None else (lambda n_panels: check_panel_memory(n_panels, method, name))
    model = load(input_path, unit=unit, check=check, precheck=precheck)
    plan.add_inputs(model.inputs)
    for warning in model.warnings + (model.survey.warnings if check else ()):
        terminal.warn(warning)
    return model


def commit(plan, terminal: Terminal, stage_all) -> None:
    """Stage every output with ``stage_all(stage) -> notes``, write them together, then
    show the warnings kept and say what was written. Every command ends here."""
    if not plan.targets:
        terminal.flush_warnings()
        return
    with plan.transaction() as stage:
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
                              help="dense: stored matrix and LU (small models); fast: multipole and GMRES, memory "
                                   "growing linearly; auto: dense up to 3,000 panels (12,000 with dielectrics, a "
                                   "plane or floating parts).")
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
