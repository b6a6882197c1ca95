"""The committed demo meshes and model files match meshes/make_demo.py and are physically sane."""

import importlib.util
import tomllib
from pathlib import Path

import meshio
import numpy as np
import pytest
from scipy.spatial import cKDTree

from test_shapes import assert_closed_and_consistent, signed_volume

MESHES = Path(__file__).resolve().parents[1] / "meshes"


def _load_script():
    spec = importlib.util.spec_from_file_location("make_demo", MESHES / "make_demo.py")
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return module


make_demo = _load_script()
DEMOS = {"demo_header": make_demo.demo_parts, "demo_package": make_demo.package_parts, "demo_hv": make_demo.hv_parts}


@pytest.fixture(scope="module")
def generated():
    return {stem: parts() for stem, parts in DEMOS.items()}


@pytest.mark.parametrize("stem", DEMOS)
def test_committed_mesh_matches_the_script(stem, generated):
    parts = generated[stem]
    mesh = meshio.read(MESHES / f"{stem}.msh")
    triangles = np.vstack([block.data for block in mesh.cells if block.type == "triangle"])
    physical = zip(mesh.cell_data["gmsh:physical"], mesh.cells)
    tags = np.concatenate([d for d, block in physical if block.type == "triangle"])
    assert len(triangles) == sum(len(t) for _, _, t in parts)
    np.testing.assert_allclose(mesh.points, np.vstack([v for _, v, _ in parts]), rtol=0, atol=1e-12)
    assert {name: int(value[0]) for name, value in mesh.field_data.items()} == {
        name: k for k, (name, _, _) in enumerate(parts, start=1)}
    assert all(int(value[1]) == 2 for value in mesh.field_data.values())
    assert np.bincount(tags).tolist()[1:] == [len(t) for _, _, t in parts]


@pytest.mark.parametrize("stem, text", [("demo_package", make_demo.PACKAGE_TOML), ("demo_hv", make_demo.HV_TOML)])
def test_committed_model_file_matches_and_names_existing_groups(stem, text, generated):
    path = MESHES / f"{stem}.toml"
    assert path.read_text() == text
    model = tomllib.loads(text)
    assert model["mesh"] == f"{stem}.msh" and model["unit"] == "mm"
    groups = [name for name, _, _ in generated[stem]]
    specs = [*model.get("conductors", {}).values(), *model.get("interfaces", {}).values()]
    listed = [surface for spec in specs for surface in spec["surfaces"]]
    assert sorted(listed) == sorted(groups), "every group is used exactly once"
    media = set(model["media"])
    assert model["background"] in media
    for spec in model["conductors"].values():
        assert spec.get("medium", model["background"]) in media
        assert not ("volts" in spec and spec.get("floating", False))


INTERFACE_PARTS = {"mold", "mold_base", "board_top", "board_edge"}
SHEET_PARTS = {"trace1", "trace2", "trace3", "trace4"}   # zero-thickness board traces


def _conductor_parts(parts, sheets=True):
    return [p for p in parts if p[0] not in INTERFACE_PARTS and (sheets or p[0] not in SHEET_PARTS)]


@pytest.mark.parametrize("stem", ["demo_package", "demo_hv"])
def test_every_conductor_part_is_a_closed_outward_body_under_10k_panels(stem, generated):
    parts = generated[stem]
    assert sum(len(t) for _, _, t in parts) < 10_000
    for name, v, t in _conductor_parts(parts, sheets=False):
        assert_closed_and_consistent(v, t)
        assert signed_volume(v, t) > 0, name


def test_mold_skin_and_base_close_the_mold_body(generated):
    """The open mold box and the board area under it together enclose the mold, outward."""
    from tricharge.mesh import merge_vertices

    parts = {name: (v, t) for name, v, t in generated["demo_package"]}
    (mv, mt), (bv, bt) = parts["mold"], parts["mold_base"]
    v, t = merge_vertices(np.vstack([mv, bv]), np.vstack([mt, bt[:, ::-1] + len(mv)]), 1e-9)
    assert_closed_and_consistent(v, t)
    assert signed_volume(v, t) == pytest.approx(3.0 * 3.0 * 1.0)


@pytest.mark.parametrize("stem, gap", [("demo_package", 0.005), ("demo_hv", 10.0)])
def test_no_two_conductor_parts_touch(stem, gap, generated):
    parts = [(name, v[np.unique(t)], t) for name, v, t in _conductor_parts(generated[stem])]  # used vertices
    for k, (name_a, va, _) in enumerate(parts):
        for name_b, vb, _ in parts[k + 1:]:
            closest = cKDTree(vb).query(va)[0].min()
            assert closest > gap, f"{name_a} and {name_b} are {closest:.4g} mm apart"


def _box_distance(points, center, size):
    """Distance (k,) from points (k, 3) to an axis-aligned box (0 inside)."""
    return np.linalg.norm(np.maximum(np.abs(points - center) - np.asarray(size) / 2, 0.0), axis=1)


def test_package_wires_clear_their_lead_and_pad_and_everything_sits_in_the_mold(generated):
    parts = {name: v for name, v, _ in generated["demo_package"]}
    for k, (sx, sy) in enumerate(make_demo.CORNERS, start=1):
        wire = parts[f"wire{k}"]
        lead = _box_distance(wire, (1.1 * sx, 0.5 * sy, make_demo.LEAD_Z), make_demo.LEAD["size"]).min()
        pad = _box_distance(wire, (0.35 * sx, 0.35 * sy, make_demo.PAD_Z), make_demo.PAD["size"]).min()
        assert 0.02 <= lead < 0.04 and 0.02 <= pad < 0.04, (k, lead, pad)
    inside = np.vstack([v for name, v in parts.items() if name not in INTERFACE_PARTS | SHEET_PARTS])
    mold = make_demo.MOLD
    assert _box_distance(inside, mold["center"], np.asarray(mold["size"]) - 0.15).max() == 0.0
    assert inside[:, 2].min() > 0.15                                  # conductors clear the board top
    assert min(v[:, 2].min() for v in parts.values()) == 0.0          # the board rests on the plane


def test_package_traces_are_sheets_cut_from_the_board_top_beside_the_mold(generated):
    """Each trace lies in the board's top face, shares its rim with the rest of that face
    (so it fills a hole in the board|air interface), keeps 0.2 mm from the mold's wall, and
    traces 1 and 2 face each other end to end across 0.2 mm."""
    from tricharge.mesh import closed_pieces

    parts = {name: (v, t) for name, v, t in generated["demo_package"]}
    top_v, top_t = parts["board_top"]
    board_vertices = {tuple(np.round(p, 9)) for p in top_v[np.unique(top_t)]}
    for name in sorted(SHEET_PARTS):
        v, t = parts[name]
        used = v[np.unique(t)]
        assert len(t) > 0 and np.all(used[:, 2] == 0.1), name
        assert not closed_pieces(t)[1].any(), name                         # open: a sheet
        assert all(tuple(np.round(p, 9)) in board_vertices for p in used), name
        assert np.abs(used[:, :2]).max(axis=0).min() >= 1.5 + 0.2 - 1e-9, name   # clear of the mold wall
    gap = parts["trace1"][0][np.unique(parts["trace1"][1]), 1].min() - parts["trace2"][0][
        np.unique(parts["trace2"][1]), 1].max()
    assert gap == pytest.approx(0.2)


def test_hv_ring_surrounds_the_rod_near_its_top(generated):
    parts = {name: v for name, v, _ in generated["demo_hv"]}
    rod, ring, disk = parts["hv_rod"], parts["hv_ring"], parts["ground_disk"]
    assert 20.0 <= rod[:, 2].min() - disk[:, 2].max() <= 40.0        # the gap between tip and disk
    assert np.hypot(ring[:, 0], ring[:, 1]).min() > np.hypot(rod[:, 0], rod[:, 1]).max() + 10.0
    assert rod[:, 2].max() - 30.0 < ring[:, 2].mean() < rod[:, 2].max()


def test_the_gmsh_system_packages_are_listed_alike_everywhere():
    """The packages the gmsh wheel needs are named in the one-line error, the README and
    CI: the same list in all three, so a user who follows any of them gets a working gmsh."""
    from tricharge.io.cadsession import GMSH_SYSTEM_PACKAGES

    root = MESHES.parent
    wanted = set(GMSH_SYSTEM_PACKAGES.split())
    ci = (root / ".ci" / "run").read_text()
    listed = set(ci.split('packages="', 1)[1].split('"', 1)[0].split())
    assert wanted <= listed
    readme = (root / "README.md").read_text()
    assert readme.count(GMSH_SYSTEM_PACKAGES) >= 2, "the test set-up line and the CAD section"
