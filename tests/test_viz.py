"""Pictures and the HTML report: not blank, markers on the right part, the report opens
in headless Chromium without network access, and hostile names show as text."""

import json
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


@pytest.mark.smoke
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


@pytest.mark.smoke
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


def _row_of_spheres(count=6, gap=2.3):
    parts = [shapes.sphere(0.5, 5, center=(gap * k, 0, 0)) for k in range(count)]
    v, t, labels = shapes.combine(*parts)
    return Model.from_arrays(v, t, labels, tuple(f"pin{k + 1}" for k in range(count)))


def test_colour_bar_lies_beside_the_model_and_labels_do_not_collide():
    from tricharge.viz.render import BAR_LEFT

    model = _row_of_spheres()
    field = solve_field(model, {f"pin{k + 1}": float(k % 2) for k in range(6)})
    picture, _ = field_picture(model, field, top=1)
    size = (800, 600)
    lo, hi = model.vertices.min(axis=0), model.vertices.max(axis=0)
    corners = np.array([[x, y, z] for x in (lo[0], hi[0]) for y in (lo[1], hi[1]) for z in (lo[2], hi[2])])
    pixels, placed = project(picture, corners, size=size, labels=True)
    assert pixels[:, 1].max() < BAR_LEFT * size[0] and pixels[:, 1].min() > 0
    boxes = []
    for kind in ("names", "markers"):
        for text, anchor, label in placed[kind]:
            half_width, half_height = 0.35 * 14 * len(text) + 6, 0.8 * 14 + 4
            boxes.append((label[1] - half_width, label[0] - half_height, label[1] + half_width, label[0] + half_height))
    assert len(boxes) == 6 + len(field.spots[:0]) + sum(1 for s in field.spots if s.rank == 1)
    for a in range(len(boxes)):
        for b in range(a + 1, len(boxes)):
            x0, y0, x1, y1 = boxes[a]
            u0, v0, u1, v1 = boxes[b]
            assert x1 <= u0 or u1 <= x0 or y1 <= v0 or v1 <= y0, (placed, a, b)
    for _, anchor, label in placed["markers"]:
        assert np.linalg.norm(anchor - label) > 10  # a marker's label is beside it, with a leader line


@pytest.mark.parametrize("log", [False, True])
def test_signed_charge_keeps_its_sign_in_colour(tmp_path, log):
    """A sphere at +1 V and one at -1 V: one is red, the other blue (diverging colours
    centred on zero), on a linear and on a signed logarithmic scale."""
    v, t, labels = shapes.combine(shapes.sphere(0.5, 6), shapes.sphere(0.5, 6, center=(2.5, 0, 0)))
    model = Model.from_arrays(v, t, labels, ("plus", "minus"))
    picture, _ = field_picture(model, solve_field(model, {"plus": 1.0, "minus": -1.0}), quantity="charge", log=log,
                               top=0)
    size = (600, 400)
    image = render_png(picture, tmp_path / "signs.png", size=size)
    (r0, c0), (r1, c1) = np.round(project(picture, [(0, 0, 0), (2.5, 0, 0)], size=size)).astype(int)
    plus = image[r0 - 3:r0 + 4, c0 - 3:c0 + 4].reshape(-1, 3).astype(int).mean(axis=0)
    minus = image[r1 - 3:r1 + 4, c1 - 3:c1 + 4].reshape(-1, 3).astype(int).mean(axis=0)
    assert plus[0] > plus[2] + 30 and minus[2] > minus[0] + 30, (plus, minus)


def test_interfaces_are_coloured_by_the_side_asked_for():
    """A sphere in a dielectric shell: the shell is drawn (translucent) in the field's
    colours, and its inside and outside values differ by the permittivity ratio."""
    from tricharge.model import Conductor, Interface, Medium

    v, t, labels = shapes.combine(shapes.sphere(1.0, 6), shapes.sphere(2.0, 6))
    model = Model(v, t, labels, ("core", "skin"), (Conductor("core", ("core",)),),
                  (Interface("skin", ("skin",), "oil", "vacuum"),), (Medium("oil", 4.0),), "vacuum", {"core": "oil"})
    field = solve_field(model, {"core": 1.0})
    outside, _ = field_picture(model, field, side="outside")
    inside, _ = field_picture(model, field, side="inside")
    assert outside.overlay is not None and len(outside.overlay[2]) == int((model.panel_conductor < 0).sum())
    ratio = np.median(inside.overlay[2] / outside.overlay[2])
    assert ratio == pytest.approx(1 / 4.0, rel=0.05)  # D continuous: E_in / E_out = eps_out / eps_in


@pytest.fixture(scope="module")
def floating_report(tmp_path_factory):
    """A 2 V electrode, a grounded one and a floating part between them, in millimetres."""
    import meshio

    folder = tmp_path_factory.mktemp("floating")
    v, t, labels = shapes.combine(shapes.sphere(5.0, 5), shapes.sphere(5.0, 5, center=(30.0, 0, 0)),
                                  shapes.cube(6.0, 4, center=(15.0, 0, 0)))
    tags = [np.full(int((labels == k).sum()), k + 1, np.int32) for k in range(3)]
    meshio.write(folder / "parts.msh", meshio.Mesh(v, [("triangle", t[labels == k]) for k in range(3)],
                                                   cell_data={"gmsh:physical": tags, "gmsh:geometrical": tags},
                                                   field_data={"drive": np.array([1, 2]), "earth": np.array([2, 2]),
                                                               "island": np.array([3, 2])}),
                 file_format="gmsh22", binary=False)
    (folder / "model.toml").write_text('mesh = "parts.msh"\nunit = "mm"\n[conductors.drive]\nvolts = "2 V"\n'
                                       '[conductors.earth]\nvolts = 0\n[conductors.island]\nfloating = true\n')
    page, saved = folder / "r.html", folder / "r.json"
    assert main(["report", str(folder / "model.toml"), "-q", "--html", str(page), "--json", str(saved),
                 "--vtu", str(folder / "r.vtu")]) == 0
    return folder, page, saved


def test_report_speaks_the_models_unit_and_shows_every_potential(floating_report):
    folder, page, saved = floating_report
    text = page.read_text()
    data = json.loads(saved.read_text())
    assert "unit mm" in text and "area (mm2)" in text and "panel size (mm)" in text and " m2" not in text
    potentials = dict(zip(data["field"]["conductors"], data["field"]["potentials_V"]))
    assert set(potentials) == {"drive", "earth", "island"} and 0 < potentials["island"] < 2  # floats between
    assert ">island<" in text.replace("<td>", ">").replace("</td>", "<")
    assert "True" not in text and "every self capacitance is positive" in text
    assert "Cautions for high-voltage use" not in text  # 2 V, no margins asked: no high-voltage cautions
    assert text.index("At a glance") < text.index("<details>")  # the summary first, long tables folded


def test_report_is_made_again_from_its_json_without_solving(floating_report, tmp_path, monkeypatch):
    from tricharge import pipeline

    folder, page, saved = floating_report
    monkeypatch.setattr(pipeline, "solve_capacitance", lambda *a, **k: pytest.fail("solved again"))
    again = tmp_path / "again.html"
    assert main(["report", str(saved), "--html", str(again), "-q"]) == 0
    numbers = re.findall(r'data-value="([^"]+)"', page.read_text())
    assert re.findall(r'data-value="([^"]+)"', again.read_text()) == numbers
    assert again.read_text().count("data:image/png;base64,") == 2


def test_a_foreign_json_is_refused_as_a_report(tmp_path, capsys):
    bad = tmp_path / "solve.json"
    bad.write_text(json.dumps({"conductors": ["a"], "capacitance_matrix": [[1e-12]]}))
    assert main(["report", str(bad), "--html", str(tmp_path / "x.html")]) == 2
    assert "not a report saved by 'tricharge report --json'" in capsys.readouterr().err
    assert not (tmp_path / "x.html").exists()


def test_report_numbers_read_in_a_browser_match_the_json(floating_report, tmp_path):
    """Headless Chromium renders the page; every number it shows in the matrices and the
    potentials carries the SI value the JSON holds, and reads as that value in its unit."""
    binary = _chromium_or_skip()
    folder, page, saved = floating_report
    data = json.loads(saved.read_text())
    dom = _chromium(binary, page.resolve().as_uri(), "--dump-dom", tmp_path=tmp_path)
    assert dom.returncode == 0, dom.stderr[-2000:]
    shown = [(float(v), text) for v, text in re.findall(r'data-value="([^"]+)">([^<]+)<', dom.stdout)]
    maxwell = np.array(data["capacitance"]["capacitance_matrix"]).ravel()
    k = len(maxwell)
    np.testing.assert_array_equal([v for v, _ in shown[:k]], maxwell)
    prefixes = {"f": 1e-15, "p": 1e-12, "n": 1e-9, "u": 1e-6, "m": 1e-3, "": 1.0, "k": 1e3}
    for value, text in shown:
        number, unit = re.fullmatch(r"(-?[\d.]+(?:e-?\d+)?) ([fpnumk]?)(F|V|C|kV/mm)", text.strip()).group(1, 2)
        scale = 1e6 if text.endswith("kV/mm") else prefixes[unit]
        assert float(number) * scale == pytest.approx(value, rel=5e-4, abs=1e-30), (value, text)
    potentials = [v for v, text in shown if re.search(r" [munk]?V$", text)]
    assert potentials == data["field"]["potentials_V"]
