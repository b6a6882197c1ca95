"""Every geometry check of tricharge.survey / Model has a test: the message names the
source and the part, and says what to do."""

import numpy as np
import pytest

from tricharge import shapes
from tricharge.errors import MeshError, OptionError
from tricharge.mesh import merge_vertices
from tricharge.model import Conductor, Interface, Medium, Model


def conductors_model(*meshes, names=None, unit="m", ground_z=None, check=True):
    """Several bodies, vertices merged as a mesh reader would."""
    v, t, labels = shapes.combine(*meshes)
    v, t = merge_vertices(v, t, 1e-9)
    names = names or [f"c{k + 1}" for k in range(len(meshes))]
    return Model(v, t, labels, tuple(names), tuple(Conductor(n, (n,)) for n in names), ground_z=ground_z,
                 unit=unit, source="test.msh", check=check)


def test_needle_triangles_warn_then_refuse():
    v = np.array([[0, 0, 0], [1, 0, 0], [0.5, 0.02, 0], [0.5, -0.00001, 0]], float)
    warn = Model.from_arrays(v, [[0, 1, 2]], source="fin.stl")
    assert any("1 needle triangles" in w and "worst 43.3" in w and "consider remeshing" in w
               for w in warn.survey.warnings)
    with pytest.raises(MeshError, match=r"fin.stl: conductor 'c1' has 1 needle triangles .* worst 8.66e\+04 near "
                                        r"\(0.5, -3.333e-06, 0\) m; above 1000 the solve is unreliable"):
        Model.from_arrays(v, [[0, 3, 1]], source="fin.stl")


def test_non_manifold_edge_is_a_warning():
    v = np.array([[0, 0, 0], [1, 0, 0], [0.5, 1, 0], [0.5, -1, 0], [0.5, 0, 1]], float)
    model = Model.from_arrays(v, [[0, 1, 2], [1, 0, 3], [0, 1, 4]], source="tee.stl")
    assert any("1 non-manifold edges" in w and "thin sheets" in w for w in model.survey.warnings)


def test_duplicated_triangles_are_refused():
    v, t = shapes.plate((1, 1), (2, 2))
    with pytest.raises(MeshError, match=r"conductor 'c1' has 1 duplicated triangles near .*; remove the copies"):
        Model.from_arrays(v, np.vstack([t, t[:1]]), source="dup.stl")


def test_conductors_sharing_vertices_touch():
    with pytest.raises(MeshError, match=r"test.msh: conductor 'c1' and conductor 'c2' touch \(shared vertices\) near "
                                        r"\(0.5, .*\) m; separate them or make them one conductor"):
        conductors_model(shapes.cube(1.0, 2), shapes.cube(1.0, 2, center=(1.0, 0, 0)))


def test_intersecting_conductors():
    with pytest.raises(MeshError, match="conductor 'c1' and conductor 'c2' cross or touch near .*; move them apart"):
        conductors_model(shapes.cube(1.0, 4), shapes.cube(1.0, 4, center=(0.5, 0.3, 0.2)))


def test_coincident_faces_without_shared_vertices():
    """Face-to-face contact with different meshes on the two faces."""
    with pytest.raises(MeshError, match="cross or touch"):
        conductors_model(shapes.cube(1.0, 3), shapes.cube(1.0, 4, center=(1.0, 0.1, 0.05)))


def test_conductor_inside_another():
    with pytest.raises(MeshError, match="conductor 'c2' lies inside conductor 'c1'"):
        conductors_model(shapes.cube(2.0, 4), shapes.sphere(0.3, 2))


def test_shell_around_a_conductor_is_fine():
    """A hollow conductor (outer and inner, inward-facing surfaces) around another: not 'inside'."""
    outer_v, outer_t = shapes.sphere(2.0, 4)
    inner_v, inner_t = shapes.sphere(1.6, 4)
    shell = shapes.combine((outer_v, outer_t), (inner_v, inner_t[:, ::-1]))[:2]
    model = conductors_model(shell, shapes.sphere(0.5, 3), names=["shell", "core"])
    assert model.problems == ()


def test_geometry_below_the_ground_plane():
    with pytest.raises(MeshError, match=r"test.msh: \d+ conductor vertices lie on or below the ground plane z = 0.5 mm "
                                        r"\(lowest near .* mm\); raise the geometry or lower the plane"):
        conductors_model(shapes.cube(1e-3, 2), unit="mm", ground_z=0.5e-3)


def test_absurd_size_suggests_the_unit():
    v, t = shapes.cube(2000.0, 2)  # a 2-km "package": the file was surely in mm
    with pytest.raises(MeshError, match=r"the model is 3.46e\+03 m across in unit 'm'; that looks like a wrong unit: is it 'mm'\?"):
        Model.from_arrays(v, t, source="pkg.stl")
    with pytest.raises(MeshError, match="that looks like a wrong unit"):
        Model.from_arrays(*shapes.cube(1e-3, 2), unit="um")


def test_open_conductor_is_valid_and_reported_open():
    model = Model.from_arrays(*shapes.disk(1.0, 4))
    assert model.problems == ()
    assert model.survey.parts[0].closed is False


def _interface_model(triangles_fix=None, open_surface=False):
    cv, ct = shapes.cube(0.4, 2)
    if open_surface:
        iv, it = shapes.plate((3, 3), (4, 4), center=(0, 0, -1.0))
    else:
        iv, it = shapes.sphere(1.5, 4)
    if triangles_fix is not None:
        it = triangles_fix(it)
    v, t, labels = shapes.combine((cv, ct), (iv, it))
    return Model(v, t, labels, ("lead", "skin"), (Conductor("lead", ("lead",)),),
                 (Interface("skin", ("skin",), inside="mold", outside="air"),),
                 (Medium("air", 1.0), Medium("mold", 3.9)), background="air", conductor_media={"lead": "mold"},
                 source="pkg.toml")


def test_closed_interface_normals_are_repaired_and_reported():
    def scramble(t):
        t = t.copy()
        t[::3] = t[::3, ::-1]
        return t

    model = _interface_model(scramble)
    assert any("interface 'skin': turned" in n for n in model.notes)
    reference = _interface_model()
    skin = model.panel_interface == 0
    np.testing.assert_array_equal(model.triangles[skin], reference.triangles[skin])


def test_inward_closed_interface_is_turned_outward():
    model = _interface_model(lambda t: t[:, ::-1])
    assert any("turned 320 triangles" in n for n in model.notes)


def test_open_interface_with_mixed_normals_is_refused():
    def scramble(t):
        t = t.copy()
        t[0] = t[0, ::-1]
        return t

    assert _interface_model(open_surface=True).problems == ()
    with pytest.raises(MeshError, match="interface 'skin' is an open surface whose normals disagree across 2 edges"):
        _interface_model(scramble, open_surface=True)


def test_conductor_crossing_an_interface_without_shared_vertices():
    cv, ct = shapes.box((0.4, 0.4, 3.0), (2, 2, 6))
    iv, it = shapes.plate((3, 3), (5, 5), center=(0, 0, 0.1))
    v, t, labels = shapes.combine((cv, ct), (iv, it))
    with pytest.raises(MeshError, match=r"conductor 'lead' and interface 'skin' cross or touch .*\(split the conductor along the interface\)"):
        Model(v, t, labels, ("lead", "skin"), (Conductor("lead", ("lead",)),),
              (Interface("skin", ("skin",), inside="mold", outside="air"),),
              (Medium("air", 1.0), Medium("mold", 3.9)), background="air", source="pkg.toml")


def test_check_false_keeps_the_problems_for_inspect():
    model = conductors_model(shapes.cube(2.0, 4), shapes.sphere(0.3, 2), check=False)
    assert len(model.problems) == 1 and "lies inside" in model.problems[0]


@pytest.mark.parametrize("kwargs, message", [
    (dict(conductors=(Conductor("a", ("nope",)),)), "conductor 'a' names surface 'nope' but the mesh has a"),
    (dict(conductors=()), "the model has no conductors"),
    (dict(media=(Medium("oil", 0.5),)), "medium 'oil' has relative permittivity 0.5; it must be >= 1"),
    (dict(background="oil"), "background medium 'oil' is not defined"),
    (dict(conductors=(Conductor("a", ("a",), voltage=1.0, floating=True),)), "is floating and has a voltage"),
    (dict(conductor_media={"a": "glass"}), "surface 'a' touches medium 'glass', which is not defined"),
])
def test_reference_errors(kwargs, message):
    v, t = shapes.cube(1.0, 2)
    args = dict(conductors=(Conductor("a", ("a",)),), source="m.toml")
    args.update(kwargs)
    with pytest.raises(MeshError, match=message):
        Model(v, t, np.zeros(len(t), int), ("a",), **args)


def _slab_model(z_bottom, with_bottom=False):
    """A conductor cube above an open dielectric box (no bottom) reaching down to z_bottom."""
    cv, ct = shapes.cube(0.4, 2, center=(0, 0, 2.0))
    bv, bt = shapes.box((3, 3, 1), (3, 3, 2), center=(0, 0, z_bottom + 0.5))
    centre_z = bv[bt].mean(axis=1)[:, 2]
    if not with_bottom:
        bt = bt[centre_z > z_bottom + 1e-9]
    v, t, labels = shapes.combine((cv, ct), (bv, bt))
    return Model(v, t, labels, ("lead", "slab"), (Conductor("lead", ("lead",)),),
                 (Interface("slab", ("slab",), inside="fr4", outside="air"),),
                 (Medium("air", 1.0), Medium("fr4", 4.4)), background="air", ground_z=0.0, source="board.toml")


def test_interface_may_rest_on_the_ground_plane():
    assert _slab_model(0.0).problems == ()


def test_interface_below_the_plane_or_in_it_is_refused():
    with pytest.raises(MeshError, match=r"board.toml: \d+ interface vertices lie below the ground plane z = 0 m"):
        _slab_model(-0.2)
    with pytest.raises(MeshError, match=r"board.toml: 18 panels lie in the ground plane z = 0 m; leave them out"):
        _slab_model(0.0, with_bottom=True)


# -- the Python API refuses with our errors (issue 13) ------------------------------------

def test_unknown_medium_is_our_error_and_a_key_error():
    from tricharge.errors import TrichargeError
    from tricharge.model import UnknownMedium

    v, t = shapes.cube(1.0, 2)
    model = Model.from_arrays(v, t, permittivity=2.5, source="part.stl")
    assert model.permittivity("medium") == 2.5 and model.permittivity("vacuum") == 1.0
    with pytest.raises(UnknownMedium, match=r"^part.stl: no medium named 'oil'; use one the model has: vacuum, "
                                             r"medium$"):
        model.permittivity("oil")
    with pytest.raises(KeyError):
        model.permittivity("oil")
    with pytest.raises(TrichargeError):
        model.permittivity(None)


@pytest.mark.parametrize("kwargs, error, message", [
    (dict(labels=np.full(12, 0.5)), MeshError, "labels must be one integer per triangle, got float64 values"),
    (dict(labels=["a"] * 12), MeshError, "labels must be one integer per triangle"),
    (dict(labels=[[0], [0, 1]]), MeshError, "labels must be one integer per triangle"),
    (dict(labels=np.full(12, np.nan)), MeshError, "labels must be one integer per triangle"),
    (dict(labels=np.full(12, True)), MeshError, "labels must be one integer per triangle"),
    (dict(labels=np.arange(12) - 1), MeshError, r"surface labels must lie in 0..10"),
    (dict(labels=np.zeros(5, int)), MeshError, r"\(5,\) surface labels for 12 triangles"),
    (dict(conductors="ab"), MeshError, "conductors must be a list of names"),
    (dict(conductors=(1,)), MeshError, "conductors must be a list of names"),
    (dict(permittivity=0.5), OptionError, "permittivity=0.5: give the relative permittivity of the medium, a number "
                                          r"from 1 to 1e\+06"),
    (dict(permittivity=float("nan")), OptionError, "permittivity=nan"),
    (dict(permittivity=float("inf")), OptionError, "permittivity=inf"),
    (dict(permittivity="3"), OptionError, "permittivity='3'"),
    (dict(permittivity=None), OptionError, "permittivity=None"),
    (dict(permittivity=True), OptionError, "permittivity=True"),
    (dict(unit=None), OptionError, r"unit must be one of m, cm, mm, um, in, mil \(text\), got None"),
    (dict(unit=["mm"]), OptionError, "unit must be one of"),
])
def test_from_arrays_refuses_bad_arguments(kwargs, error, message):
    v, t = shapes.cube(1.0, 1)  # 12 triangles
    with pytest.raises(error, match=message):
        Model.from_arrays(v, t, **kwargs)


@pytest.mark.parametrize("vertices, triangles, message", [
    ([["a", "b", "c"]], [[0, 0, 0]], "vertices and triangles must be numeric arrays"),
    ([[0, 0], [1, 0, 0]], [[0, 1, 0]], "vertices and triangles must be numeric arrays"),
    ([[0, 0, 0], [1, 0, 0], [0, 1, 0]], [[0, 1], [2]], "vertices and triangles must be numeric arrays"),
    ([[0, 0, 0], [1, 0, 0], [0, 1, 0]], [[0, 1, 2, 0]], r"triangles must have shape \(m, 3\)"),
    ([[0, 0, 0], [1, 0, 0], [0, 1, 0]], [[0, 1, 9]], "triangle indices must lie in 0..2"),
])
def test_from_arrays_refuses_bad_arrays(vertices, triangles, message):
    with pytest.raises(MeshError, match=message):
        Model.from_arrays(vertices, triangles, source="arrays")


@pytest.mark.parametrize("kwargs, error, message", [
    (dict(unit=3), OptionError, "unit must be one of"),
    (dict(surfaces="a"), MeshError, "surfaces must be a list of names"),
    (dict(conductors=("a",)), MeshError, "every conductor must be of type Conductor"),
    (dict(conductors=(Conductor("a", "a"),)), MeshError, "every conductor must be of type Conductor"),
    (dict(conductors=(Conductor("a", ("a",), voltage="3"),)), MeshError,
     "conductor 'a' must be given a number of volts"),
    (dict(conductors=(Conductor("a", ("a",), floating=1),)), MeshError, "conductor 'a' must be given"),
    (dict(conductors=(Conductor("a", ("a",), voltage=1e16),)), MeshError, r"voltage 1e\+16; give a finite number of "
                                                                          r"volts up to 1e\+15"),
    (dict(conductors=(Conductor("a", ("a",), floating=True, net_charge=float("nan")),)), MeshError,
     "has net charge nan; give a finite number of coulombs"),
    (dict(interfaces=(Interface("s", ("a",), 1, "vacuum"),)), MeshError, "interface 's' must be given its inside"),
    (dict(interfaces=("s",)), MeshError, "every interface must be of type Interface"),
    (dict(media=(Medium("oil", "2"),)), MeshError, "every medium must be of type Medium, with a name"),
    (dict(media=(Medium("oil", 1e7),)), MeshError, r"relative permittivity 10000000.0; it must be >= 1 and at most"),
    (dict(background=None), MeshError, "the background and conductor media must be medium names"),
    (dict(conductor_media={"a": 1}), MeshError, "the background and conductor media must be medium names"),
    (dict(ground_z="0"), MeshError, "ground_z must be a height in metres or None"),
    (dict(ground_z=-1e200), MeshError, r"ground plane height -1e\+200 m is not a finite number within 1e\+09 m"),
    (dict(surface_index=np.full(12, 0.5)), MeshError, "surface labels must be one integer per triangle"),
])
def test_model_refuses_records_of_the_wrong_kind(kwargs, error, message):
    v, t = shapes.cube(1.0, 2)
    args = dict(surface_index=np.zeros(len(t), int), surfaces=("a",), conductors=(Conductor("a", ("a",)),),
                source="m.toml")
    args.update(kwargs)
    with pytest.raises(error, match=message):
        Model(v, t, **args)


# -- vertex merging: semantics and cost for any input -------------------------------------

def test_merge_semantics_on_random_clusters():
    """Pairs closer than the tolerance always merge; merged vertices are linked by steps of
    at most 2 sqrt(3) tolerances; the first vertex of each cluster is kept, in first-use order."""
    from scipy.sparse import coo_matrix
    from scipy.sparse.csgraph import connected_components

    rng = np.random.default_rng(7)
    for _ in range(200):
        n = int(rng.integers(1, 50))
        v = rng.integers(0, 5, (n, 3)) * 0.5e-9 + rng.random((n, 3)) * rng.choice([0.0, 1e-9])
        t = rng.permutation(3 * n).reshape(n, 3) % n  # every vertex used
        merged, tri = merge_vertices(v, t, 1e-9)
        label = np.full(n, -1)
        label[t.ravel()] = tri.ravel()
        used = np.unique(t)
        d = np.linalg.norm(v[used, None] - v[None, used], axis=2)
        same = label[used][:, None] == label[used][None, :]
        assert same[d < 1e-9].all()
        _, reach = connected_components(coo_matrix(d <= 2 * np.sqrt(3) * 1e-9 * (1 + 1e-6)))
        assert not (same & (reach[:, None] != reach[None, :])).any()
        first_use = [int(np.flatnonzero(label[t.ravel()] == k)[0]) for k in range(len(merged))]
        assert first_use == sorted(first_use)
        np.testing.assert_array_equal(merged, [v[used[label[used] == k].min()] for k in range(len(merged))])


def test_merge_is_linear_for_coincident_and_clustered_vertices():
    n = 300_000
    triangles = np.arange(n).reshape(-1, 3)
    vertices, tri = merge_vertices(np.zeros((n, 3)), triangles, 1e-9)
    assert vertices.shape == (1, 3) and not tri.any()
    chain = np.zeros((n, 3))
    chain[:, 0] = np.arange(n) * 1e-20  # all within the tolerance of each other
    chain[-1] = [1.0, 1.0, 1.0]
    vertices, tri = merge_vertices(chain, triangles, 1.7e-9)
    assert vertices.tolist() == [[0.0, 0.0, 0.0], [1.0, 1.0, 1.0]] and tri[-1].tolist() == [0, 0, 1]
    far = np.full((n, 3), 1e8)
    far[:, 0] += np.arange(n) * 1e-9  # steps below the float spacing (1.5e-8) at 1e8
    vertices, _ = merge_vertices(far, triangles, 1e-9)
    assert len(vertices) == len(np.unique(far[:, 0]))  # exact duplicates merge, distinct floats stay apart


def test_merge_keeps_non_finite_vertices_apart():
    v = np.array([[0, 0, 0], [np.nan, 0, 0], [np.nan, 0, 0], [np.inf, 0, 0], [0, 0, 1e-12], [1e308, 0, 0]])
    merged, tri = merge_vertices(v, [[0, 1, 2], [3, 4, 5]], 1e-9)
    assert tri.tolist() == [[0, 1, 2], [3, 0, 4]] and len(merged) == 5  # 1e308 is merged only when identical
    merged, tri = merge_vertices(v, [[0, 1, 2], [3, 4, 5]], 0.0)  # no tolerance: identical coordinates only
    assert tri.tolist() == [[0, 1, 2], [3, 4, 5]]


def test_a_triangle_piled_up_many_times_is_refused_before_the_checks():
    """4,000 copies of one facet would make the contact search quadratic (2 GB at 200 kB of STL)."""
    v = np.array([[0, 0, 0], [1, 0, 0], [0, 1, 0]], float)
    with pytest.raises(MeshError, match=r"pile.stl: one triangle occurs 4,000 times \(near \(0.3333, 0.3333, 0\) m; "
                                        r"3,999 copies in all\); remove the copies"):
        Model.from_arrays(v, np.tile([[0, 1, 2]], (4000, 1)), source="pile.stl")
    with pytest.raises(MeshError, match="few.stl: conductor 'c1' has 1 duplicated triangles"):
        Model.from_arrays(v, np.tile([[0, 1, 2]], (3, 1)), source="few.stl")  # a few copies: the checks report them
