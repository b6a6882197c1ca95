"""Pictures and reports of computed results (pyvista, matplotlib; imported lazily).

``render`` draws 3D surfaces off-screen, ``plots`` makes charts, ``report`` writes the
self-contained HTML report.
"""

def field_picture(model, field, *, quantity: str = "field", log: bool = False, top: int = 1, side: str = "outside"):
    """A :class:`~tricharge.viz.render.Picture` of a field solution on a model:
    conductors coloured by |E| (kV/mm) or by their signed free charge density (uC/m^2);
    dielectric interfaces drawn translucent in the same colours, by |E| on their
    ``side`` ("outside": where their normals point, or "inside"), or plain when showing
    charge; conductor names on the parts; the ``top`` hot spots of every part marked
    "name #rank" as in the hot-spot tables. Returns the picture and the marked spots."""
    import numpy as np

    from ..units import metres_per
    from .render import Picture

    if side not in ("outside", "inside"):
        raise ValueError(f"side must be outside or inside, got {side!r}")
    scale = metres_per(model.unit)
    on = model.panel_conductor >= 0
    surface = field.surface
    vertices = model.vertices / scale
    if quantity == "field":
        values, label = surface.magnitude / 1e6, "E (kV/mm)"
        normal = surface.outside if side == "outside" else surface.inside
        overlay_values = np.hypot(normal, surface.tangential)[~on] / 1e6
    else:
        values, label = surface.free_charge_density * 1e6, "charge (uC/m2)"
    centroids = vertices[model.triangles].mean(axis=1)
    labels = []
    for k, name in enumerate(model.conductor_names):
        mine = centroids[model.panel_conductor == k]
        labels.append((name, mine[np.argmax(mine[:, 2])]))
    shown = [s for s in field.spots if s.rank <= top and (quantity == "field" or s.group < len(model.conductors))]
    markers = [(f"{field.parts[s.group]} #{s.rank}", np.array(s.location) / scale) for s in shown]
    overlay = ghosts = None
    if (~on).any():
        if quantity == "field":
            overlay = (vertices, model.triangles[~on], overlay_values)
        else:
            ghosts = [(vertices, model.triangles[~on])]
    from pathlib import Path

    what = "surface field" if quantity == "field" else "free surface charge"
    if quantity == "field" and overlay is not None:
        what += f"; interfaces translucent, field on their {side}"
    title = f"{Path(model.source).name}: {what}"
    return Picture(vertices, model.triangles[on], values[on], title, label, log, labels, markers, ghosts or [],
                   signed=quantity != "field", overlay=overlay), shown


def saved_picture(saved, *, quantity: str = "field", log: bool = False, side: str = "outside", parts=(),
                  spots=()):
    """A :class:`~tricharge.viz.render.Picture` of a field solution read back from a file
    (:class:`~tricharge.io.saved.SavedField`), in the length unit it was made in. With
    ``parts`` (names by the file's part ids) the conductors are named on the picture;
    ``spots`` (hot-spot records of a field JSON) are marked."""
    import numpy as np

    from ..errors import InputFileError
    from ..names import printable
    from ..units import metres_per
    from .render import Picture

    if quantity == "field":
        values, label = saved.arrays["E_magnitude_V_per_m"] / 1e6, "E (kV/mm)"
    else:
        values, label = saved.arrays["sigma_free_C_per_m2"] * 1e6, "charge (uC/m2)"
    interface = saved.arrays.get("interface", np.zeros(len(values))) > 0
    normal = saved.arrays.get(f"E_normal_{side}_V_per_m")
    if quantity == "field" and normal is not None and "E_tangential_V_per_m" in saved.arrays:
        values = np.where(interface, np.hypot(normal, saved.arrays["E_tangential_V_per_m"]) / 1e6, values)
    if not np.isfinite(values).any():
        raise InputFileError(f"{printable(saved.source)}: the {quantity} values are all missing (NaN); nothing to "
                             "draw, save the solution again with field --vtu")
    from pathlib import Path

    vertices = saved.vertices / metres_per(saved.unit)
    overlay = (vertices, saved.triangles[interface], values[interface]) if interface.any() and quantity == "field" \
        else None
    labels = []
    part = saved.arrays.get("part")
    if part is not None and len(parts):
        centroids = vertices[saved.triangles].mean(axis=1)
        for k, name in enumerate(parts):
            mine = centroids[(part == k) & ~interface]
            if len(mine):
                labels.append((name, mine[np.argmax(mine[:, 2])]))
    markers = [(f"{s['part']} #{s['rank']}", np.asarray(s["location_m"]) / metres_per(saved.unit))
               for s in spots if s["rank"] == 1]
    return Picture(vertices, saved.triangles[~interface], values[~interface],
                   f"{Path(saved.source).name} ({saved.unit}): {label}", label, log, labels, markers,
                   signed=quantity != "field", overlay=overlay)
