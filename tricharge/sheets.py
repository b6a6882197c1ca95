"""Zero-thickness conductors (sheets) and the media on their two faces.

A conductor surface that is not closed is a sheet: its panels carry the total charge of
both faces. A sheet inside one medium sees that medium on both faces (the conductor's
``medium``). A sheet that fills a hole in a dielectric interface (a board trace in the
board's top face, a foil between two layers) shares vertices with that interface along
its rim and lies in its plane; then its faces see the interface's two media: the one
the interface's normals point into on the side the sheet's normals point to the same
way, the other behind.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .mesh import closed_pieces, triangle_measures

#: A sheet lies in an interface when the normals of the panels next to each other along
#: their shared rim agree to within about 8 degrees (cos 0.99; our choice: meshes of one
#: plane agree to rounding, a sheet that only touches an interface meets it at an angle).
COPLANAR = 0.99


@dataclass(frozen=True)
class SheetFaces:
    """Per panel: is it a sheet, and the relative permittivities on its front face (where
    its normal points) and behind; for closed conductor skins ``behind`` is NaN.
    ``notes``: one line per sheet piece saying what it touches."""

    sheet: np.ndarray
    front: np.ndarray
    behind: np.ndarray
    notes: tuple[str, ...]


def _conductor_sheets(model) -> np.ndarray:
    """(m,) True on conductor panels that lie on open pieces of their conductor's surface."""
    sheet = np.zeros(model.n_panels, dtype=bool)
    for k in range(len(model.conductors)):
        rows = np.flatnonzero(model.panel_conductor == k)
        if len(rows):
            piece, closed = closed_pieces(model.triangles[rows])
            sheet[rows[~closed[piece]]] = True
    return sheet


def _normals(model) -> np.ndarray:
    _, _, cross = triangle_measures(model.vertices, model.triangles)
    return cross / np.linalg.norm(cross, axis=1, keepdims=True)


def sheet_faces(model) -> SheetFaces:
    """The media on both faces of every conductor panel of ``model`` (see the module)."""
    from .mesh import connected_components

    eps_of_surface = np.array([model.permittivity(model.medium_of_surface(s)) for s in model.surfaces])
    front = eps_of_surface[model.surface_index].astype(float)
    behind = np.full(model.n_panels, np.nan)
    sheet = _conductor_sheets(model)
    behind[sheet] = front[sheet]
    notes = []
    rows = np.flatnonzero(sheet)
    if not len(rows):
        return SheetFaces(sheet, front, behind, ())
    normals = _normals(model)
    interface = model.panel_interface
    pieces = connected_components(model.triangles[rows])
    for p in range(int(pieces.max()) + 1):
        members = rows[pieces == p]
        name = model.conductors[model.panel_conductor[members[0]]].name
        found = _interface_around(model, members, normals, interface)
        if found is None:
            medium = model.medium_of_surface(model.surfaces[model.surface_index[members[0]]])
            notes.append(f"conductor '{name}': a sheet ({len(members)} panels) in {medium} on both faces")
            continue
        k, sign = found
        record = model.interfaces[k]
        ahead, back = (record.outside, record.inside) if sign > 0 else (record.inside, record.outside)
        front[members], behind[members] = model.permittivity(ahead), model.permittivity(back)
        notes.append(f"conductor '{name}': a sheet ({len(members)} panels) in interface '{record.name}', "
                     f"{ahead} in front of it, {back} behind")
    return SheetFaces(sheet, front, behind, tuple(notes))


def _interface_around(model, members, normals, interface):
    """(interface index, +1 or -1) when the sheet panels ``members`` fill a hole in one
    interface, lying in its plane (sign: whether the normals agree), else None."""
    rim = np.unique(model.triangles[members])
    touching = np.flatnonzero((interface >= 0) & np.isin(model.triangles, rim).any(axis=1))
    if not len(touching):
        return None
    k = int(np.bincount(interface[touching]).argmax())
    neighbours = touching[interface[touching] == k]
    agreement = float(np.mean(normals[neighbours] @ normals[members].mean(axis=0)))
    direction = np.linalg.norm(normals[members].mean(axis=0)) or 1.0
    cosine = agreement / direction
    if abs(cosine) < COPLANAR:
        return None
    return k, int(np.sign(cosine))
