"""The output files of a solve or a field run, with one provenance block for all of them.

Each ``stage_*`` function stages its files into a transaction of :mod:`.files` (nothing
appears until every output of the run is ready) and returns the notes the command line
prints once they are written.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np

from .. import __version__

#: Version of the JSON layout. 1: the first releases (keys at the top level, no shared
#: provenance); 2: solve and field JSON share :func:`provenance`, which records the media
#: and units. Keys are only ever added, never renamed.
FORMAT_VERSION = 2

#: Units of the numbers in every JSON file (lengths in metres whatever the input's unit).
JSON_UNITS = {"length": "m", "capacitance": "F", "charge": "C", "potential": "V", "field": "V/m",
              "charge_density": "C/m^2"}


def _sha256(path) -> str | None:
    import hashlib

    try:
        digest = hashlib.sha256()
        with open(path, "rb") as handle:
            for block in iter(lambda: handle.read(1 << 20), b""):
                digest.update(block)
        return digest.hexdigest()
    except OSError:
        return None


def provenance(model, *, command: str) -> dict:
    """Where a result came from: the JSON layout version, tool version and command, every
    input file with its SHA-256, the user's length unit, the media and ground plane used,
    the units of the JSON's numbers, and the date (UTC)."""
    import datetime

    inputs = [{"file": str(p), "sha256": _sha256(p)} for p in model.inputs]
    first = inputs[0] if inputs else {"file": model.source, "sha256": None}
    media = {"vacuum": 1.0}
    media.update({m.name: m.permittivity for m in model.media})
    return {"format_version": FORMAT_VERSION, "tricharge_version": __version__, "command": command,
            "input_file": first["file"], "input_sha256": first["sha256"], "inputs": inputs,
            "unit": model.unit, "json_units": JSON_UNITS, "background_medium": model.background,
            "relative_permittivities": media, "ground_plane_z_m": model.ground_z,
            "created": datetime.datetime.now(datetime.timezone.utc).isoformat(timespec="seconds")}


def spice_circuit(result, origin: dict, drop_below: float):
    """The :class:`~tricharge.io.spice.Subcircuit` of a result, with the provenance header."""
    from .spice import subcircuit

    header = (f"tricharge {origin['tricharge_version']}: capacitance subcircuit",
              f"input {origin['input_file']} sha256 {origin['input_sha256']}",
              f"unit {origin['unit']}, method {result.method}, {result.n_panels} panels, "
              f"created {origin['created']}")
    if result.study is not None:
        worst = float(np.max(result.error_estimate / np.abs(result.capacitance).max()))
        header += (f"values extrapolated by a {result.study['kind']} refinement study to "
                   f"{result.study['panels_per_level'][-1]} panels; largest error estimate "
                   f"{worst:.2%} of the largest entry",)
    return subcircuit(result.mutual, result.conductors, name=Path(origin["input_file"]).stem or "tricharge",
                      reference=result.reference, drop_below=drop_below, header=header,
                      tolerance=result.mutual_tolerance)


def array_label(name: str) -> str:
    """A conductor name as part of a VTK array name: letters, digits, ``_ . + -`` kept,
    everything else (spaces, markup, control characters, undecodable bytes) as ``_``.

    >>> array_label("lead 1"), array_label("<b>")
    ('lead_1', '_b_')
    """
    import re

    return re.sub(r"[^0-9A-Za-z_.+-]", "_", str(name))


def stage_solve(stage, targets: dict, result, full, model, origin: dict, *, form: str = "maxwell",
                drop_below: float = 0.0) -> list[str]:
    """Stage the files of a solve: ``targets`` maps json, spice, csv, npz, vtu to a
    :class:`~tricharge.io.files.Target` or None. ``result`` is the (possibly reduced)
    result the matrix files hold, ``full`` the unreduced one the VTU's per-panel data
    come from. Returns notes for the terminal."""
    from ..bem.results import EPS0
    from ..units import metres_per
    from .export import matrix_csv, result_json, write_npz, write_vtu

    notes = []
    stage.text(targets.get("json"), result_json(result, **origin))
    if targets.get("spice") is not None:
        circuit = spice_circuit(result, origin, drop_below)
        stage.text(targets["spice"], circuit.text)
        name = circuit.text.split(".subckt ", 1)[1].split(" ", 1)[0]
        notes.append(f"{targets['spice'].shown}: .subckt {name}")
        notes += [f"  renamed for SPICE: {note}" for note in circuit.renamed]
        notes += [f"  {note}" for note in circuit.zeroed]
        if circuit.dropped:
            notes.append(f"  left out {circuit.dropped} couplings below {drop_below:g} of their row total, "
                         f"{circuit.dropped_total:.4g} F in all")
    matrix = result.capacitance if form == "maxwell" else result.mutual
    stage.text(targets.get("csv"), matrix_csv(result.conductors, matrix, form=form))
    stage.file(targets.get("npz"), lambda path: write_npz(
        path, conductors=np.array(result.conductors), maxwell=result.capacitance, mutual=result.mutual,
        reference=np.array(result.reference)))
    if targets.get("vtu") is not None:
        data = {"conductor": full.panel_conductor, "area_m2": full.panel_areas}
        for k, name in enumerate(full.conductors):
            label = array_label(name)
            data[f"sigma_C_per_m2_{label}_at_1V"] = full.sigma[:, k]
            data[f"E_normal_V_per_m_{label}_at_1V"] = np.where(full.panel_conductor >= 0, full.sigma[:, k] / EPS0,
                                                               np.nan)
        unit = {"metres_per_unit": metres_per(model.unit)}  # coordinates are metres; the user's unit recorded
        stage.file(targets["vtu"], lambda path: write_vtu(path, model.vertices, model.triangles, data, unit))
    return notes


#: Per-panel arrays of a field solution's VTU (read back by ``tricharge view``).
FIELD_VTU_ARRAYS = ("part", "interface", "area_m2", "sigma_total_C_per_m2", "sigma_free_C_per_m2",
                    "E_normal_outside_V_per_m", "E_normal_inside_V_per_m", "E_tangential_V_per_m",
                    "E_magnitude_V_per_m")


def field_vtu_data(result) -> dict:
    """name -> (N,) per-panel array of a :class:`~tricharge.pipeline.FieldResult`."""
    surface = result.surface
    interface = (result.problem.panel_conductor < 0).astype(np.int8)
    values = (result.groups, interface, result.problem.panels.areas, result.sigma, surface.free_charge_density,
              surface.outside, surface.inside, surface.tangential, surface.magnitude)
    return dict(zip(FIELD_VTU_ARRAYS, values))


def field_json_data(result, samples: list[dict], rechecked) -> dict:
    """Plain data of a field solution: potentials, charges, hot spots, margins, samples
    (SI units; lengths in metres)."""
    return {"conductors": list(result.conductors), "potentials_V": result.potentials.tolist(),
            "free_charge_C": result.free_charge.tolist(), "method": result.method,
            "converged": result.converged, "iterations": result.iterations, "residual": result.residual,
            "hot_spots": [{"part": result.parts[s.group], "rank": s.rank, "field_V_per_m": s.field,
                           "location_m": list(s.location), "panel_size_m": s.panel_size, "sharp": s.sharp,
                           "sharp_angle_deg": s.sharp_angle} for s in result.spots],
            "utilisation": result.utilisation, "gap_m": result.gap,
            "margins": [{"medium": m, "peak_V_per_m": e, "withstand_V_per_m": w} for m, e, w in result.margins],
            "peak_refinement": [{"part": p, "before_V_per_m": a, "after_V_per_m": b} for p, a, b in rechecked],
            "samples": samples}


def field_json(result, samples: list[dict], rechecked, origin: dict) -> str:
    """JSON text of a field solution (:func:`field_json_data`) with the provenance block."""
    from .export import json_text

    data = field_json_data(result, samples, rechecked)
    data.update(origin)
    return json_text(data)


def stage_samples(stage, targets: dict, model, requests, values) -> list[dict]:
    """Stage the samples' CSV (``targets['samples']``) and the section's VTK image
    (``targets['vtk']``); ``requests`` as from :func:`tricharge.sampling.sample_requests`
    ([(kind, points (M, 3) m, image geometry or None)]), ``values`` the matching
    :class:`~tricharge.bem.evaluation.Samples`. Returns the samples as records for the
    JSON (coordinates and distances in metres)."""
    from ..bem.evaluation import WHERE, Samples
    from ..units import metres_per
    from .export import image_vti, samples_csv

    scale = metres_per(model.unit)
    kinds = [kind for kind, points, _ in requests for _ in range(len(points))]
    points = np.vstack([pts for _, pts, _ in requests])
    merged = Samples(*(np.concatenate([getattr(v, name) for v in values]) for name in
                       ("potential", "field", "where", "distance", "panel_size", "conductor")))
    for (kind, pts, image), sample in zip(requests, values):
        if image is not None and targets.get("vtk") is not None:
            origin, spacing, dims = image  # metres, like the surface .vtu, so the two overlay in a viewer
            stage.text(targets["vtk"], image_vti(origin, spacing, dims, {
                "potential_V": sample.potential, "E_V_per_m": sample.field,
                "E_magnitude_V_per_m": np.linalg.norm(sample.field, axis=1), "where": sample.where}, scale))
    stage.text(targets.get("samples"), samples_csv(kinds, points, merged, model.unit, scale))
    return [{"kind": k, "point_m": p.tolist(), "potential_V": float(v), "field_V_per_m": e.tolist(), "where": WHERE[w],
             "distance_to_surface_m": None if np.isnan(d) else float(d)}
            for k, p, v, e, w, d in zip(kinds, points, merged.potential, merged.field, merged.where, merged.distance)]


def stage_field(stage, targets: dict, result, model, requests, values, rechecked, origin: dict,
                line_chart: bytes | None = None) -> list[str]:
    """Stage the files of a field run: ``targets`` maps json, samples, vtk, vtu, line_png
    to a Target or None; ``requests`` and ``values`` as for :func:`stage_samples`;
    ``rechecked`` the peak refinement rows; ``line_chart`` the PNG of the line chart.
    Returns notes for the terminal."""
    from ..names import printable
    from ..units import metres_per
    from .export import write_vtu

    samples = stage_samples(stage, targets, model, requests, values) if requests else []
    stage.bytes(targets.get("line_png"), line_chart)
    notes = []
    if targets.get("vtu") is not None:
        stage.file(targets["vtu"], lambda path: write_vtu(path, model.vertices, model.triangles, field_vtu_data(result),
                                                          {"metres_per_unit": metres_per(model.unit)}))
        notes.append(f"part ids in {targets['vtu'].shown}: "
                     + ", ".join(f"{k} {printable(p)}" for k, p in enumerate(result.parts)))
    stage.text(targets.get("json"), field_json(result, samples, rechecked, origin))
    return notes
