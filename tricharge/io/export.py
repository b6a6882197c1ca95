"""File formats of results: JSON, CSV, NumPy, VTK (surface .vtu and image .vti).

Functions here turn results into text or write them to a path they are given; where the
files go and how they are written safely is :mod:`.files`'s job. Names from users'
files reach CSV cells only through :func:`tricharge.names.csv_cell`.
"""

from __future__ import annotations

import csv
import io
import json

import numpy as np

from ..names import csv_cell


def result_json(result, **provenance) -> str:
    """JSON text of a capacitance result: its stable keys (conductors,
    capacitance_matrix, panels, ...) and the provenance block of :mod:`.outputs`."""
    data = result.to_dict()
    data.update(provenance)
    return json_text(data)


def json_text(data: dict) -> str:
    """Indented JSON; names keep every character (JSON escapes what it must)."""
    return json.dumps(data, indent=2) + "\n"


def _csv_text(rows) -> str:
    buffer = io.StringIO()
    csv.writer(buffer, lineterminator="\n").writerows(rows)
    return buffer.getvalue()


def samples_csv(kinds, points, samples, unit: str, scale: float) -> str:
    """CSV text of sampled potentials and fields.

    kinds : (M,) labels ("probe", "line", "section"); points : (M, 3) metres; samples :
    :class:`~tricharge.bem.evaluation.Samples` at those points; coordinates and distances
    are written in ``unit`` (``scale`` metres per unit).
    """
    from ..bem.evaluation import WHERE

    header = ["kind", f"x_{unit}", f"y_{unit}", f"z_{unit}", "potential_V", "Ex_V_per_m", "Ey_V_per_m",
              "Ez_V_per_m", "E_V_per_m", "where", f"distance_to_surface_{unit}"]
    magnitude = np.linalg.norm(samples.field, axis=1)
    rows = ([csv_cell(kind), *(f"{x:.9g}" for x in p), f"{phi:.9g}", *(f"{x:.9g}" for x in e), f"{m:.9g}", WHERE[w],
             "" if np.isnan(d) else f"{d / scale:.6g}"]
            for kind, p, phi, e, m, w, d in zip(kinds, points / scale, samples.potential, samples.field, magnitude,
                                                samples.where, samples.distance))
    return _csv_text([header, *rows])


def image_vti(origin, spacing, dims, arrays: dict, metres_per_unit: float = 1.0) -> str:
    """VTK XML ImageData (.vti, ASCII) text for ParaView and pyvista.

    origin, spacing : (3,) metres (as the surface .vtu files); dims : (3,) point counts;
    arrays : name -> (prod(dims),) or (prod(dims), 3) point data in VTK's x-fastest order;
    metres_per_unit : the user's length unit, recorded as field data (as in the .vtu files).
    """
    extent = " ".join(f"0 {d - 1}" for d in dims)
    lines = ['<?xml version="1.0"?>',
             '<VTKFile type="ImageData" version="0.1" byte_order="LittleEndian">',
             f'<ImageData WholeExtent="{extent}" Origin="{" ".join(f"{o:.9g}" for o in origin)}" '
             f'Spacing="{" ".join(f"{s:.9g}" for s in spacing)}">',
             '<FieldData><DataArray type="Float64" Name="metres_per_unit" NumberOfTuples="1" format="ascii">'
             f"{metres_per_unit:.17g}</DataArray></FieldData>",
             f'<Piece Extent="{extent}">', "<PointData>"]
    for name, values in arrays.items():
        values = np.asarray(values, dtype=np.float64)
        components = 1 if values.ndim == 1 else values.shape[1]
        lines.append(f'<DataArray type="Float64" Name="{name}" NumberOfComponents="{components}" format="ascii">')
        lines.append(" ".join(f"{x:.9g}" for x in values.ravel()))
        lines.append("</DataArray>")
    lines += ["</PointData>", "</Piece>", "</ImageData>", "</VTKFile>", ""]
    return "\n".join(lines)


def matrix_csv(names, matrix, *, form: str) -> str:
    """CSV of a (K, K) matrix in farads with a header row of conductor names.

    The first header cell says the form and unit, e.g. ``maxwell_F``; names are quoted
    where CSV needs it and never start a spreadsheet formula.

    >>> print(matrix_csv(["a,b", "=1+1"], [[2e-12, -1e-12], [-1e-12, 3e-12]], form="maxwell"), end="")
    maxwell_F,"a,b",'=1+1
    "a,b",2e-12,-1e-12
    '=1+1,-1e-12,3e-12
    """
    cells = [csv_cell(n) for n in names]
    rows = [[f"{form}_F", *cells]] + [[n, *(f"{x:.12g}" for x in row)] for n, row in zip(cells, np.asarray(matrix))]
    return _csv_text(rows)


def write_npz(path, **arrays) -> None:
    """NumPy .npz at ``path`` (which must end in .npz, or numpy adds it)."""
    with open(path, "wb") as handle:
        np.savez(handle, **arrays)


def write_vtu(path, vertices, triangles, cell_data: dict, field_data: dict | None = None) -> None:
    """Panels with per-panel data as a VTK unstructured grid (.vtu) through meshio.
    ``cell_data``: name -> (m,) or (m, 3) arrays; ``field_data``: name -> numbers about
    the whole file (e.g. ``metres_per_unit``)."""
    import meshio

    mesh = meshio.Mesh(np.asarray(vertices), [("triangle", np.asarray(triangles))],
                       cell_data={k: [np.asarray(v)] for k, v in cell_data.items()})
    meshio.write(str(path), mesh, file_format="vtu")
    if field_data:  # meshio's writer leaves FieldData out; VTK readers (meshio's too) take it
        arrays = "".join(f'<DataArray type="Float64" Name="{name}" NumberOfTuples="{len(values)}" format="ascii">'
                         + " ".join(f"{x:.17g}" for x in values) + "</DataArray>"
                         for name, values in ((k, np.atleast_1d(np.asarray(v, dtype=float)))
                                              for k, v in field_data.items()))
        with open(path, encoding="utf-8") as handle:
            text = handle.read()
        with open(path, "w", encoding="utf-8") as handle:
            handle.write(text.replace("<UnstructuredGrid>", f"<UnstructuredGrid>\n<FieldData>{arrays}</FieldData>", 1))


def write_gmsh(path, model) -> None:
    """The model's triangles as a Gmsh 2.2 mesh: coordinates in the model's unit, one
    physical surface group per named surface (names with quotes and control characters
    made safe), so any mesh viewer shows it and tricharge reads it back with --unit."""
    import meshio

    from ..names import printable
    from ..units import metres_per

    tags = np.asarray(model.surface_index, dtype=np.int64) + 1
    names = [printable(name).replace('"', "'") for name in model.surfaces]
    mesh = meshio.Mesh(np.asarray(model.vertices) / metres_per(model.unit), [("triangle", np.asarray(model.triangles))],
                       cell_data={"gmsh:physical": [tags], "gmsh:geometrical": [tags]},
                       field_data={name: np.array([k + 1, 2]) for k, name in enumerate(names)})
    meshio.write(str(path), mesh, file_format="gmsh22", binary=False)
