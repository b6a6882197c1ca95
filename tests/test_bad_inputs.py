"""Every file of the bad-input corpus (tests/data/bad/, written by tests/data/make_bad.py)
through ``solve`` and ``inspect``: exit 2, one line naming the file, no traceback, nothing
written. Plus property-based fuzzing of the STL and TOML readers."""

import shutil
import string
from pathlib import Path

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from tricharge.cli import main
from tricharge.errors import TrichargeError
from tricharge.io.meshes import read_raw
from tricharge.io.modelfile import load_model_file

DATA = Path(__file__).parent / "data"
CORPUS = sorted((DATA / "bad").iterdir())


def test_corpus_is_large_enough():
    assert len(CORPUS) >= 15


@pytest.mark.parametrize("command", ["solve", "inspect"])
@pytest.mark.parametrize("path", CORPUS, ids=lambda p: p.name)
def test_bad_input_fails_cleanly(tmp_path, capsys, command, path):
    before = sorted(p.name for p in (DATA / "bad").iterdir())
    args = [command, str(path)] + (["--json", str(tmp_path / "out.json")] if command == "solve" else [])
    code = main(args)
    err = capsys.readouterr().err
    assert code == 2, err
    assert err.count("\n") == 1 and err.startswith("tricharge: error: "), err
    assert path.name in err, err
    assert "Traceback" not in err
    assert list(tmp_path.iterdir()) == []
    assert sorted(p.name for p in (DATA / "bad").iterdir()) == before


def test_corpus_generator_is_in_step(tmp_path):
    """The committed corpus is what make_bad.py writes (so it can be regenerated)."""
    import importlib.util

    copy = tmp_path / "data"
    shutil.copytree(DATA, copy)
    spec = importlib.util.spec_from_file_location("make_bad", copy / "make_bad.py")
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    module.main()
    for path in CORPUS:
        if path.is_file():
            assert (copy / "bad" / path.name).read_bytes() == path.read_bytes(), path.name


FUZZ = settings(max_examples=150, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])


@FUZZ
@given(data=st.binary(max_size=600))
def test_fuzz_stl_bytes(tmp_path, data):
    """Arbitrary bytes: the STL reader returns a surface or raises our error, never anything else."""
    path = tmp_path / "fuzz.stl"
    path.write_bytes(data)
    try:
        read_raw(path)
    except TrichargeError:
        pass


def _ascii_stl(triangles):
    body = "".join("facet normal 0 0 0\nouter loop\n" + "".join(f"vertex {x} {y} {z}\n" for x, y, z in tri)
                   + "endloop\nendfacet\n" for tri in triangles)
    return f"solid fuzz\n{body}endsolid fuzz\n"


_coordinate = st.one_of(st.floats(allow_nan=True, allow_infinity=True), st.integers(-10, 10))


@FUZZ
@given(triangles=st.lists(st.tuples(*[st.tuples(_coordinate, _coordinate, _coordinate)] * 3), max_size=6),
       cut=st.integers(0, 400))
def test_fuzz_ascii_stl_structure(tmp_path, triangles, cut):
    """Well-formed-looking ASCII STL with odd numbers, possibly cut short."""
    text = _ascii_stl(triangles)
    path = tmp_path / "fuzz.stl"
    path.write_text(text[: len(text) - cut] if cut < len(text) else text)
    try:
        main(["inspect", str(path)])
    except Exception as exc:  # main() must turn everything into an exit status
        pytest.fail(f"main raised {exc!r}")


_keys = st.sampled_from(["mesh", "unit", "background", "ground", "media", "conductors", "interfaces", "z",
                         "surfaces", "volts", "floating", "inside", "outside", "medium", "net_charge", "air", "c1"])
_scalars = st.one_of(st.text(alphabet=string.ascii_letters + " .-/\\", max_size=12), st.integers(-5, 5),
                     st.floats(allow_nan=False, allow_infinity=False), st.booleans(), st.just("../cube.stl"))


def _toml_value(value):
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, str):
        return '"' + value.replace("\\", "\\\\").replace('"', '\\"') + '"'
    if isinstance(value, list):
        return "[" + ", ".join(_toml_value(v) for v in value) + "]"
    return repr(value)


@pytest.mark.smoke
@FUZZ
@given(top=st.dictionaries(_keys, st.one_of(_scalars, st.lists(_scalars, max_size=3)), max_size=5),
       sections=st.dictionaries(st.sampled_from(["ground", "media", "conductors.c1", "interfaces.s"]),
                                st.dictionaries(_keys, _scalars, max_size=4), max_size=3))
def test_fuzz_model_files(tmp_path, top, sections):
    """Random model files over our keys: a model or our error, never a crash."""
    lines = [f"{k} = {_toml_value(v)}" for k, v in top.items()]
    for name, table in sections.items():
        if name.split(".")[0] in top:
            continue
        lines.append(f"[{name}]")
        lines += [f"{k} = {_toml_value(v)}" for k, v in table.items()]
    path = tmp_path / "sub" / "fuzz.toml"
    path.parent.mkdir(exist_ok=True)
    shutil.copy(DATA / "cube.stl", tmp_path / "cube.stl")
    path.write_text("\n".join(lines) + "\n")
    try:
        load_model_file(path)
    except TrichargeError:
        pass
