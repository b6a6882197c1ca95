"""Off-screen 3D pictures of surfaces coloured by a per-panel quantity (pyvista).

pyvista is imported inside the functions, so ``import tricharge`` never pays for it.
Colours use viridis (perceptually uniform); every picture has a colour bar with units.
"""

from __future__ import annotations

import os
from dataclasses import dataclass, field

import numpy as np

from ..errors import TrichargeError
from ..names import chart_label

#: Camera directions (from the scene towards the camera) of the standard views.
VIEWS = {"iso": (1.0, -1.0, 0.8), "top": (0.0, 0.0, 1.0), "front": (0.0, -1.0, 0.0), "side": (1.0, 0.0, 0.0)}

#: Colour of hot-spot markers (RGB 0-255): magenta, absent from viridis.
MARKER_RGB = (255, 0, 255)


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
    label (with units); log: logarithmic colour scale; labels: [(text, point)] placed on
    the parts; markers: [(label, point)] hot spots; ghosts: [(vertices,
    triangles)] drawn translucent (dielectric bodies)
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


def _plotter(picture: Picture, view: str, size, off_screen: bool = True):
    pv = _pyvista()
    if view not in VIEWS:
        raise TrichargeError(f"unknown view {view!r}; choose one of {', '.join(VIEWS)}")
    faces = np.column_stack([np.full(len(picture.triangles), 3), picture.triangles]).ravel()
    surface = pv.PolyData(np.asarray(picture.vertices, float), faces)
    values = np.asarray(picture.values, float)
    if picture.log:
        positive = values[values > 0]
        values = np.where(values > 0, values, positive.min() if len(positive) else 1.0)
    surface.cell_data[picture.bar_label] = values
    plotter = pv.Plotter(off_screen=off_screen, window_size=size)
    plotter.set_background("white")
    plotter.add_mesh(surface, scalars=picture.bar_label, cmap="viridis", log_scale=picture.log,
                     scalar_bar_args={"title": picture.bar_label, "color": "black", "vertical": True,
                                      "position_x": 0.8, "width": 0.08})
    for ghost_vertices, ghost_triangles in picture.ghosts:
        ghost_faces = np.column_stack([np.full(len(ghost_triangles), 3), ghost_triangles]).ravel()
        plotter.add_mesh(pv.PolyData(np.asarray(ghost_vertices, float), ghost_faces), color="lightblue",
                         opacity=0.15)
    if picture.labels:
        plotter.add_point_labels(np.array([p for _, p in picture.labels]), [chart_label(t) for t, _ in picture.labels],
                                 font_size=14, text_color="black", shape_opacity=0.6, always_visible=True)
    if picture.markers:
        points = np.array([p for _, p in picture.markers])
        plotter.add_point_labels(points, [chart_label(n) for n, _ in picture.markers], show_points=True,
                                 point_color=[c / 255 for c in MARKER_RGB], point_size=14,
                                 render_points_as_spheres=True, font_size=16, text_color="black",
                                 shape_opacity=0.0, always_visible=True)  # markers stay visible behind parts
    plotter.add_title(chart_label(picture.title, 120), font_size=10, color="black")
    plotter.camera_position = "xy"
    plotter.camera.position = np.array(plotter.camera.focal_point) + np.array(VIEWS[view]) * 10.0
    plotter.camera.up = (0.0, 0.0, 1.0) if view != "top" else (0.0, 1.0, 0.0)
    plotter.reset_camera()
    return plotter


def render_png(picture: Picture, path, *, view: str = "iso", size=(1000, 800)) -> np.ndarray:
    """Render ``picture`` off-screen to a PNG file at ``path`` (written as it stands: the
    command line hands in a staged file of :mod:`tricharge.io.files`); returns the image
    (h, w, 3) uint8 (useful for tests)."""
    plotter = _plotter(picture, view, size)
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


def project(picture: Picture, points, *, view: str = "iso", size=(1000, 800)) -> np.ndarray:
    """Pixel (row, column) of 3D ``points`` (k, 3) in the picture ``render_png`` draws."""
    plotter = _plotter(picture, view, size)
    try:
        plotter.render()
        renderer = plotter.renderer
        height = plotter.window_size[1]
        out = []
        for p in np.atleast_2d(points):
            renderer.SetWorldPoint(*p, 1.0)
            renderer.WorldToDisplay()
            x, y, _ = renderer.GetDisplayPoint()
            out.append((height - 1 - y, x))
        return np.array(out)
    finally:
        plotter.close()


def show(picture: Picture, *, view: str = "iso") -> None:
    """Open an interactive window (needs a display)."""
    plotter = _plotter(picture, view, (1000, 800), off_screen=False)
    plotter.show()
