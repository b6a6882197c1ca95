"""Writing a solve's or a field solution's output files (SPICE, CSV, NPZ, VTU, samples).

Each function takes what to write and a ``say(text)`` callback for the one-line notes
the command line prints; every file is written atomically.
"""

from __future__ import annotations

import re
from pathlib import Path

import numpy as np

from .. import __version__


def provenance(path: Path, unit: str, result) -> dict:
    """Where a result came from: tool version, input file and its SHA-256, unit, date."""
    import datetime
    import hashlib

    digest = hashlib.sha256(path.read_bytes()).hexdigest() if path.is_file() else None
    return {"tricharge_version": __version__, "input_file": str(path), "input_sha256": digest, "unit": unit,
            "created": datetime.datetime.now(datetime.timezone.utc).isoformat(timespec="seconds")}


def write_matrix_outputs(result, full, model, outputs: dict, form: str, drop_below: float, origin: dict,
                         say) -> None:
    """SPICE, CSV, NPZ and VTU files of a solve; each written atomically."""
    from .export import matrix_csv, write_atomic, write_npz, write_vtu

    if "spice" in outputs:
        from .spice import subcircuit

        path = outputs["spice"]
        header = (f"tricharge {origin['tricharge_version']}: capacitance subcircuit",
                  f"input {origin['input_file']} sha256 {origin['input_sha256']}",
                  f"unit {origin['unit']}, method {result.method}, {result.n_panels} panels, "
                  f"created {origin['created']}")
        if result.study is not None:
            worst = float(np.max(result.error_estimate / np.abs(result.capacitance).max()))
            header += (f"values extrapolated by a {result.study['kind']} refinement study to "
                       f"{result.study['panels_per_level'][-1]} panels; largest error estimate "
                       f"{worst:.2%} of the largest entry",)
        name = re.sub(r"[^A-Za-z0-9_]", "_", Path(origin["input_file"]).stem) or "tricharge"
        circuit = subcircuit(result.mutual, result.conductors, name=name, reference=result.reference,
                             drop_below=drop_below, header=header)
        write_atomic(path, circuit.text)
        say(f"wrote {path} (.subckt {name})")
        for note in circuit.renamed:
            say(f"  renamed for SPICE: {note}")
        if circuit.dropped:
            say(f"  left out {circuit.dropped} couplings below {drop_below:g} of their row total, "
                  f"{circuit.dropped_total:.4g} F in all")
    if "csv" in outputs:
        matrix = result.capacitance if form == "maxwell" else result.mutual
        write_atomic(outputs["csv"], matrix_csv(result.conductors, matrix, form=form))
        say(f"wrote {outputs['csv']} ({form} form, farads)")
    if "npz" in outputs:
        write_npz(outputs["npz"], conductors=np.array(result.conductors), maxwell=result.capacitance,
                  mutual=result.mutual, reference=np.array(result.reference))
        say(f"wrote {outputs['npz']}")
    if "vtu" in outputs:
        from ..bem.capacitance import EPS0

        data = {"conductor": full.labels, "area_m2": full.panel_areas}
        for k, name in enumerate(full.conductors):
            data[f"sigma_C_per_m2_{name}_at_1V"] = full.sigma[:, k]
            data[f"E_normal_V_per_m_{name}_at_1V"] = np.where(full.labels >= 0, full.sigma[:, k] / EPS0, np.nan)
        write_vtu(outputs["vtu"], model.vertices, model.triangles, data)
        say(f"wrote {outputs['vtu']}")


def write_samples(result, model, requests, samples_path, vtk_path, say) -> list[dict]:
    """Evaluate the requested samples, write the CSV and VTK files asked for, and return
    the samples as records for the JSON output (coordinates in metres)."""
    from .export import image_vti, samples_csv, write_atomic
    from ..units import metres_per

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
            say(f"wrote {vtk_path}")
    points, potentials, fields = np.vstack(points), np.concatenate(potentials), np.vstack(fields)
    if samples_path is not None:
        write_atomic(samples_path, samples_csv(kinds, points, potentials, fields, model.unit, scale))
        say(f"wrote {samples_path}")
    return [{"kind": k, "point_m": p.tolist(), "potential_V": float(v), "field_V_per_m": e.tolist()}
            for k, p, v, e in zip(kinds, points, potentials, fields)]
