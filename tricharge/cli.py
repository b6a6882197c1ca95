"""Command line: parse arguments, call the library, report. No numerics here.

Exit status: 0 success, 2 bad input (one line on stderr), 1 internal error.
"""

from __future__ import annotations

import os
import sys
from importlib import resources
from pathlib import Path

import click
import numpy as np

from . import __version__
from .errors import OptionError, TrichargeError
from .units import LENGTH_UNITS, parse_fraction, parse_quantity

#: Built-in demos (our own invented scenarios), files in tricharge/data/ (links to meshes/).
DEMOS = {"hv": "demo_hv.toml", "header": "demo_header.msh", "package": "demo_package.toml"}
DEFAULT_DEMO = "hv"


def _echo(text: str, quiet: bool) -> None:
    if not quiet:
        click.echo(text)


class _Progress:
    """Progress bars on stderr for long solves; silent when quiet or not a terminal."""

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


def _solve_and_report(path: Path, unit: str | None, json_path: Path | None, quiet: bool, method: str = "auto",
                      tol: float = 1e-6, reductions: dict | None = None, outputs: dict | None = None,
                      form: str = "maxwell", drop_below: float = 0.0, study: dict | None = None) -> None:
    from .io import outputs as outputs_module
    from .io.export import check_writable, write_json
    from .io.modelfile import load
    from .io.text import plural, result_report
    from .pipeline import solve

    outputs = {k: v for k, v in (outputs or {}).items() if v is not None}
    for target in [json_path, *outputs.values()]:
        if target is not None:
            check_writable(target)
    model = load(path, unit=unit)
    unit = model.unit
    _echo(f"read {path.name}: {plural(len(model.conductors), 'conductor')} ({', '.join(model.conductor_names)}), "
          f"{plural(model.n_panels, 'panel')}; solving ...", quiet)
    progress = _Progress(quiet)
    try:
        result = solve(model, method=method, tol=tol, progress=progress, **(study or {}))
    finally:
        progress.close()
    full = result
    if reductions and (reductions["nets"] or reductions["grounded"] or reductions["reference"]):
        try:
            result = result.reduced(**reductions)
        except ValueError as exc:
            raise OptionError(f"{path}: {exc}") from None
    _echo(result_report(result, source=path.name, unit=unit, version=__version__), quiet)
    provenance = outputs_module.provenance(path, unit, result)
    if json_path is not None:
        write_json(json_path, result, **provenance)
        _echo(f"\nwrote {json_path}", quiet)
    chart = outputs.pop("study_png", None)
    outputs_module.write_matrix_outputs(result, full, model, outputs, form, drop_below, provenance,
                                        lambda text: _echo(text, quiet))
    if chart is not None:
        from .io.export import write_bytes_atomic
        from .viz.plots import convergence_chart

        write_bytes_atomic(chart, convergence_chart(full.conductors, full.study, full.capacitance,
                                                    full.error_estimate))
        _echo(f"wrote {chart}", quiet)


@click.group(context_settings={"help_option_names": ["-h", "--help"]})
@click.version_option(__version__, prog_name="tricharge")
def cli():
    """Capacitance matrices and surface fields of 3D conductors (boundary elements)."""


_unit_option = click.option("--unit", "unit", type=click.Choice(list(LENGTH_UNITS)), default=None,
                            help="Length unit of the mesh coordinates [default: m, or the model file's unit].")
_json_option = click.option("--json", "json_path", type=click.Path(dir_okay=False, path_type=Path),
                            help="Also write the result as JSON to this file.")
_quiet_option = click.option("--quiet", "-q", is_flag=True, help="Print nothing but errors.")
_volts_option = click.option("--volts", "volts", multiple=True, metavar="NAME=VALUE",
                             help="Voltage of a conductor, e.g. hv=50kV (repeatable); overrides the model file.")
_method_option = click.option("--method", type=click.Choice(["auto", "dense", "fast"]), default="auto",
                              show_default=True,
                              help="dense: stored matrix and LU (small models); fast: multipole and GMRES, memory "
                                   "growing linearly; auto: dense up to 3,000 panels.")
_tol_option = click.option("--tol", type=click.FloatRange(1e-12, 1e-2), default=1e-6, show_default=True,
                           help="Relative residual of the iterative (fast) solve.")


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
@click.option("--spice", "spice_path", type=click.Path(dir_okay=False, path_type=Path),
              help="Write a SPICE subcircuit (.subckt) of the matrix.")
@click.option("--drop-below", type=click.FloatRange(0.0, 1.0), default=0.0, show_default=True,
              help="In the SPICE file, leave out couplings below this fraction of their row's total.")
@click.option("--csv", "csv_path", type=click.Path(dir_okay=False, path_type=Path),
              help="Write the matrix as CSV (conductor names as header).")
@click.option("--npz", "npz_path", type=click.Path(dir_okay=False, path_type=Path),
              help="Write the matrices (both forms) and names as a NumPy .npz.")
@click.option("--form", type=click.Choice(["maxwell", "mutual"]), default="maxwell", show_default=True,
              help="Which form the CSV holds.")
@click.option("--vtu", "vtu_path", type=click.Path(dir_okay=False, path_type=Path),
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
@click.option("--study-png", "study_png", type=click.Path(dir_okay=False, path_type=Path),
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
    outputs = dict(spice=spice_path, csv=csv_path, npz=npz_path, vtu=vtu_path, study_png=study_png)
    if study_png is not None and levels == 1 and accuracy is None:
        raise OptionError("--study-png charts a refinement study: add --levels 3 or --accuracy 0.5%")
    nets = {}
    for item in merge:
        net, sep, members = item.partition("=")
        if not sep or not net.strip() or not members.strip():
            raise OptionError(f"--merge {item!r}: write NET=A,B")
        nets[net.strip()] = [m.strip() for m in members.split(",")]
    reductions = dict(nets=nets, grounded=list(grounded),
                      reference={"plane": "ground plane"}.get(reference, reference))
    if accuracy is not None and levels > 1:
        raise OptionError("--levels and --accuracy are two ways to estimate the error; give one of them")
    study = dict(levels=levels)
    if accuracy is not None:
        study = dict(accuracy=parse_fraction(accuracy, what="--accuracy"), max_panels=max_panels)
    _solve_and_report(input_path, unit, json_path, quiet, method, tol, reductions=reductions, outputs=outputs,
                      form=form, drop_below=drop_below, study=study)


def _pairs(values, parse, what: str) -> dict:
    """NAME=VALUE options into a dict, values parsed by ``parse``."""
    out = {}
    for item in values:
        name, sep, value = item.partition("=")
        if not sep or not name.strip():
            raise OptionError(f"{what} {item!r}: write NAME=VALUE, e.g. hv=12kV")
        out[name.strip()] = parse(value, what=f"{what} {name.strip()}")
    return out


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
@click.option("--line-png", "line_png", type=click.Path(dir_okay=False, path_type=Path),
              help="Chart |E| along the first --line as a PNG.")
@click.option("--section", metavar="AXIS=VALUE", help="Sample a plane section, e.g. z=40, across the model.")
@click.option("--grid", type=click.IntRange(2, 1001), default=81, show_default=True,
              help="Points per side of the section.")
@click.option("--samples", "samples_path", type=click.Path(dir_okay=False, path_type=Path),
              help="Write the samples (probes, lines, section) as CSV.")
@click.option("--vtk", "vtk_path", type=click.Path(dir_okay=False, path_type=Path),
              help="Write the section as a VTK image (.vti) for ParaView.")
@click.option("--vtu", "vtu_path", type=click.Path(dir_okay=False, path_type=Path),
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
    from .errors import OptionError
    from .io.export import check_writable, write_atomic
    from .io.modelfile import load
    from .io.text import field_report
    from .pipeline import solve_field
    from .units import parse_field_strength, parse_quantity

    if line_png is not None and not lines:
        raise OptionError("--line-png charts a line: give --line too")
    for path in (json_path, samples_path, vtk_path, vtu_path, line_png):
        if path is not None:
            check_writable(path)
    voltages = _pairs(volts, lambda v, what: parse_quantity(v, "V", what=what), "--volts")
    strengths = _pairs(withstand, parse_field_strength, "--withstand")
    if vtk_path is not None and section is None:
        raise OptionError("--vtk writes the plane section: give --section too, e.g. --section z=0")
    model = load(input_path, unit=unit)
    requests = _sample_requests(model, probe, lines, section, grid)
    if requests and samples_path is None and vtk_path is None and line_png is None:
        raise OptionError("samples asked for but no output: add --samples FILE.csv (or --vtk for a section)")
    progress = _Progress(quiet)
    try:
        result = solve_field(model, voltages, method=method, top=top, withstand=strengths, progress=progress)
    finally:
        progress.close()
    _echo(field_report(result, model, source=input_path.name, version=__version__), quiet)
    rechecked, sampled = [], []
    if refine_peaks:
        from .io.text import refinement_report
        from .pipeline import refine_peaks as recheck

        rechecked = recheck(result, model, method=method)
        _echo("\n" + refinement_report(rechecked), quiet)
    if requests:
        from .io.outputs import write_samples

        sampled = write_samples(result, model, requests, samples_path, vtk_path, lambda text: _echo(text, quiet))
    if line_png is not None:
        from .io.export import write_bytes_atomic
        from .units import metres_per
        from .viz.plots import line_profile

        points = next(pts for kind, pts, _ in requests if kind == "line")
        _, e = result.sample(points)
        distance = np.linalg.norm(points - points[0], axis=1) / metres_per(model.unit)
        write_bytes_atomic(line_png, line_profile(distance, np.linalg.norm(e, axis=1), unit=model.unit,
                                                  title=f"{input_path.name}: field along {lines[0]}"))
        _echo(f"wrote {line_png}", quiet)
    if vtu_path is not None:
        from .io.export import write_vtu
        from .pipeline import _part_groups

        surface = result.surface
        write_vtu(vtu_path, model.vertices, model.triangles, {
            "part": _part_groups(model), "area_m2": result.problem.panels.areas,
            "sigma_total_C_per_m2": result.sigma, "sigma_free_C_per_m2": surface.free_charge_density,
            "E_normal_outside_V_per_m": surface.outside, "E_normal_inside_V_per_m": surface.inside,
            "E_tangential_V_per_m": surface.tangential, "E_magnitude_V_per_m": surface.magnitude})
        _echo(f"wrote {vtu_path} (part ids: {', '.join(f'{k} {p}' for k, p in enumerate(result.parts))})", quiet)
    if json_path is not None:
        import json

        data = {"conductors": list(result.conductors), "potentials_V": result.potentials.tolist(),
                "free_charge_C": result.free_charge.tolist(), "unit": model.unit, "method": result.method,
                "hot_spots": [{"part": result.parts[s.group], "rank": s.rank, "field_V_per_m": s.field,
                               "location_m": list(s.location), "panel_size_m": s.panel_size, "sharp": s.sharp,
                               "sharp_angle_deg": s.sharp_angle} for s in result.spots],
                "utilisation": result.utilisation, "gap_m": result.gap,
                "margins": [{"medium": m, "peak_V_per_m": e, "withstand_V_per_m": w} for m, e, w in result.margins],
                "peak_refinement": [{"part": p, "before_V_per_m": a, "after_V_per_m": b} for p, a, b in rechecked],
                "samples": sampled,
                "input_file": str(input_path), "tricharge_version": __version__}
        write_atomic(json_path, json.dumps(data, indent=2) + "\n")
        _echo(f"\nwrote {json_path}", quiet)


def _numbers(text: str, count: int, what: str) -> list[float]:
    from .errors import OptionError

    try:
        values = [float(x) for x in text.split(",")]
    except ValueError:
        values = []
    if len(values) != count:
        raise OptionError(f"{what} {text!r}: expected {count} numbers separated by commas")
    return values


def _sample_requests(model, probes, lines, section, grid) -> list:
    """[(kind, points (M, 3) metres, image geometry or None)] from the sampling options."""
    from .errors import OptionError
    from .pipeline import line_points, section_grid
    from .units import metres_per

    scale = metres_per(model.unit)
    requests = []
    if probes:
        requests.append(("probe", np.array([_numbers(p, 3, "--probe") for p in probes]) * scale, None))
    for text in lines:
        parts = text.split(":")
        if len(parts) not in (2, 3):
            raise OptionError(f"--line {text!r}: write X0,Y0,Z0:X1,Y1,Z1 or X0,Y0,Z0:X1,Y1,Z1:N")
        count = int(_numbers(parts[2], 1, "--line count")[0]) if len(parts) == 3 else 101
        if count < 2:
            raise OptionError(f"--line {text!r}: give at least 2 points")
        start, end = (np.array(_numbers(p, 3, "--line")) * scale for p in parts[:2])
        requests.append(("line", line_points(start, end, count), None))
    if section is not None:
        axis, sep, value = section.partition("=")
        if not sep or axis.strip() not in ("x", "y", "z"):
            raise OptionError(f"--section {section!r}: write AXIS=VALUE with AXIS x, y or z, e.g. z=40")
        points, origin, spacing, dims = section_grid(model, axis.strip(), _numbers(value, 1, "--section")[0] * scale,
                                                     grid)
        requests.append(("section", points, (origin, spacing, dims)))
    return requests


@cli.command()
@click.argument("input_path", metavar="INPUT", type=click.Path(path_type=Path))
@_unit_option
@_volts_option
@click.option("--png", "png_path", type=click.Path(dir_okay=False, path_type=Path), help="Write the picture here.")
@click.option("--quantity", type=click.Choice(["field", "charge"]), default="field", show_default=True,
              help="Colour by |E| or by free surface charge density.")
@click.option("--log", "log_scale", is_flag=True, help="Logarithmic colour scale.")
@click.option("--view", "view_name", type=click.Choice(["iso", "top", "front", "side"]), default="iso",
              show_default=True)
@click.option("--interactive", is_flag=True, help="Open a window (needs a display) instead of a file.")
@_method_option
def view(input_path: Path, unit, volts, png_path, quantity, log_scale, view_name, interactive, method):
    """Picture of INPUT's surface field: a mesh or model file (solved with its voltages or
    --volts), or a .vtu written by 'field --vtu' (shown without solving again)."""
    from .io.export import check_writable
    from .viz.render import render_png, show

    if not interactive and png_path is None:
        raise OptionError("say where the picture goes: --png FILE (or --interactive with a display)")
    if png_path is not None:
        check_writable(png_path)
    if input_path.suffix.lower() == ".vtu" and _is_saved_field(input_path):
        picture = _saved_picture(input_path, quantity, log_scale)
    else:
        from .io.modelfile import load
        from .pipeline import solve_field
        from .viz import field_picture

        model = load(input_path, unit=unit)
        voltages = _pairs(volts, lambda v, what: parse_quantity(v, "V", what=what), "--volts")
        picture, _ = field_picture(model, solve_field(model, voltages, method=method), quantity=quantity,
                                   log=log_scale)
    if interactive and os.environ.get("DISPLAY"):
        show(picture, view=view_name)
    else:
        if interactive:
            click.echo("no display: writing the picture off-screen instead", err=True)
        if png_path is None:
            raise OptionError("no display for --interactive: give --png FILE")
        render_png(picture, png_path, view=view_name)
        click.echo(f"wrote {png_path}")


def _is_saved_field(path: Path) -> bool:
    import meshio

    try:
        return "E_magnitude_V_per_m" in meshio.read(path).cell_data
    except Exception:
        return False


def _saved_picture(path: Path, quantity: str, log_scale: bool):
    import meshio

    from .viz.render import Picture

    mesh = meshio.read(path)
    data = {k: v[0] for k, v in mesh.cell_data.items()}
    if quantity == "field":
        values, label = data["E_magnitude_V_per_m"] / 1e6, "E (kV/mm)"
    else:
        values, label = data["sigma_free_C_per_m2"] * 1e6, "charge (uC/m2)"
    return Picture(mesh.points * 1e3, mesh.cells_dict["triangle"], values, f"{path.name} (mm): {label}", label,
                   log_scale)


@cli.command()
@click.argument("input_path", metavar="INPUT", type=click.Path(path_type=Path))
@click.option("--html", "html_path", type=click.Path(dir_okay=False, path_type=Path), required=True,
              help="Write the report here (one self-contained file).")
@_unit_option
@_volts_option
@_method_option
@click.option("--levels", type=click.IntRange(1, 4), default=1, show_default=True,
              help="Refinement levels for the capacitance: 2 or more add value ± estimate and a chart.")
@_quiet_option
def report(input_path: Path, html_path: Path, unit, volts, method, levels: int, quiet):
    """A report of INPUT a designer can hand on: model, capacitance matrix in both forms,
    checks, and, when every conductor has a voltage, hot spots with cautions and pictures."""
    from .io.export import check_writable, write_atomic
    from .io.modelfile import load
    from .io.outputs import provenance
    from .io.text import CAUTIONS
    from .pipeline import solve, solve_field
    from .viz import field_picture
    from .viz.plots import convergence_chart, matrix_heatmap
    from .viz.render import render_png
    from .viz.report import report_html

    check_writable(html_path)
    model = load(input_path, unit=unit)
    voltages = _pairs(volts, lambda v, what: parse_quantity(v, "V", what=what), "--volts")
    result = solve(model, method=method, levels=levels)
    field_result = None
    if all(c.floating or c.voltage is not None or c.name in voltages for c in model.conductors):
        field_result = solve_field(model, voltages, method=method)
    images = [("Mutual capacitances", matrix_heatmap(result.conductors, result.mutual, reference=result.reference))]
    if result.study is not None:
        images.append(("Refinement study: self capacitances per level against the extrapolated value",
                       convergence_chart(result.conductors, result.study, result.capacitance, result.error_estimate)))
    if field_result is not None:
        import tempfile

        picture, _ = field_picture(model, field_result)
        with tempfile.TemporaryDirectory() as folder:
            png = Path(folder) / "field.png"
            render_png(picture, png)
            images.append(("Surface field with the applied voltages; numbered markers are the hot spots",
                           png.read_bytes()))
    survey = model.survey
    rows = [[p.name, p.kind, p.panels, f"{p.area:.4g} m2", p.detail] for p in survey.parts]
    summary = [f"{len(model.conductors)} conductors, {len(model.interfaces)} interfaces, {model.n_panels} panels, "
               f"unit {model.unit}", f"solved by the {result.method} method in {result.solve_time:.1f} s"
               + (f" ({result.study['kind']} refinement study, panels "
                  + " -> ".join(f"{n:,}" for n in result.study["panels_per_level"]) + ")" if result.study else
                  "; discretisation error not estimated (--levels 3 adds it)"),
               f"reference of the mutual form: {result.reference}"]
    page = report_html(title=f"tricharge report: {input_path.name}", summary=summary, model_rows=rows, result=result,
                       field=field_result, images=images, cautions=CAUTIONS,
                       provenance=provenance(input_path, model.unit, result))
    write_atomic(html_path, page)
    _echo(f"wrote {html_path}", quiet)


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
            inspect.callback(path, None)
        else:
            _solve_and_report(path, "mm" if path.suffix == ".msh" else None, json_path, quiet)


def main(argv: list[str] | None = None) -> int:
    """Run the command line in-process and return the exit status (for tests and ``run``)."""
    try:
        cli.main(args=argv, prog_name="tricharge", standalone_mode=False)
    except click.exceptions.Exit as exc:
        return exc.exit_code
    except click.exceptions.Abort:
        click.echo("tricharge: interrupted; no output was written", err=True)
        return 130
    except click.exceptions.NoArgsIsHelpError as exc:
        click.echo(exc.format_message())
        return 2
    except click.ClickException as exc:
        click.echo(f"tricharge: error: {exc.format_message()}", err=True)
        return 2
    except TrichargeError as exc:
        click.echo(f"tricharge: error: {exc}", err=True)
        return 2
    except KeyboardInterrupt:
        click.echo("tricharge: interrupted; no output was written", err=True)
        return 130
    except Exception as exc:  # an internal error: say so in one line, traceback on request
        if os.environ.get("TRICHARGE_DEBUG"):
            raise
        click.echo(f"tricharge: internal error: {type(exc).__name__}: {exc} "
                   "(set TRICHARGE_DEBUG=1 for a traceback, and please report it)", err=True)
        return 1
    return 0


def run() -> None:
    """Console-script entry point."""
    sys.exit(main())
