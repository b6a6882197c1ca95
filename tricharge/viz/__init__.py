"""Pictures and reports of computed results (pyvista, matplotlib; imported lazily).

``render`` draws 3D surfaces off-screen, ``plots`` makes charts, ``report`` writes the
self-contained HTML report.
"""

def field_picture(model, field, *, quantity: str = "field", log: bool = False, top: int = 1):
    """A :class:`~tricharge.viz.render.Picture` of a field solution on a model: conductors
    coloured by |E| (kV/mm) or free charge density (uC/m^2), interfaces translucent,
    conductor names on the parts, the ``top`` hot spots of each conductor marked
    "name #rank" as in the hot-spot tables."""
    import numpy as np

    from ..units import metres_per
    from .render import Picture

    scale = metres_per(model.unit)
    on = model.conductor_labels >= 0
    triangles = model.triangles[on]
    if quantity == "field":
        values, label = field.surface.magnitude[on] / 1e6, "E (kV/mm)"
    else:
        values, label = field.surface.free_charge_density[on] * 1e6, "charge (uC/m2)"
    vertices = model.vertices / scale
    centroids = vertices[model.triangles].mean(axis=1)
    labels = []
    for k, name in enumerate(model.conductor_names):
        mine = centroids[model.conductor_labels == k]
        top_point = mine[np.argmax(mine[:, 2])]
        labels.append((name, top_point))
    spots = [s for s in field.spots if s.rank <= top and s.group < len(model.conductors)]
    markers = [(f"{field.parts[s.group]} #{s.rank}", np.array(s.location) / scale) for s in spots]
    ghosts = [(vertices, model.triangles[~on])] if (~on).any() else []
    from pathlib import Path

    title = f"{Path(model.source).name}: {'surface field' if quantity == 'field' else 'free surface charge'}"
    return Picture(vertices, triangles, values, title, label, log, labels, markers, ghosts), spots


def saved_picture(saved, *, quantity: str = "field", log: bool = False):
    """A :class:`~tricharge.viz.render.Picture` of a field solution read back from a file
    (:class:`~tricharge.io.saved.SavedField`), in the length unit it was made in."""
    import numpy as np

    from ..errors import InputFileError
    from ..names import printable
    from ..units import metres_per
    from .render import Picture

    if quantity == "field":
        values, label = saved.arrays["E_magnitude_V_per_m"] / 1e6, "E (kV/mm)"
    else:
        values, label = saved.arrays["sigma_free_C_per_m2"] * 1e6, "charge (uC/m2)"
    if not np.isfinite(values).any():
        raise InputFileError(f"{printable(saved.source)}: the {quantity} values are all missing (NaN); nothing to "
                             "draw, save the solution again with field --vtu")
    from pathlib import Path

    return Picture(saved.vertices / metres_per(saved.unit), saved.triangles, values,
                   f"{Path(saved.source).name} ({saved.unit}): {label}", label, log)
