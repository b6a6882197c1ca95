"""Off-screen 3D pictures of surfaces coloured by a per-panel quantity (pyvista).

pyvista is imported inside the functions, so ``import tricharge`` never pays for it.
Magnitudes use viridis (perceptually uniform); signed quantities (charge) use the
diverging coolwarm map centred on zero, and a logarithmic scale of a signed quantity keeps
the sign (``sign(q) log10(1 + |q| / q0)``, with the colour bar labelled in the quantity's
own values). Every picture has a colour bar with units, placed beside the model, never
over it; names and hot-spot markers are labelled where labels do not collide, with a
leader line from the label to its point.
"""

from __future__ import annotations

import os
from dataclasses import dataclass, field

import numpy as np

from ..errors import TrichargeError
from ..names import chart_label

#: Camera directions (from the scene towards the camera) of the standard views.
VIEWS = {"iso": (1.0, -1.0, 0.8), "top": (0.0, 0.0, 1.0), "front": (0.0, -1.0, 0.0), "side": (1.0, 0.0, 0.0)}

#: Colour of hot-spot markers (RGB 0-255): magenta, absent from viridis and coolwarm.
MARKER_RGB = (255, 0, 255)

#: Where the colour bar sits, as fractions of the window width, and the share of the
#: width the model may use left of it (our layout).
BAR_LEFT, BAR_WIDTH, MODEL_RIGHT = 0.84, 0.07, 0.80

#: Decades shown by a signed logarithmic scale (values below 10^-DECADES of the largest
#: magnitude are drawn as zero).
DECADES = 3


def _pyvista():
    os.environ.setdefault("VTK_DEFAULT_OPENGL_WINDOW", "vtkEGLRenderWindow")  # no X display needed
    from ..extras import require

    require("viz", "pictures")
    import pyvista

    return pyvista


@dataclass
class Picture:
    """What to draw. Lengths in the user's unit.

    vertices (n, 3), triangles (m, 3), values (m,) per panel; title and the colour bar's
    label (with units); log: logarithmic colour scale; signed: the values have a sign
    (diverging colours centred on zero); labels: [(text, point)] names placed on the
    parts; markers: [(label, point)] hot spots; ghosts: [(vertices, triangles)] drawn
    translucent (dielectric bodies); overlay: (vertices, triangles, values) drawn
    translucent in the same colours (the field on dielectric interfaces), or None
    """

    vertices: np.ndarray
    triangles: np.ndarray
    values: np.ndarray
    title: str
    bar_label: str
    log: bool = False
    labels: list = field(default_factory=list)
    markers: list = field(default_factory=list)
    ghosts: list = field(default_factory=list)
    signed: bool = False
    overlay: tuple | None = None


def colour_scale(values, *, log: bool, signed: bool):
    """Scalars to colour by, their range, colour map and colour-bar annotations.

    Returns (scalars (m,), (low, high), colour map name, {scalar: text} or None, use
    pyvista's own log scale). Signed values get a range symmetric about zero; a signed
    log scale maps q to sign(q) log10(1 + |q| / q0), q0 = 10^-DECADES max |q|, and labels
    the bar with the values q themselves.

    >>> s, lim, cmap, notes, own_log = colour_scale([-100.0, 1.0, 100.0], log=True, signed=True)
    >>> cmap, own_log, lim[0] == -lim[1], sorted(notes.values())
    ('coolwarm', False, True, ['-1', '-10', '0', '1', '10'])
    """
    v = np.nan_to_num(np.asarray(values, dtype=float))
    largest = float(np.abs(v).max()) if v.size else 1.0
    largest = largest or 1.0
    if not signed:
        if log:
            positive = v[v > 0]
            floor = positive.min() if len(positive) else 1.0
            v = np.maximum(v, floor)
            return v, (floor, max(float(v.max()), floor * 10)), "viridis", None, True
        return v, (float(v.min()), float(v.max()) if v.max() > v.min() else float(v.min()) + 1.0), "viridis", None, \
            False
    if not log:
        return v, (-largest, largest), "coolwarm", None, False
    q0 = largest * 10.0 ** -DECADES

    def squash(q):
        return np.sign(q) * np.log10(1.0 + np.abs(q) / q0)

    top = float(squash(largest))
    marks = [0.0] + [s * largest * 10.0 ** -k for k in range(1, DECADES) for s in (1, -1)]  # ends: see the title
    return squash(v), (-top, top), "coolwarm", {float(squash(m)): f"{m:.3g}" for m in marks}, False


def _faces(triangles):
    return np.column_stack([np.full(len(triangles), 3), triangles]).ravel()


def _add_surfaces(plotter, pv, picture: Picture):
    scalars, clim, cmap, notes, own_log = colour_scale(picture.values, log=picture.log, signed=picture.signed)
    title = picture.bar_label
    if notes:
        title += f"\nsigned log scale, ends ±{np.abs(np.nan_to_num(picture.values)).max():.3g}"
    bar = {"title": title, "color": "black", "vertical": True, "position_x": BAR_LEFT,
           "width": BAR_WIDTH, "position_y": 0.08, "height": 0.7, "title_font_size": 16, "label_font_size": 13}
    if notes:
        bar["n_labels"] = 0
    surface = pv.PolyData(np.asarray(picture.vertices, float), _faces(picture.triangles))
    surface.cell_data[picture.bar_label] = scalars
    plotter.add_mesh(surface, scalars=picture.bar_label, cmap=cmap, clim=clim, log_scale=own_log,
                     annotations=notes, scalar_bar_args=bar)
    if picture.overlay is not None:
        vertices, triangles, values = picture.overlay
        layer = pv.PolyData(np.asarray(vertices, float), _faces(triangles))
        layer.cell_data["overlay"] = colour_scale(values, log=picture.log, signed=picture.signed)[0]
        plotter.add_mesh(layer, scalars="overlay", cmap=cmap, clim=clim, log_scale=own_log, opacity=0.35,
                         show_scalar_bar=False)
    for ghost_vertices, ghost_triangles in picture.ghosts:
        plotter.add_mesh(pv.PolyData(np.asarray(ghost_vertices, float), _faces(ghost_triangles)), color="lightblue",
                         opacity=0.15)


# -- camera and screen geometry -------------------------------------------------------------

def _to_screen(renderer, points) -> np.ndarray:
    """(k, 3) world points -> (k, 3) display x, y (pixels from the bottom left) and depth."""
    out = []
    for p in np.atleast_2d(points):
        renderer.SetWorldPoint(*p, 1.0)
        renderer.WorldToDisplay()
        out.append(renderer.GetDisplayPoint())
    return np.array(out, dtype=float)


def _to_world(renderer, x: float, y: float, depth: float) -> np.ndarray:
    renderer.SetDisplayPoint(x, y, depth)
    renderer.DisplayToWorld()
    w = renderer.GetWorldPoint()
    return np.array(w[:3]) / (w[3] or 1.0)


def _fit_left_of_the_bar(plotter, vertices, size) -> None:
    """Zoom and pan so the model's bounding box lies left of the colour bar."""
    lo, hi = np.min(vertices, axis=0), np.max(vertices, axis=0)
    corners = np.array([[x, y, z] for x in (lo[0], hi[0]) for y in (lo[1], hi[1]) for z in (lo[2], hi[2])])
    width, height = size
    camera = plotter.camera
    for _ in range(3):
        plotter.render()
        screen = _to_screen(plotter.renderer, corners)
        (x0, y0), (x1, y1) = screen[:, :2].min(axis=0), screen[:, :2].max(axis=0)
        scale = min((MODEL_RIGHT - 0.04) * width / max(x1 - x0, 1.0), 0.86 * height / max(y1 - y0, 1.0))
        camera.zoom(min(scale, 1.0) if scale < 1.0 else min(scale, 1.1))
        plotter.render()
        screen = _to_screen(plotter.renderer, corners)
        shift = (0.04 + MODEL_RIGHT) / 2 * width - (screen[:, 0].min() + screen[:, 0].max()) / 2
        middle = _to_screen(plotter.renderer, [camera.focal_point])[0]
        target = _to_world(plotter.renderer, middle[0] - shift, middle[1], middle[2])
        move = target - np.array(camera.focal_point)
        camera.focal_point = tuple(np.array(camera.focal_point) + move)
        camera.position = tuple(np.array(camera.position) + move)


def _boxes_overlap(a, b) -> bool:
    return not (a[2] <= b[0] or b[2] <= a[0] or a[3] <= b[1] or b[3] <= a[1])


#: Offsets (pixels) tried in turn for a label's centre, nearest first.
_OFFSETS = [(0, 0)] + [(r * np.cos(t), r * np.sin(t)) for r in (28, 56, 90, 130)
                      for t in np.deg2rad([90, 30, 150, -30, -150, -90, 60, 120, -60, -120, 0, 180])]


def place_labels(plotter, items, size, font_size: int, *, away: bool, taken: list) -> list:
    """Screen places for labels [(text, world point)] that overlap neither each other,
    the boxes in ``taken`` (extended in place), nor the colour bar. ``away``: never on
    the point itself (markers). Returns [(text, anchor world point, label world point,
    moved?)]."""
    width, height = size
    taken.append((BAR_LEFT * width - 4, 0, width, height))
    placed = []
    for text, point in items:
        x, y, depth = _to_screen(plotter.renderer, [point])[0]
        w, h = 0.7 * font_size * len(text) + 12, 1.6 * font_size + 8
        for dx, dy in _OFFSETS[1:] if away else _OFFSETS:
            box = (x + dx - w / 2, y + dy - h / 2, x + dx + w / 2, y + dy + h / 2)
            inside = box[0] >= 2 and box[1] >= 2 and box[2] <= width - 2 and box[3] <= height - 40
            if inside and not any(_boxes_overlap(box, other) for other in taken):
                break
        taken.append(box)
        placed.append((text, np.asarray(point, float), _to_world(plotter.renderer, x + dx, y + dy, depth),
                       bool(dx or dy)))
    return placed


def _add_labels(plotter, pv, placed, *, font_size: int, marker: bool) -> None:
    for text, anchor, where, moved in placed:
        if moved:
            plotter.add_mesh(pv.Line(anchor, where), color="black", line_width=1)
    if placed:
        plotter.add_point_labels(np.array([w for _, _, w, _ in placed]), [t for t, _, _, _ in placed],
                                 font_size=font_size, text_color="black", shape_opacity=0.75,
                                 show_points=False, always_visible=True)
    if marker and placed:
        plotter.add_points(np.array([a for _, a, _, _ in placed]), color=[c / 255 for c in MARKER_RGB],
                           point_size=14, render_points_as_spheres=True)


def _all_points(picture: Picture) -> np.ndarray:
    """Every drawn vertex: the coloured surface, the overlay and the ghosts."""
    parts = [np.asarray(picture.vertices)[np.unique(picture.triangles)]]
    if picture.overlay is not None:
        parts.append(np.asarray(picture.overlay[0])[np.unique(picture.overlay[1])])
    parts += [np.asarray(v)[np.unique(t)] for v, t in picture.ghosts]
    return np.vstack(parts)


def _plotter(picture: Picture, view: str, size, off_screen: bool = True):
    pv = _pyvista()
    if view not in VIEWS:
        raise TrichargeError(f"unknown view {view!r}; choose one of {', '.join(VIEWS)}")
    plotter = pv.Plotter(off_screen=off_screen, window_size=size)
    plotter.set_background("white")
    _add_surfaces(plotter, pv, picture)
    plotter.add_title(chart_label(picture.title, 120), font_size=10, color="black")
    plotter.camera_position = "xy"
    plotter.camera.position = np.array(plotter.camera.focal_point) + np.array(VIEWS[view]) * 10.0
    plotter.camera.up = (0.0, 0.0, 1.0) if view != "top" else (0.0, 1.0, 0.0)
    plotter.reset_camera()
    _fit_left_of_the_bar(plotter, _all_points(picture), size)
    plotter.render()
    taken = []
    names = place_labels(plotter, [(chart_label(t), p) for t, p in picture.labels], size, 14, away=False, taken=taken)
    markers = place_labels(plotter, [(chart_label(t), p) for t, p in picture.markers], size, 14, away=True,
                           taken=taken)
    _add_labels(plotter, pv, names, font_size=14, marker=False)
    _add_labels(plotter, pv, markers, font_size=14, marker=True)
    return plotter, {"names": names, "markers": markers}


def render_png(picture: Picture, path, *, view: str = "iso", size=(1000, 800)) -> np.ndarray:
    """Render ``picture`` off-screen to a PNG file at ``path`` (written as it stands: the
    command line hands in a staged file of :mod:`tricharge.io.files`); returns the image
    (h, w, 3) uint8 (useful for tests)."""
    plotter, _ = _plotter(picture, view, size)
    try:
        image = plotter.screenshot(str(path), return_img=True)
    finally:
        plotter.close()
    return image


def png_bytes(picture: Picture, *, view: str = "iso", size=(1000, 800)) -> bytes:
    """The PNG file :func:`render_png` would write, as bytes (for the HTML report)."""
    import tempfile
    from pathlib import Path

    with tempfile.TemporaryDirectory() as folder:
        path = Path(folder) / "picture.png"
        render_png(picture, path, view=view, size=size)
        return path.read_bytes()


def project(picture: Picture, points, *, view: str = "iso", size=(1000, 800), labels: bool = False):
    """Pixel (row, column) of 3D ``points`` (k, 3) in the picture ``render_png`` draws;
    with ``labels`` also where the names and markers were placed, {"names": ..., "markers":
    ...} of [(text, anchor (row, column), label (row, column))]."""
    plotter, placed = _plotter(picture, view, size)
    try:
        height = plotter.window_size[1]

        def pixels(world):
            x, y, _ = _to_screen(plotter.renderer, world).T
            return np.column_stack([height - 1 - y, x])

        out = pixels(points)
        if not labels:
            return out
        return out, {kind: [(t, pixels([a])[0], pixels([w])[0]) for t, a, w, _ in items]
                     for kind, items in placed.items()}
    finally:
        plotter.close()


def show(picture: Picture, *, view: str = "iso") -> None:
    """Open an interactive window (needs a display)."""
    plotter, _ = _plotter(picture, view, (1000, 800), off_screen=False)
    plotter.show()
