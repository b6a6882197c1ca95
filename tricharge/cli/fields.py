"""Commands about fields and pictures: field, view, report."""

from __future__ import annotations

import os
from pathlib import Path

import click

from .. import __version__
from ..errors import OptionError
from ..terminal import Progress, Terminal, placement_notes
from ..units import parse_quantity
from .common import (FILE, TEXT_FILE, cad_options, cautions_option, cli, commit, json_option, load_model,
                     method_option, parse_pairs, parse_voltages, plan_outputs, quiet_option, unit_option, volts_option)

@cli.command()
@click.argument("input_path", metavar="INPUT", type=click.Path(path_type=Path))
@unit_option
@cad_options
@volts_option
@click.option("--withstand", multiple=True, metavar="MEDIUM=STRENGTH",
              help="Withstand field strength of a medium, e.g. air=3kV/mm, for margins (repeatable).")
@click.option("--top", type=click.IntRange(1, 100), default=5, show_default=True,
              help="Hot spots listed per conductor and interface.")
@click.option("--probe", multiple=True, metavar="X,Y,Z", help="Sample the field at this point (repeatable).")
@click.option("--line", "lines", multiple=True, metavar="X0,Y0,Z0:X1,Y1,Z1[:N]",
              help="Sample N points (default 101) along a line (repeatable).")
@click.option("--line-png", "line_png", type=FILE, help="Chart |E| along the first --line as a PNG.")
@click.option("--section", metavar="AXIS=VALUE", help="Sample a plane section, e.g. z=40, across the model.")
@click.option("--grid", type=click.IntRange(2, 1001), default=81, show_default=True,
              help="Points per side of the section.")
@click.option("--samples", "samples_path", type=TEXT_FILE,
              help="Write the samples (probes, lines, section) as CSV (- for standard output).")
@click.option("--vtk", "vtk_path", type=FILE, help="Write the section as a VTK image (.vti) for ParaView.")
@click.option("--vtu", "vtu_path", type=FILE,
              help="Write the panels with charge density and fields (.vtu) for ParaView.")
@cautions_option
@click.option("--refine-peaks", is_flag=True,
              help="Solve again with each part's peak region split finer and report how much the peak moved.")
@json_option
@method_option
@quiet_option
def field(input_path: Path, unit: str | None, volts, withstand, top: int, probe, lines, line_png, section, grid: int,
          samples_path: Path | None, vtk_path: Path | None, vtu_path: Path | None, cautions_from: str,
          refine_peaks: bool, json_path: Path | None, method: str, quiet: bool):
    """Surface fields and hot spots of INPUT with applied voltages (model file or --volts)."""
    from ..io import outputs
    from ..terminal import field_report
    from ..pipeline import applied_voltages, solve_field
    from ..sampling import check_sample_memory, sample_requests
    from ..units import parse_field_strength

    if line_png is not None and not lines:
        raise OptionError("--line-png charts a line: give --line too")
    if vtk_path is not None and section is None:
        raise OptionError("--vtk writes the plane section: give --section too, e.g. --section z=0")
    voltages = parse_voltages(volts)
    strengths = parse_pairs(withstand, parse_field_strength, "--withstand")
    threshold = parse_quantity(cautions_from, "V", what="--cautions-from")
    plan, targets = plan_outputs(input_path, {
        "json": ("--json", json_path, True), "samples": ("--samples", samples_path, True),
        "vtk": ("--vtk", vtk_path, False), "vtu": ("--vtu", vtu_path, False), "line_png": ("--line-png", line_png, False)})
    if line_png is not None:
        from ..extras import require

        require("viz", "--line-png")
    terminal = Terminal(quiet, plan.to_stdout)
    model = load_model(input_path, unit, plan, terminal, method=method)
    applied_voltages(model, voltages)  # names and values checked before the solve
    requests = sample_requests(model, probe, lines, section, grid)
    if requests and samples_path is None and vtk_path is None and line_png is None and json_path is None:
        raise OptionError("samples asked for but no output: add --samples FILE.csv (or --vtk for a section)")
    if requests:
        check_sample_memory(sum(len(points) for _, points, _ in requests), "--probe/--line/--section")
    progress = Progress(quiet)
    try:
        result = solve_field(model, voltages, method=method, top=top, withstand=strengths, progress=progress)
    finally:
        progress.close()
    terminal.say(field_report(result, model, source=input_path.name, version=__version__, cautions_from=threshold))
    rechecked = []
    if refine_peaks:
        from ..terminal import refinement_report
        from ..pipeline import refine_peaks as recheck

        rechecked = recheck(result, model, method=method)
        terminal.say("\n" + refinement_report(rechecked))
    values = [result.sample(points) for _, points, _ in requests]
    for note in placement_notes(requests, values, model):
        terminal.say(note)
    origin = outputs.provenance(model, command="field")

    chart = line_chart(model, requests, values, input_path, lines[0]) if line_png is not None else None

    def stage_all(stage):
        return outputs.stage_field(stage, targets, result, model, requests, values, rechecked, origin, chart)

    commit(plan, terminal, stage_all)


def line_chart(model, requests, values, input_path: Path, line: str) -> bytes:
    """PNG of |E| along the first line; points inside conductors or below the plane are a gap."""
    import numpy as np

    from ..bem.evaluation import FREE, NARROW_GAP, NEAR
    from ..units import metres_per
    from ..viz.plots import line_profile

    k = next(k for k, (kind, _, _) in enumerate(requests) if kind == "line")
    points, sample = requests[k][1], values[k]
    distance = np.linalg.norm(points - points[0], axis=1) / metres_per(model.unit)
    magnitude = np.where(np.isin(sample.where, (FREE, NEAR, NARROW_GAP)), np.linalg.norm(sample.field, axis=1), np.nan)
    return line_profile(distance, magnitude, unit=model.unit, title=f"{input_path.name}: field along {line}")


@cli.command()
@click.argument("input_path", metavar="INPUT", type=click.Path(path_type=Path))
@unit_option
@cad_options
@volts_option
@click.option("--png", "png_path", type=FILE, help="Write the picture here.")
@click.option("--quantity", type=click.Choice(["field", "charge"]), default="field", show_default=True,
              help="Colour by |E| or by free surface charge density.")
@click.option("--log", "log_scale", is_flag=True, help="Logarithmic colour scale.")
@click.option("--view", "view_name", type=click.Choice(["iso", "top", "front", "side"]), default="iso",
              show_default=True)
@click.option("--side", type=click.Choice(["outside", "inside"]), default="outside", show_default=True,
              help="Colour dielectric interfaces by the field on this side: where their normals point (the "
                   "model file's 'outside' medium) or behind them.")
@click.option("--interactive", is_flag=True, help="Open a window (needs a display) instead of a file.")
@method_option
@quiet_option
def view(input_path: Path, unit, volts, png_path, quantity, log_scale, view_name, side, interactive, method,
         quiet):
    """Picture of INPUT's surface field: a mesh or model file (solved with its voltages or
    --volts), or a .vtu written by 'field --vtu' (shown without solving again)."""
    from ..extras import require

    if interactive and not os.environ.get("DISPLAY") and png_path is None:
        raise OptionError("--interactive needs a display and none is set (DISPLAY); give --png FILE instead")
    if not interactive and png_path is None:
        raise OptionError("say where the picture goes: --png FILE (or --interactive with a display)")
    plan, targets = plan_outputs(input_path, {"png": ("--png", png_path, False)})
    require("viz", "tricharge view")
    terminal = Terminal(quiet)
    voltages = parse_voltages(volts)
    from ..io.saved import read_saved_field

    saved = read_saved_field(input_path) if input_path.suffix.lower() == ".vtu" else None
    if saved is not None:
        from ..viz import saved_picture

        picture = saved_picture(saved, quantity=quantity, log=log_scale, side=side)
    else:
        from ..pipeline import applied_voltages, solve_field
        from ..viz import field_picture

        model = load_model(input_path, unit, plan, terminal, method=method)
        applied_voltages(model, voltages)
        progress = Progress(quiet)
        try:
            solved = solve_field(model, voltages, method=method, progress=progress)
        finally:
            progress.close()
        picture, _ = field_picture(model, solved, quantity=quantity, log=log_scale, side=side)
    from ..viz.render import render_png, show

    if interactive and os.environ.get("DISPLAY"):
        show(picture, view=view_name)
    if targets["png"] is not None:
        commit(plan, terminal, lambda stage: stage.file(targets["png"],
                                                         lambda path: render_png(picture, path, view=view_name)))
    else:
        terminal.flush_warnings()


@cli.command()
@click.argument("input_path", metavar="INPUT", type=click.Path(path_type=Path))
@click.option("--html", "html_path", type=TEXT_FILE, required=True,
              help="Write the report here (one self-contained file; - for standard output).")
@unit_option
@cad_options
@volts_option
@click.option("--withstand", multiple=True, metavar="MEDIUM=STRENGTH",
              help="Withstand field strength of a medium, e.g. air=3kV/mm, for margins (repeatable).")
@cautions_option
@method_option
@click.option("--levels", type=click.IntRange(1, 4), default=1, show_default=True,
              help="Refinement levels for the capacitance: 2 or more add value ± estimate and a chart.")
@click.option("--json", "json_path", type=TEXT_FILE,
              help="Also save what the report shows as JSON; 'tricharge report FILE.json' makes the page again.")
@click.option("--vtu", "vtu_path", type=FILE, help="Also save the field solution (.vtu) the report's picture shows.")
@quiet_option
def report(input_path: Path, html_path: Path, unit, volts, withstand, cautions_from, method, levels: int, json_path,
           vtu_path, quiet):
    """A report of INPUT a designer can hand on: the matrix in both forms, checks and the
    error estimate first; then, when every conductor has a voltage, potentials, hot
    spots, margins, cautions and pictures. INPUT may also be a JSON saved by report --json
    (the page is made again without solving)."""
    from ..extras import require
    from ..units import parse_field_strength

    plan, targets = plan_outputs(input_path, {"html": ("--html", html_path, True), "json": ("--json", json_path, True),
                                              "vtu": ("--vtu", vtu_path, False)})
    require("viz", "tricharge report")
    terminal = Terminal(quiet, plan.to_stdout)
    if input_path.suffix.lower() == ".json":
        return _report_again(input_path, plan, targets, terminal)
    threshold = parse_quantity(cautions_from, "V", what="--cautions-from")
    strengths = parse_pairs(withstand, parse_field_strength, "--withstand")
    _report_from_model(input_path, unit, parse_voltages(volts), strengths, threshold, method, levels, plan, targets,
                       terminal)


def _report_from_model(input_path, unit, voltages, strengths, threshold, method, levels, plan, targets, terminal):
    from ..io.export import json_text, write_vtu
    from ..io.outputs import field_json_data, field_vtu_data, provenance
    from ..pipeline import applied_voltages, solve, solve_field
    from ..units import metres_per
    from ..viz import field_picture
    from ..viz.report import report_data, report_html, report_images

    model = load_model(input_path, unit, plan, terminal, method=method)
    driven = all(c.floating or c.voltage is not None or c.name in voltages for c in model.conductors)
    if driven or voltages:
        applied_voltages(model, voltages)
    if targets["vtu"] is not None and not driven:
        raise OptionError("--vtu saves the field solution: give every conductor a voltage (--volts NAME=VALUE)")
    progress = Progress(terminal.quiet)
    try:
        result = solve(model, method=method, levels=levels, progress=progress)
        field = solve_field(model, voltages, method=method, withstand=strengths, progress=progress) if driven else None
    finally:
        progress.close()
    data = report_data(model, result, None if field is None else field_json_data(field, [], []),
                       title=f"tricharge report: {input_path.name}", provenance=provenance(model, command="report"),
                       caution_volts=threshold, margins_asked=bool(strengths))
    if targets["vtu"] is not None:
        data["field_vtu"] = targets["vtu"].path.name
    page = report_html(data, report_images(data, None if field is None else field_picture(model, field)[0]))

    def stage_all(stage):
        stage.text(targets["html"], page)
        stage.text(targets["json"], json_text(data))
        if field is not None:
            stage.file(targets["vtu"], lambda path: write_vtu(path, model.vertices, model.triangles,
                                                              field_vtu_data(field),
                                                              {"metres_per_unit": metres_per(model.unit)}))

    commit(plan, terminal, stage_all)


def _report_again(input_path, plan, targets, terminal):
    """The page again from a JSON saved by ``report --json`` (and its field .vtu)."""
    from ..io.saved import read_report_data, read_saved_field
    from ..viz import saved_picture
    from ..viz.report import report_html, report_images

    if targets["json"] is not None or targets["vtu"] is not None:
        raise OptionError("a saved report is only drawn again: --json and --vtu apply when solving a model")
    data = read_report_data(input_path)
    picture = None
    if data.get("field_vtu"):
        saved_vtu = input_path.parent / data["field_vtu"]
        plan.add_inputs([saved_vtu])
        saved = read_saved_field(saved_vtu)
        names = [part["name"] for part in data["model"]["parts"]]
        spots = (data.get("field") or {}).get("hot_spots", [])
        picture = saved_picture(saved, parts=names, spots=spots) if saved is not None else None
    page = report_html(data, report_images(data, picture))
    commit(plan, terminal, lambda stage: stage.text(targets["html"], page))
