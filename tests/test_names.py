"""Names read from files are data: they reach a netlist, a CSV, the terminal, a chart or
a picture only in a form that place cannot misread."""

import csv
import os
import re
import shutil
import subprocess

import numpy as np
import pytest
import trimesh

from tricharge import shapes
from tricharge.cli import main
from tricharge.io.export import matrix_csv
from tricharge.io.spice import subcircuit
from tricharge.names import chart_label, csv_cell, printable, spice_comment

INJECTION = "lead\nR1 p1 0 1\n.include /etc/passwd\n*"


def _two_bodies_model(folder, first: str, second: str = "shield"):
    """Two spheres as a Gmsh file with a model file naming the conductors ``first``, ``second``."""
    import meshio

    v, t, labels = shapes.combine(shapes.sphere(1.0, 3), shapes.sphere(1.0, 3, center=(3.0, 0, 0)))
    tags = [np.full(int((labels == k).sum()), k + 1, np.int32) for k in (0, 1)]
    meshio.write(folder / "parts.msh", meshio.Mesh(v, [("triangle", t[labels == k]) for k in (0, 1)],
                                                   cell_data={"gmsh:physical": tags, "gmsh:geometrical": tags},
                                                   field_data={"a": np.array([1, 2]), "b": np.array([2, 2])}),
                 file_format="gmsh22", binary=False)
    quoted = first.replace("\\", "\\\\").replace('"', '\\"').replace("\n", "\\n").replace("\x1b", "\\u001b")
    (folder / "model.toml").write_text(f'mesh = "parts.msh"\nunit = "mm"\n[conductors."{quoted}"]\nsurfaces = ["a"]\n'
                                       f'[conductors.{second}]\nsurfaces = ["b"]\n')
    return folder / "model.toml"


def _cards(netlist: str) -> list[str]:
    """The lines SPICE reads as something other than a comment."""
    return [line for line in netlist.splitlines() if line.strip() and not line.startswith("*")]


def test_a_newline_in_a_conductor_name_cannot_inject_cards(tmp_path):
    model = _two_bodies_model(tmp_path, INJECTION)
    out = tmp_path / "x.cir"
    assert main(["solve", str(model), "-q", "--spice", str(out)]) == 0
    cards = _cards(out.read_text())
    assert cards[0].startswith(".subckt ") and cards[-1].startswith(".ends ")
    assert all(re.fullmatch(r"C\d+ \w+ \w+ [0-9.e+-]+[fpnum]?", c) for c in cards[1:-1]), cards
    assert not any(c.split()[0] in ("R1", ".include") for c in cards)


def test_ngspice_sees_only_capacitors(tmp_path):
    """The netlist of a hostile name runs in ngspice with one port current per capacitance:
    an injected resistor to ground would carry a DC current, and there is none."""
    if shutil.which("ngspice") is None:
        if os.environ.get("TRICHARGE_REQUIRE_NGSPICE"):
            pytest.fail("ngspice is required here (TRICHARGE_REQUIRE_NGSPICE is set) but not installed")
        pytest.skip("ngspice not installed: apt-get install -y ngspice")
    model = _two_bodies_model(tmp_path, INJECTION)
    out = tmp_path / "x.cir"
    assert main(["solve", str(model), "-q", "--spice", str(out)]) == 0
    name, nodes = re.search(r"^\.subckt (\S+) (.*)$", out.read_text(), re.M).groups()
    bench = tmp_path / "bench.cir"
    bench.write_text(f"* bench\n.include {out}\nX1 p1 p2 0 {name}\nV1 p1 0 DC 1\nV2 p2 0 DC 0\n"
                     ".control\nop\nprint i(v1) i(v2)\nquit 0\n.endc\n.end\n")
    run = subprocess.run(["ngspice", "-b", str(bench)], capture_output=True, text=True, timeout=60)
    assert run.returncode == 0, run.stdout + run.stderr
    currents = [float(x) for x in re.findall(r"i\(v\d\) = (\S+)", run.stdout)]
    assert len(currents) == 2 and max(abs(c) for c in currents) < 1e-9  # capacitors pass no DC current


def test_the_input_file_name_is_escaped_in_the_netlist_header(tmp_path):
    ball = tmp_path / "a\nR9 x 0 1.stl"
    trimesh.Trimesh(*shapes.sphere(1.0, 3), process=False).export(ball)
    out = tmp_path / "x.cir"
    assert main(["solve", str(ball), "-q", "--spice", str(out)]) == 0
    text = out.read_text()
    assert len(_cards(text)) == 3 and "a\\nR9 x 0 1.stl" in text


def test_subcircuit_escapes_every_text_it_is_given():
    circuit = subcircuit(np.array([[1e-12]]), ["x\ny"], header=("input \x1b[2Jevil\nC9 a b 1",),
                         reference="ref\nR1 a 0 1", name="bad\nname")
    cards = _cards(circuit.text)
    assert len(cards) == 3 and cards[0] == ".subckt bad_name x_y ref", cards


def test_csv_names_are_quoted_and_never_formulas(tmp_path):
    model = _two_bodies_model(tmp_path, "=cmd|' /C calc'!A0,x", "shield")
    out = tmp_path / "m.csv"
    assert main(["solve", str(model), "-q", "--csv", str(out)]) == 0
    rows = list(csv.reader(out.open()))
    assert [len(r) for r in rows] == [3, 3, 3]
    assert rows[0][1] == "'=cmd|' /C calc'!A0,x" and rows[1][0] == rows[0][1]
    assert all(not cell.startswith(("=", "+", "-", "@")) for row in rows for cell in row[:1] + rows[0])
    assert float(rows[1][2]) < 0  # numbers stay numbers, negative sign and all
    assert csv_cell("+1") == "'+1" and csv_cell("@x") == "'@x" and csv_cell("lead") == "lead"
    assert matrix_csv(["a\nb"], [[1.0]], form="maxwell").count("\n") == 2


def test_terminal_shows_control_characters_escaped(tmp_path, capsys):
    model = _two_bodies_model(tmp_path, "red\x1b[31m\nline")
    assert main(["solve", str(model)]) == 0
    out = capsys.readouterr().out
    assert "\x1b" not in out and "red\\x1b[31m\\nline" in out
    assert main(["inspect", str(model)]) == 0
    assert "\x1b" not in capsys.readouterr().out
    assert main(["solve", str(model), "--volts", "a\x1b=1"]) == 2
    err = capsys.readouterr().err
    assert "\x1b" not in err and err.count("\n") == 1


def test_an_undecodable_file_name_is_read_and_shown_escaped(tmp_path, capsys):
    raw = os.fsencode(str(tmp_path)) + b"/\xff\xfe.stl"
    trimesh.Trimesh(*shapes.sphere(1.0, 3), process=False).export(os.fsdecode(raw))
    assert main(["solve", os.fsdecode(raw), "--json", str(tmp_path / "r.json"),
                 "--spice", str(tmp_path / "r.cir")]) == 0
    out = capsys.readouterr().out
    assert "\\udcff\\udcfe.stl" in out
    assert "\\udcff" in (tmp_path / "r.cir").read_text()
    assert main(["solve", os.fsdecode(raw)[:-4] + "x.stl"]) == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and "file not found" in err


def test_names_that_look_like_formulas_or_are_huge_are_drawn_literally(tmp_path):
    """A `$...$` name would be parsed as mathematics by matplotlib (and crash on bad
    syntax); a 5,000-character name would fill the picture."""
    long_name = "x" * 5000
    model = _two_bodies_model(tmp_path, "$\\frac{$", long_name)
    (tmp_path / "model.toml").write_text((tmp_path / "model.toml").read_text()
                                         + 'volts = "0 V"\n')
    text = (tmp_path / "model.toml").read_text().replace('surfaces = ["a"]\n', 'surfaces = ["a"]\nvolts = "1 kV"\n', 1)
    (tmp_path / "model.toml").write_text(text)
    page = tmp_path / "r.html"
    assert main(["report", str(model), "--html", str(page), "-q"]) == 0
    assert page.stat().st_size > 10_000
    assert chart_label("$x$") == "\\$x\\$" and len(chart_label(long_name)) == 40


def test_printable_and_spice_comment_keep_ordinary_names():
    assert printable("Lead 1 (µ-pad)") == "Lead 1 (µ-pad)"
    assert printable("a\u202eb") == "a\\u202eb"  # a bidirectional override cannot reorder a line
    assert spice_comment("µ") == "\\xb5" and spice_comment("a;b") == "a;b"
