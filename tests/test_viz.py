"""Pictures and the HTML report: not blank, markers on the right part, the report opens
in headless Chromium without network access, and hostile names show as text."""

import os
import re
import shutil
import subprocess

import numpy as np
import pytest

from tricharge import Model, shapes
from tricharge.cli import main
from tricharge.pipeline import solve_field
from tricharge.viz import field_picture
from tricharge.viz.render import project, render_png


def test_sphere_render_is_not_blank(tmp_path):
    model = Model.from_arrays(*shapes.sphere(1.0, 8))
    picture, _ = field_picture(model, solve_field(model, {"c1": 1.0}), quantity="charge")
    picture.values = picture.values * (1 + 0.5 * np.random.default_rng(0).random(len(picture.values)))
    image = render_png(picture, tmp_path / "ball.png", size=(400, 300))
    assert (tmp_path / "ball.png").stat().st_size > 1000
    background = np.all(image > 245, axis=2)
    assert 0.1 < 1 - background.mean() < 0.9  # the ball fills part of the frame
    assert image[~background].std(axis=0).max() > 10  # coloured, not flat


def test_hot_spot_marker_lands_on_its_part(tmp_path):
    # the block's peak faces the ball, which lies towards the camera of the "iso" view
    v, t, labels = shapes.combine(shapes.sphere(0.5, 8), shapes.cube(1.0, 6, center=(-2.5, 0, 0)))
    model = Model.from_arrays(v, t, labels, ("ball", "block"))
    field = solve_field(model, {"ball": 0.0, "block": 1.0})
    picture, spots = field_picture(model, field, top=1)
    first = next(k for k, s in enumerate(spots) if model.conductor_names[s.group] == "block")
    size = (500, 400)
    image = render_png(picture, tmp_path / "two.png", size=size)
    marker = picture.markers[first][1]
    row, col = np.round(project(picture, [marker], size=size)[0]).astype(int)
    window = image[max(row - 3, 0):row + 4, max(col - 3, 0):col + 4].reshape(-1, 3).astype(int)
    magenta = (window[:, 0] > 150) & (window[:, 2] > 150) & (window[:, 1] < 100)  # shaded MARKER_RGB
    assert magenta.any(), "no marker colour at the projected spot"
    ball, block = project(picture, [(0, 0, 0), (-2.5, 0, 0)], size=size)
    assert np.linalg.norm([row, col] - block) < np.linalg.norm([row, col] - ball)


def _chromium_or_skip():
    binary = shutil.which("chromium") or shutil.which("chromium-browser")
    if binary is None:
        if os.environ.get("TRICHARGE_REQUIRE_CHROMIUM"):
            pytest.fail("chromium is required here (TRICHARGE_REQUIRE_CHROMIUM is set) but not installed")
        pytest.skip("chromium not installed: apt-get install -y chromium")
    return binary


def _chromium(binary, url, *args, tmp_path):
    """Headless Chromium in a namespace without any network (unshare -n), so a page that
    needed a request could not complete it."""
    command = [binary, "--headless", "--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run",
               "--disable-background-networking", "--disable-component-update", "--disable-sync",
               f"--user-data-dir={tmp_path / 'profile'}", *args, url]
    if shutil.which("unshare") and subprocess.run(["unshare", "-n", "true"], capture_output=True).returncode == 0:
        command = ["unshare", "-n", *command]
    return subprocess.run(command, capture_output=True, text=True, timeout=120)


@pytest.fixture(scope="module")
def hostile_report(tmp_path_factory):
    folder = tmp_path_factory.mktemp("report")
    v, t, labels = shapes.combine(shapes.sphere(0.5, 6), shapes.cube(1.0, 4, center=(2.5, 0, 0)))
    import meshio

    tags = [np.full(int((labels == k).sum()), k + 1, np.int32) for k in (0, 1)]
    meshio.write(folder / "parts.msh", meshio.Mesh(v, [("triangle", t[labels == k]) for k in (0, 1)],
                                                   cell_data={"gmsh:physical": tags, "gmsh:geometrical": tags},
                                                   field_data={"ball": np.array([1, 2]), "block": np.array([2, 2])}),
                 file_format="gmsh22", binary=False)
    (folder / "model.toml").write_text(
        'mesh = "parts.msh"\nunit = "mm"\n[conductors."<script>alert(1)</script>"]\nsurfaces = ["ball"]\n'
        'volts = "1 kV"\n[conductors.block]\nvolts = 0\n')
    page = folder / "report.html"
    assert main(["report", str(folder / "model.toml"), "--html", str(page), "-q"]) == 0
    return page


def test_report_is_self_contained_and_escapes_names(hostile_report):
    text = hostile_report.read_text()
    assert "<script>alert(1)</script>" not in text and "&lt;script&gt;alert(1)&lt;/script&gt;" in text
    assert not re.search(r"(src|href)\s*=\s*[\"']?(https?:|//)", text)  # nothing to fetch
    assert text.count("data:image/png;base64,") == 2 and "Maxwell form" in text and "Cautions" in text


def test_report_opens_in_headless_chromium(hostile_report, tmp_path):
    binary = _chromium_or_skip()
    url = hostile_report.resolve().as_uri()
    dom = _chromium(binary, url, "--dump-dom", tmp_path=tmp_path)
    assert dom.returncode == 0, dom.stderr[-2000:]
    assert 'class="matrix"' in dom.stdout and dom.stdout.count("<img") == 2
    assert "<script>alert(1)</script>" not in dom.stdout  # shown as text, never as an element
    shot = tmp_path / "page.png"
    run = _chromium(binary, url, f"--screenshot={shot}", "--window-size=1000,1400", tmp_path=tmp_path)
    assert run.returncode == 0 and shot.exists()
    import matplotlib.image

    pixels = matplotlib.image.imread(shot)[:, :, :3]
    assert (pixels < 0.5).mean() > 0.005 and pixels.std() > 0.05  # text and tables, not a blank page


def test_view_needs_an_output_and_reads_saved_results(tmp_path, capsys):
    hv = os.path.join(os.path.dirname(__file__), "..", "meshes", "demo_hv.toml")
    assert main(["view", hv]) == 2
    assert "--png FILE" in capsys.readouterr().err
    saved = tmp_path / "hv.vtu"
    assert main(["field", hv, "-q", "--vtu", str(saved)]) == 0
    assert main(["view", str(saved), "--png", str(tmp_path / "hv.png"), "--view", "side"]) == 0
    assert (tmp_path / "hv.png").stat().st_size > 1000


def test_line_chart_and_heat_map_are_pictures(tmp_path):
    import matplotlib.image

    from tricharge.viz.plots import matrix_heatmap

    hv = os.path.join(os.path.dirname(__file__), "..", "meshes", "demo_hv.toml")
    chart = tmp_path / "line.png"
    assert main(["field", hv, "-q", "--line", "0,0,5.5:0,0,34.5:20", "--line-png", str(chart)]) == 0
    pixels = matplotlib.image.imread(chart)
    assert pixels.shape[0] > 200 and pixels[:, :, :3].std() > 0.05
    png = matrix_heatmap(["a", "b"], np.array([[2.0, 1.0], [1.0, 3.0]]) * 1e-12)
    (tmp_path / "heat.png").write_bytes(png)
    assert matplotlib.image.imread(tmp_path / "heat.png")[:, :, :3].std() > 0.05


def test_study_chart_and_report_with_levels(tmp_path, capsys):
    """solve --study-png draws the study; report --levels shows value ± estimate and the chart."""
    import matplotlib.image
    import trimesh

    path = tmp_path / "pair.stl"
    v, t, _ = shapes.combine(shapes.sphere(1.0, 2), shapes.cube(1.0, 2, center=(2.5, 0, 0)))
    trimesh.Trimesh(v, t, process=False).export(path)
    chart = tmp_path / "study.png"
    assert main(["solve", str(path), "-q", "--study-png", str(chart)]) == 2
    assert "add --levels 3 or --accuracy 0.5%" in capsys.readouterr().err and not chart.exists()
    assert main(["solve", str(path), "-q", "--levels", "3", "--study-png", str(chart)]) == 0
    pixels = matplotlib.image.imread(chart)[:, :, :3]
    assert pixels.shape[0] > 200 and pixels.std() > 0.05
    page = tmp_path / "report.html"
    assert main(["report", str(path), "--html", str(page), "--levels", "2", "-q"]) == 0
    text = page.read_text()
    assert "Maxwell form (Q = C V) ± estimated error" in text and text.count(" ± ") >= 4 + 3
    assert "Refinement study" in text and text.count("data:image/png;base64,") == 2  # heat map and study
