"""Progress bars (tqdm) as a terminal shows them: one bar per stage on stderr, named
after the stage, counted in panels or iterations; nothing when quiet or not a terminal."""

import io

import pytest

from tricharge.terminal import Progress


class _Terminal(io.StringIO):
    def isatty(self):
        return True


def _run(monkeypatch, stream, quiet=False) -> Progress:
    monkeypatch.setattr("sys.stderr", stream)
    progress = Progress(quiet)
    for done in range(0, 101, 25):
        progress("near field", done, 100)
    for done in range(3):
        progress("level 2/3: iterations", done, 0)
    return progress


@pytest.mark.smoke
def test_a_bar_per_stage_on_a_terminal(monkeypatch):
    terminal = _Terminal()
    progress = _run(monkeypatch, terminal)
    assert progress.stage == "level 2/3: iterations" and progress.bar is not None
    progress.close()
    assert progress.bar is None
    text = terminal.getvalue()
    assert "near field" in text and "/100" in text and "panels/s" in text
    assert "level 2/3: iterations" in text and "it/s" in text


def test_silent_when_quiet_or_not_a_terminal(monkeypatch):
    for stream, quiet in ((_Terminal(), True), (io.StringIO(), False)):
        progress = _run(monkeypatch, stream, quiet)
        progress.close()
        assert stream.getvalue() == "" and progress.bar is None
