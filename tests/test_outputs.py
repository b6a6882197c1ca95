"""A run never destroys anything: outputs are checked against inputs and each other
before any work, written as one transaction, with the user's umask, and never put a
regular file in place of a device, a pipe or standard output."""

import errno
import json
import os
import socket
import stat
import threading

import numpy as np
import pytest
import trimesh

from tricharge import shapes
from tricharge.cli import main
from tricharge.errors import OptionError
from tricharge.io import files
from tricharge.io.files import OutputError, Outputs


def _ball(folder, name="ball.stl"):
    path = folder / name
    trimesh.Trimesh(*shapes.sphere(1.0, 3), process=False).export(path)
    return path


def _model_file(folder):
    _ball(folder, "part.stl")
    path = folder / "model.toml"
    path.write_text('mesh = "part.stl"\nunit = "mm"\n')
    return path


def _snapshot(folder):
    return {p.name: (p.read_bytes(), stat.S_IMODE(p.stat().st_mode)) for p in folder.iterdir() if p.is_file()}


def _one_error_line(capsys, *fragments):
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and err.startswith("tricharge: error: "), err
    for fragment in fragments:
        assert fragment in err, err
    return err


@pytest.mark.parametrize("option", ["--json", "--spice", "--csv", "--npz", "--vtu"])
def test_an_output_never_replaces_the_input_mesh(tmp_path, capsys, option):
    mesh = _ball(tmp_path)
    before = _snapshot(tmp_path)
    assert main(["solve", str(mesh), option, str(mesh)]) == 2
    _one_error_line(capsys, "is an input of the run")
    assert _snapshot(tmp_path) == before


def test_an_output_never_replaces_a_mesh_named_by_the_model_file(tmp_path, capsys):
    model = _model_file(tmp_path)
    before = _snapshot(tmp_path)
    for option, target in (("--spice", model), ("--csv", tmp_path / "part.stl"),
                           ("--json", tmp_path / "sub" / ".." / "part.stl")):
        (tmp_path / "sub").mkdir(exist_ok=True)
        assert main(["solve", str(model), option, str(target)]) == 2
        _one_error_line(capsys, "is an input of the run")
    assert _snapshot(tmp_path) == before


def test_links_to_an_input_are_the_input(tmp_path, capsys):
    mesh = _ball(tmp_path)
    (tmp_path / "soft.json").symlink_to(mesh)
    os.link(mesh, tmp_path / "hard.json")
    for name in ("soft.json", "hard.json"):
        assert main(["solve", str(mesh), "--json", str(tmp_path / name)]) == 2
        _one_error_line(capsys, "is an input of the run")
    assert mesh.read_bytes() == (tmp_path / "hard.json").read_bytes()


def test_two_outputs_may_not_share_a_file(tmp_path, capsys):
    mesh = _ball(tmp_path)
    assert main(["solve", str(mesh), "--json", str(tmp_path / "x"), "--csv", str(tmp_path / "x")]) == 2
    _one_error_line(capsys, "--csv and --json name the same file")
    assert main(["field", str(mesh), "--volts", "c1=1", "--samples", "-", "--json", "-", "--probe", "3,0,0"]) == 2
    _one_error_line(capsys, "both write to standard output")
    assert sorted(p.name for p in tmp_path.iterdir()) == ["ball.stl"]


def test_a_failing_later_output_leaves_none_of_the_run(tmp_path, capsys, monkeypatch):
    """A full disk while writing the third output: the first two are taken back, the
    message says so truly, and it is a user's error (exit 2)."""
    mesh = _ball(tmp_path)
    (tmp_path / "keep.csv").write_text("old\n")
    real = files._Stage.file
    calls = []

    def full_disk(self, target, writer):
        calls.append(target)
        if len(calls) == 3:
            raise files._write_failed(target, OSError(errno.ENOSPC, "No space left on device"))
        return real(self, target, writer)

    monkeypatch.setattr(files._Stage, "file", full_disk)
    before = _snapshot(tmp_path)
    code = main(["solve", str(mesh), "-q", "--json", str(tmp_path / "a.json"), "--csv", str(tmp_path / "keep.csv"),
                 "--npz", str(tmp_path / "c.npz")])
    assert code == 2
    _one_error_line(capsys, "--npz", "no space left on the device", "no output was written")
    assert _snapshot(tmp_path) == before


def test_a_chart_that_fails_leaves_nothing(tmp_path, capsys, monkeypatch):
    from tricharge.viz import plots

    mesh = _ball(tmp_path)

    def broken(*args, **kwargs):
        raise RuntimeError("drawing failed")

    monkeypatch.setattr(plots, "convergence_chart", broken)
    before = _snapshot(tmp_path)
    assert main(["solve", str(mesh), "-q", "--levels", "2", "--json", str(tmp_path / "a.json"),
                 "--study-png", str(tmp_path / "s.png")]) == 1
    assert "drawing failed" in capsys.readouterr().err
    assert _snapshot(tmp_path) == before


def test_a_failure_while_moving_puts_back_what_was_there(tmp_path, monkeypatch):
    (tmp_path / "a.txt").write_text("old a\n")
    plan = Outputs()
    a, b = plan.add("--a", tmp_path / "a.txt"), plan.add("--b", tmp_path / "b.txt")
    real, moved = os.replace, []

    def failing(src, dst):
        moved.append(dst)
        if str(dst).endswith("b.txt"):
            raise OSError(errno.EIO, "Input/output error")
        return real(src, dst)

    monkeypatch.setattr(files.os, "replace", failing)
    with pytest.raises(OutputError, match="--b .*b.txt: cannot be written .*the outputs already moved were put back"):
        with plan.transaction() as stage:
            stage.text(a, "new a\n")
            stage.text(b, "new b\n")
    monkeypatch.setattr(files.os, "replace", real)
    assert sorted(p.name for p in tmp_path.iterdir()) == ["a.txt"] and (tmp_path / "a.txt").read_text() == "old a\n"


@pytest.mark.parametrize("mask, mode", [(0o022, 0o644), (0o077, 0o600), (0o002, 0o664)])
def test_new_files_follow_the_umask(tmp_path, mask, mode):
    old = os.umask(mask)
    try:
        mesh = _ball(tmp_path)
        assert main(["solve", str(mesh), "-q", "--json", str(tmp_path / "r.json"), "--npz", str(tmp_path / "r.npz"),
                     "--spice", str(tmp_path / "r.cir")]) == 0
    finally:
        os.umask(old)
    for name in ("r.json", "r.npz", "r.cir"):
        assert stat.S_IMODE((tmp_path / name).stat().st_mode) == mode, name


def test_a_replaced_file_keeps_its_mode(tmp_path):
    mesh = _ball(tmp_path)
    target = tmp_path / "r.json"
    target.write_text("{}")
    target.chmod(0o640)
    assert main(["solve", str(mesh), "-q", "--json", str(target)]) == 0
    assert stat.S_IMODE(target.stat().st_mode) == 0o640 and json.loads(target.read_text())["panels"] == 180


def test_dash_is_standard_output_for_text_and_the_report_moves_to_stderr(tmp_path, capsys):
    mesh = _ball(tmp_path)
    assert main(["solve", str(mesh), "--json", "-"]) == 0
    captured = capsys.readouterr()
    assert json.loads(captured.out)["panels"] == 180  # stdout holds the JSON and nothing else
    assert "Capacitance matrix" in captured.err
    assert main(["solve", str(mesh), "--npz", "-"]) == 2
    _one_error_line(capsys, "--npz -: this output is binary")
    assert not (tmp_path / "-").exists()


def test_csv_to_standard_output_through_dev_stdout(tmp_path, capfd):
    mesh = _ball(tmp_path)
    assert main(["solve", str(mesh), "-q", "--csv", "/dev/stdout"]) == 0
    out = capfd.readouterr().out
    assert out.startswith("maxwell_F,c1\n")


def test_devices_and_pipes_are_written_through_not_replaced(tmp_path):
    mesh = _ball(tmp_path)
    assert main(["solve", str(mesh), "-q", "--json", "/dev/null", "--spice", "/dev/null"]) == 0
    assert stat.S_ISCHR(os.stat("/dev/null").st_mode)
    fifo = tmp_path / "pipe"
    os.mkfifo(fifo)
    received = []
    reader = threading.Thread(target=lambda: received.append(fifo.read_bytes()))
    reader.start()
    assert main(["solve", str(mesh), "-q", "--spice", str(fifo)]) == 0
    reader.join(timeout=30)
    assert stat.S_ISFIFO(fifo.stat().st_mode) and b".subckt ball" in received[0]


def test_sockets_and_proc_paths_are_refused_before_solving(tmp_path, capsys):
    mesh = _ball(tmp_path)
    server = socket.socket(socket.AF_UNIX)
    server.bind(str(tmp_path / "sock"))
    try:
        assert main(["solve", str(mesh), "--json", str(tmp_path / "sock")]) == 2
        _one_error_line(capsys, "is not a regular file")
    finally:
        server.close()
    assert main(["solve", str(mesh), "--json", "/proc/self/nothing.json"]) == 2
    _one_error_line(capsys, "is not a place for files")


def test_a_symlinked_output_writes_through_the_link(tmp_path):
    mesh = _ball(tmp_path)
    (tmp_path / "real.json").write_text("old")
    (tmp_path / "link.json").symlink_to(tmp_path / "real.json")
    assert main(["solve", str(mesh), "-q", "--json", str(tmp_path / "link.json")]) == 0
    assert (tmp_path / "link.json").is_symlink() and json.loads((tmp_path / "real.json").read_text())["panels"] == 180


def test_outputs_plan_refuses_by_name():
    plan = Outputs()
    with pytest.raises(OptionError, match="--png -: this output is binary"):
        plan.add("--png", "-", text=False)
    with pytest.raises(OptionError, match="folder .* does not exist"):
        plan.add("--json", "/nonexistent-folder/x.json")
    assert plan.add("--json", None) is None and not plan.to_stdout


def test_no_stray_files_after_any_run(tmp_path):
    mesh = _ball(tmp_path)
    assert main(["solve", str(mesh), "-q", "--json", str(tmp_path / "r.json"), "--vtu", str(tmp_path / "r.vtu")]) == 0
    assert sorted(p.name for p in tmp_path.iterdir()) == ["ball.stl", "r.json", "r.vtu"]
    assert np.isfinite(json.loads((tmp_path / "r.json").read_text())["capacitance_matrix"][0][0])
