"""Write results to files. Every write is atomic: a temporary file in the target's
folder is renamed over the target only when it is complete."""

from __future__ import annotations

import json
import os
import tempfile
from pathlib import Path

import numpy as np

from ..errors import InputFileError


def check_writable(path) -> Path:
    """Fail early, before any work, when ``path`` cannot be written: missing folder or a directory."""
    path = Path(path)
    if path.is_dir():
        raise InputFileError(f"{path}: is a folder; give a file name for the output")
    if not path.parent.is_dir():
        raise InputFileError(f"{path}: folder {path.parent} does not exist; create it or choose another output path")
    if not os.access(path.parent, os.W_OK):
        raise InputFileError(f"{path}: folder {path.parent} is not writable; choose another output path")
    return path


def write_atomic(path, text: str) -> None:
    """Write ``text`` to ``path`` via a temporary file and a rename.

    An interrupted run leaves the previous file (or none), never a truncated one.
    """
    path = check_writable(path)
    folder = path.parent
    fd, tmp = tempfile.mkstemp(prefix=f".{path.name}.", suffix=".tmp", dir=folder)
    try:
        with os.fdopen(fd, "w", encoding="utf-8") as handle:
            handle.write(text)
        os.replace(tmp, path)
    except BaseException:
        Path(tmp).unlink(missing_ok=True)
        raise


def write_bytes_atomic(path, data: bytes) -> None:
    """Binary twin of :func:`write_atomic`."""
    path = check_writable(path)
    fd, tmp = tempfile.mkstemp(prefix=f".{path.name}.", suffix=".tmp", dir=path.parent)
    try:
        with os.fdopen(fd, "wb") as handle:
            handle.write(data)
        os.replace(tmp, path)
    except BaseException:
        Path(tmp).unlink(missing_ok=True)
        raise


def result_json(result, **provenance) -> str:
    """JSON text of a result: the stable keys of DESIGN.md plus provenance."""
    data = result.to_dict()
    data.update(provenance)
    return json.dumps(data, indent=2) + "\n"


def write_json(path, result, **provenance) -> None:
    """Write :func:`result_json` to ``path`` atomically."""
    write_atomic(path, result_json(result, **provenance))


def samples_csv(kinds, points, potential, field, unit: str, scale: float) -> str:
    """CSV text of sampled potentials and fields.

    kinds : (M,) labels ("probe", "line", "section"); points : (M, 3) metres;
    potential : (M,) V; field : (M, 3) V/m; coordinates are written in ``unit``
    (``scale`` metres per unit).
    """
    import io

    buffer = io.StringIO()
    buffer.write(f"kind,x_{unit},y_{unit},z_{unit},potential_V,Ex_V_per_m,Ey_V_per_m,Ez_V_per_m,E_V_per_m\n")
    magnitude = np.linalg.norm(field, axis=1)
    for kind, p, phi, e, m in zip(kinds, points / scale, potential, field, magnitude):
        buffer.write(f"{kind},{p[0]:.9g},{p[1]:.9g},{p[2]:.9g},{phi:.9g},{e[0]:.9g},{e[1]:.9g},{e[2]:.9g},{m:.9g}\n")
    return buffer.getvalue()


def image_vti(origin, spacing, dims, arrays: dict) -> str:
    """VTK XML ImageData (.vti, ASCII) text for ParaView and pyvista.

    origin, spacing : (3,) in the unit the user works in; dims : (3,) point counts;
    arrays : name -> (prod(dims),) or (prod(dims), 3) point data in VTK's x-fastest order.
    """
    extent = " ".join(f"0 {d - 1}" for d in dims)
    lines = ['<?xml version="1.0"?>',
             '<VTKFile type="ImageData" version="0.1" byte_order="LittleEndian">',
             f'<ImageData WholeExtent="{extent}" Origin="{" ".join(f"{o:.9g}" for o in origin)}" '
             f'Spacing="{" ".join(f"{s:.9g}" for s in spacing)}">',
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

    The first header cell says the form and unit, e.g. ``maxwell_F``.
    """
    lines = [",".join([f"{form}_F"] + list(names))]
    for name, row in zip(names, np.asarray(matrix)):
        lines.append(",".join([name] + [f"{x:.12g}" for x in row]))
    return "\n".join(lines) + "\n"


def write_npz(path, **arrays) -> None:
    """NumPy .npz, written atomically."""
    path = check_writable(path)
    fd, tmp = tempfile.mkstemp(prefix=f".{path.name}.", suffix=".npz", dir=path.parent)
    os.close(fd)
    try:
        np.savez(tmp, **arrays)
        os.replace(tmp, path)
    except BaseException:
        Path(tmp).unlink(missing_ok=True)
        raise


def write_vtu(path, vertices, triangles, cell_data: dict) -> None:
    """Panels with per-panel data as a VTK unstructured grid (.vtu) through meshio,
    written atomically. ``cell_data``: name -> (m,) or (m, 3) arrays."""
    import meshio

    path = check_writable(path)
    fd, tmp = tempfile.mkstemp(prefix=f".{path.stem}.", suffix=".vtu", dir=path.parent)
    os.close(fd)
    try:
        mesh = meshio.Mesh(np.asarray(vertices), [("triangle", np.asarray(triangles))],
                           cell_data={k: [np.asarray(v)] for k, v in cell_data.items()})
        meshio.write(tmp, mesh, file_format="vtu")
        os.replace(tmp, path)
    except BaseException:
        Path(tmp).unlink(missing_ok=True)
        raise
