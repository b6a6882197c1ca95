"""Geometry checks and a per-part summary of a model.

:func:`orient_parts` makes normals consistent (outward on closed bodies) where that can be
done without guessing; :func:`survey` measures every conductor and interface and lists
errors (the model cannot be solved as it is) and warnings (it can, but look). Messages
name the model's source, the part and, where useful, a location in the user's unit.

Thresholds are engineering judgement (common practice, no source).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .crossings import triangles_intersect
from .mesh import (aspect_ratios, closed_pieces, edge_use, orient_consistently, pairs_within, signed_volume,
                   triangle_measures, winding_numbers)
from .units import format_eng, metres_per

#: Aspect ratio (1 = equilateral) above which a triangle is reported as a needle.
NEEDLE_WARNING = 20.0
#: Above this the model is refused: such panels make the collocation system unreliable.
NEEDLE_ERROR = 1000.0
#: Model sizes (bounding-box diagonal, metres) outside this range suggest a wrong unit.
SIZE_RANGE = (1e-7, 100.0)
#: Surfaces closer than this fraction of the local panel size count as touching.
CONTACT_FRACTION = 1e-6


@dataclass(frozen=True)
class PartSummary:
    """One conductor or interface, measured. Lengths in metres, area in m^2."""

    kind: str
    name: str
    surfaces: tuple[str, ...]
    panels: int
    area: float
    bbox_min: tuple[float, float, float]
    bbox_max: tuple[float, float, float]
    smallest: float
    largest: float
    worst_aspect: float
    closed: bool
    detail: str


@dataclass(frozen=True)
class Survey:
    parts: tuple[PartSummary, ...]
    errors: tuple[str, ...]
    warnings: tuple[str, ...]


def _where(point, unit: str) -> str:
    scale = metres_per(unit)
    return "(" + ", ".join(f"{x / scale:.4g}" for x in point) + f") {unit}"


def _parts(model):
    """[(kind, record, triangle indices)] for every conductor and interface."""
    out = []
    for kind, records, labels in (("conductor", model.conductors, model.panel_conductor),
                                  ("interface", model.interfaces, model.panel_interface)):
        for k, record in enumerate(records):
            out.append((kind, record, np.flatnonzero(labels == k)))
    return out


def _nesting_depth(vertices, triangles, pieces, closed_ids) -> dict[int, int]:
    """For each closed piece, how many other closed pieces of the same part enclose it."""
    depth = {int(p): 0 for p in closed_ids}
    for p in depth:
        probe = vertices[triangles[pieces == p][0, 0]][None]
        for q in depth:
            if q != p and abs(winding_numbers(probe, vertices, triangles[pieces == q])[0]) > 0.5:
                depth[p] += 1
    return depth


def orient_parts(model) -> tuple[np.ndarray, list[str], list[str]]:
    """Consistent normals for every part, outward on closed pieces (into a cavity on the
    closed pieces that line one, i.e. that lie inside another piece of the same part).

    Returns the new triangles, notes of what was flipped, and errors for open
    interfaces whose normals disagree (their sides cannot be told apart).
    """
    triangles = model.triangles.copy()
    notes, errors = [], []
    for kind, record, idx in _parts(model):
        local = triangles[idx]
        _, _, same = edge_use(local)
        flipped = 0
        if same.any():
            pieces, closed = closed_pieces(local)
            open_mixed = kind == "interface" and not closed[pieces].all()
            if open_mixed:
                errors.append(f"{model.source}: interface '{record.name}' is an open surface whose normals disagree "
                              f"across {int(same.sum())} edges; orient it consistently so 'outside' is one side")
                continue
            local, flipped = orient_consistently(local)
        pieces, closed = closed_pieces(local)
        depth = _nesting_depth(model.vertices, local, pieces, np.flatnonzero(closed))
        for p, d in depth.items():
            members = pieces == p
            outward = signed_volume(model.vertices, local[members]) > 0
            if outward == bool(d % 2):  # outer skins point out, cavity skins (odd depth) point in
                local[members] = local[members][:, ::-1]
                flipped += int(members.sum())
        if flipped:
            notes.append(f"{kind} '{record.name}': turned {flipped} triangles so normals point outward")
        triangles[idx] = local
    return triangles, notes, errors


def _summaries(model, parts, aspects, sizes, areas) -> list[PartSummary]:
    out = []
    for kind, record, idx in parts:
        corners = model.vertices[model.triangles[idx]].reshape(-1, 3)
        _, closed = closed_pieces(model.triangles[idx])
        if kind == "conductor":
            detail = ("floating" if record.floating else
                      format_eng(record.voltage, "V", keep_zeros=False) if record.voltage is not None else "")
            media = {model.medium_of_surface(s) for s in record.surfaces}
            detail = ", ".join(x for x in (detail, "in " + " + ".join(sorted(media))) if x)
        else:
            detail = f"{record.inside} | {record.outside}"
        out.append(PartSummary(kind, record.name, tuple(record.surfaces), len(idx), float(areas[idx].sum()),
                               tuple(map(float, corners.min(axis=0))), tuple(map(float, corners.max(axis=0))),
                               float(sizes[idx].min()),
                               float(sizes[idx].max()), float(aspects[idx].max()), bool(closed.all()), detail))
    return out


def _check_needles(model, parts, aspects, errors, warnings):
    centroids = model.vertices[model.triangles].mean(axis=1)
    for kind, record, idx in parts:
        bad = idx[aspects[idx] > NEEDLE_WARNING]
        if not len(bad):
            continue
        worst = bad[np.argmax(aspects[bad])]
        text = (f"{model.source}: {kind} '{record.name}' has {len(bad)} needle triangles (aspect ratio over "
                f"{NEEDLE_WARNING:g}), worst {aspects[worst]:.3g} near {_where(centroids[worst], model.unit)}")
        if aspects[worst] > NEEDLE_ERROR:
            errors.append(text + f"; above {NEEDLE_ERROR:g} the solve is unreliable: remesh these faces")
        else:
            warnings.append(text + "; accuracy suffers there, consider remeshing")


def _check_topology(model, parts, errors, warnings):
    for kind, record, idx in parts:
        local = model.triangles[idx]
        edges, count, _ = edge_use(local)
        if (count > 2).any():
            where = model.vertices[edges[np.argmax(count)]].mean(axis=0)
            warnings.append(f"{model.source}: {kind} '{record.name}' has {int((count > 2).sum())} non-manifold edges "
                            f"(shared by more than two triangles) near {_where(where, model.unit)}; fine for joined "
                            "thin sheets, otherwise a meshing fault")
        key = np.sort(local, axis=1)
        _, first, counts = np.unique(key, axis=0, return_index=True, return_counts=True)
        if (counts > 1).any():
            where = model.vertices[local[first[np.argmax(counts)]]].mean(axis=0)
            errors.append(f"{model.source}: {kind} '{record.name}' has {int((counts > 1).sum())} duplicated triangles "
                          f"near {_where(where, model.unit)}; remove the copies")


def _owner_of_panels(model) -> tuple[np.ndarray, list[str]]:
    """(m,) part index of every triangle and the parts' display names."""
    owner = np.empty(model.n_panels, dtype=np.int64)
    names = []
    for k, (kind, record, idx) in enumerate(_parts(model)):
        owner[idx] = k
        names.append(f"{kind} '{record.name}'")
    return owner, names


def _check_contacts(model, sizes, errors):
    """Different parts that share vertices (conductors only), cross, or nearly coincide."""
    owner, names = _owner_of_panels(model)
    is_conductor = model.panel_conductor >= 0
    vertex_owner = np.full(len(model.vertices), -1)
    reported = set()
    for part in np.unique(owner[is_conductor]):
        verts = np.unique(model.triangles[owner == part])
        shared = vertex_owner[verts]
        for other in np.unique(shared[shared >= 0]):
            where = model.vertices[verts[shared == other][0]]
            errors.append(f"{model.source}: {names[other]} and {names[part]} touch (shared vertices) near "
                          f"{_where(where, model.unit)}; separate them or make them one conductor")
            reported.add((other, part))
        vertex_owner[verts] = part
    centroids = model.vertices[model.triangles].mean(axis=1)
    i, j, distance = pairs_within(centroids, centroids, 2.0 * sizes)  # touching needs distance < s_i + s_j
    keep = (owner[i] < owner[j]) & (distance < sizes[i] + sizes[j])
    i, j = i[keep], j[keep]
    shares_vertex = (model.triangles[i][:, :, None] == model.triangles[j][:, None, :]).any(axis=(1, 2))
    i, j = i[~shares_vertex], j[~shares_vertex]
    hit = triangles_intersect(model.vertices[model.triangles[i]], model.vertices[model.triangles[j]])
    close = np.linalg.norm(centroids[i] - centroids[j], axis=1) < CONTACT_FRACTION * np.minimum(sizes[i], sizes[j])
    for a, b in zip(i[hit | close], j[hit | close]):
        key = tuple(sorted((owner[a], owner[b])))
        if key in reported:
            continue
        reported.add(key)
        first, second = names[key[0]], names[key[1]]
        if "conductor" in first and "conductor" in second:
            fix = "move them apart or merge them into one conductor"
        elif "conductor" in first or "conductor" in second:
            fix = "mesh them so they meet along shared vertices (split the conductor along the interface)"
        else:
            fix = "interfaces may only meet along shared vertices"
        errors.append(f"{model.source}: {first} and {second} cross or touch near "
                      f"{_where(centroids[a], model.unit)}; {fix}")


def _check_nesting(model, parts, errors):
    """A conductor inside another conductor's closed surface."""
    conductors = [(record, idx) for kind, record, idx in parts if kind == "conductor"]
    boxes = [(model.vertices[model.triangles[idx]].reshape(-1, 3).min(axis=0),
              model.vertices[model.triangles[idx]].reshape(-1, 3).max(axis=0)) for _, idx in conductors]
    for a, (rec_a, idx_a) in enumerate(conductors):
        probe = model.vertices[model.triangles[idx_a[0], 0]]
        for b, (rec_b, idx_b) in enumerate(conductors):
            lo, hi = boxes[b]
            if a == b or not (np.all(probe > lo) and np.all(probe < hi)):
                continue
            if abs(winding_numbers(probe[None], model.vertices, model.triangles[idx_b])[0]) > 0.5:
                errors.append(f"{model.source}: conductor '{rec_a.name}' lies inside conductor '{rec_b.name}'; "
                              "a conductor inside another is shielded from everything: remove it or fix the mesh")


def _check_ground_and_size(model, errors):
    used = model.vertices[np.unique(model.triangles)]
    diagonal = float(np.linalg.norm(np.ptp(used, axis=0)))
    lo, hi = SIZE_RANGE
    if diagonal > hi or diagonal < lo:
        scale = metres_per(model.unit)
        guess = "mm" if diagonal > hi else "m"
        in_unit = f" ({diagonal / scale:.3g} {model.unit})" if model.unit != "m" else ""
        errors.append(f"{model.source}: the model is {diagonal:.3g} m across in unit '{model.unit}'{in_unit}; "
                      f"that looks like a wrong unit: is it '{guess}'?")
    if model.ground_z is not None:
        _check_ground(model, diagonal, errors)


def _check_ground(model, diagonal: float, errors) -> None:
    """Conductors strictly above the plane; interfaces may reach down to it (a substrate
    resting on the plane, its bottom face left out) but not below, and no panel may lie in it."""
    z0, scale, tol = model.ground_z, metres_per(model.unit), 1e-9 * diagonal
    conductor_vertices = model.vertices[np.unique(model.triangles[model.panel_conductor >= 0])]
    interface_vertices = model.vertices[np.unique(model.triangles[model.panel_conductor < 0])]
    for kind, points, limit in (("conductor", conductor_vertices, z0 + tol), ("interface", interface_vertices, z0 - tol)):
        bad = points[:, 2] <= limit
        if bad.any():
            lowest = points[np.argmin(points[:, 2])]
            where = "on or below" if kind == "conductor" else "below"
            errors.append(f"{model.source}: {int(bad.sum())} {kind} vertices lie {where} the ground plane "
                          f"z = {z0 / scale:g} {model.unit} (lowest near {_where(lowest, model.unit)}); raise the "
                          "geometry or lower the plane")
    flat = np.all(np.abs(model.vertices[model.triangles][:, :, 2] - z0) <= tol, axis=1)
    if flat.any():
        errors.append(f"{model.source}: {int(flat.sum())} panels lie in the ground plane z = {z0 / scale:g} "
                      f"{model.unit}; leave them out (the plane itself is the boundary there)")


def survey(model) -> Survey:
    """Measure every part of ``model`` and list errors and warnings."""
    parts = _parts(model)
    _, sizes, cross = triangle_measures(model.vertices, model.triangles)
    areas = 0.5 * np.linalg.norm(cross, axis=1)
    aspects = aspect_ratios(model.vertices, model.triangles)
    errors, warnings = [], []
    _check_ground_and_size(model, errors)
    _check_needles(model, parts, aspects, errors, warnings)
    _check_topology(model, parts, errors, warnings)
    _check_contacts(model, sizes, errors)
    _check_nesting(model, parts, errors)
    return Survey(tuple(_summaries(model, parts, aspects, sizes, areas)), tuple(errors), tuple(warnings))
