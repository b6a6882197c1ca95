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
from .errors import TrichargeError
from .units import LENGTH_UNITS

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
            unit = "it" if stage == "iterations" else "panels" if stage == "near field" else "step"
            self.bar = tqdm(total=None if stage == "iterations" else total, desc=stage, unit=unit, leave=False,
                            file=sys.stderr)
        self.bar.update(done - self.bar.n)

    def close(self) -> None:
        if self.bar is not None:
            self.bar.close()
            self.bar = None


def _solve_and_report(path: Path, unit: str | None, json_path: Path | None, quiet: bool, method: str = "auto",
                      tol: float = 1e-6) -> None:
    from .io.export import check_writable, write_json
    from .io.modelfile import load
    from .io.text import plural, result_report
    from .pipeline import solve

    if json_path is not None:
        check_writable(json_path)
    model = load(path, unit=unit)
    unit = model.unit
    _echo(f"read {path.name}: {plural(len(model.conductors), 'conductor')} ({', '.join(model.conductor_names)}), "
          f"{plural(model.n_panels, 'panel')}; solving ...", quiet)
    progress = _Progress(quiet)
    try:
        result = solve(model, method=method, tol=tol, progress=progress)
    finally:
        progress.close()
    _echo(result_report(result, source=path.name, unit=unit, version=__version__), quiet)
    if json_path is not None:
        write_json(json_path, result, input_file=str(path), unit=unit, tricharge_version=__version__)
        _echo(f"\nwrote {json_path}", quiet)


@click.group(context_settings={"help_option_names": ["-h", "--help"]})
@click.version_option(__version__, prog_name="tricharge")
def cli():
    """Capacitance matrices and surface fields of 3D conductors (boundary elements)."""


_unit_option = click.option("--unit", "unit", type=click.Choice(list(LENGTH_UNITS)), default=None,
                            help="Length unit of the mesh coordinates [default: m, or the model file's unit].")
_json_option = click.option("--json", "json_path", type=click.Path(dir_okay=False, path_type=Path),
                            help="Also write the result as JSON to this file.")
_quiet_option = click.option("--quiet", "-q", is_flag=True, help="Print nothing but errors.")
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
@_quiet_option
def solve(input_path: Path, unit: str | None, json_path: Path | None, method: str, tol: float, quiet: bool):
    """Capacitance matrix of the conductors in INPUT: a surface mesh (.msh .stl .obj .ply
    .vtk .vtu) or a model file (.toml) that says what the mesh surfaces are.

    In a bare mesh each Gmsh physical surface group is one conductor; without groups,
    each connected piece of surface is one, named c1, c2, ... .
    """
    _solve_and_report(input_path, unit, json_path, quiet, method, tol)


def _pairs(values, parse, what: str) -> dict:
    """NAME=VALUE options into a dict, values parsed by ``parse``."""
    from .errors import OptionError

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
@click.option("--volts", "volts", multiple=True, metavar="NAME=VALUE",
              help="Voltage of a conductor, e.g. hv=50kV (repeatable); overrides the model file.")
@click.option("--withstand", multiple=True, metavar="MEDIUM=STRENGTH",
              help="Withstand field strength of a medium, e.g. air=3kV/mm, for margins (repeatable).")
@click.option("--top", type=click.IntRange(1, 100), default=5, show_default=True,
              help="Hot spots listed per conductor and interface.")
@click.option("--probe", multiple=True, metavar="X,Y,Z", help="Sample the field at this point (repeatable).")
@click.option("--line", "lines", multiple=True, metavar="X0,Y0,Z0:X1,Y1,Z1[:N]",
              help="Sample N points (default 101) along a line (repeatable).")
@click.option("--section", metavar="AXIS=VALUE", help="Sample a plane section, e.g. z=40, across the model.")
@click.option("--grid", type=click.IntRange(2, 1001), default=81, show_default=True,
              help="Points per side of the section.")
@click.option("--samples", "samples_path", type=click.Path(dir_okay=False, path_type=Path),
              help="Write the samples (probes, lines, section) as CSV.")
@click.option("--vtk", "vtk_path", type=click.Path(dir_okay=False, path_type=Path),
              help="Write the section as a VTK image (.vti) for ParaView.")
@click.option("--refine-peaks", is_flag=True,
              help="Solve again with each part's peak region split finer and report how much the peak moved.")
@_json_option
@_method_option
@_quiet_option
def field(input_path: Path, unit: str | None, volts, withstand, top: int, probe, lines, section, grid: int,
          samples_path: Path | None, vtk_path: Path | None, refine_peaks: bool, json_path: Path | None, method: str,
          quiet: bool):
    """Surface fields and hot spots of INPUT with applied voltages (model file or --volts)."""
    from .errors import OptionError
    from .io.export import check_writable, write_atomic
    from .io.modelfile import load
    from .io.text import field_report
    from .pipeline import solve_field
    from .units import parse_field_strength, parse_quantity

    for path in (json_path, samples_path, vtk_path):
        if path is not None:
            check_writable(path)
    voltages = _pairs(volts, lambda v, what: parse_quantity(v, "V", what=what), "--volts")
    strengths = _pairs(withstand, parse_field_strength, "--withstand")
    if vtk_path is not None and section is None:
        raise OptionError("--vtk writes the plane section: give --section too, e.g. --section z=0")
    model = load(input_path, unit=unit)
    requests = _sample_requests(model, probe, lines, section, grid)
    if requests and samples_path is None and vtk_path is None:
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
        sampled = _write_samples(result, model, requests, samples_path, vtk_path, quiet)
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


def _write_samples(result, model, requests, samples_path, vtk_path, quiet) -> list[dict]:
    """Evaluate the requested samples, write the CSV and VTK files asked for, and return
    the samples as records for the JSON output (coordinates in metres)."""
    from .io.export import image_vti, samples_csv, write_atomic
    from .units import metres_per

    scale = metres_per(model.unit)
    kinds, points, potentials, fields = [], [], [], []
    for kind, pts, image in requests:
        phi, e = result.sample(pts)
        kinds += [kind] * len(pts)
        points.append(pts)
        potentials.append(phi)
        fields.append(e)
        if image is not None and vtk_path is not None:
            origin, spacing, dims = image
            spacing = np.where(dims > 1, spacing / scale, 1.0)
            write_atomic(vtk_path, image_vti(origin / scale, spacing, dims,
                                             {"potential_V": phi, "E_V_per_m": e,
                                              "E_magnitude_V_per_m": np.linalg.norm(e, axis=1)}))
            _echo(f"wrote {vtk_path}", quiet)
    points, potentials, fields = np.vstack(points), np.concatenate(potentials), np.vstack(fields)
    if samples_path is not None:
        write_atomic(samples_path, samples_csv(kinds, points, potentials, fields, model.unit, scale))
        _echo(f"wrote {samples_path}", quiet)
    return [{"kind": k, "point_m": p.tolist(), "potential_V": float(v), "field_V_per_m": e.tolist()}
            for k, p, v, e in zip(kinds, points, potentials, fields)]


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
