"""Output files, written so that a run never destroys anything.

Every file a command writes goes through an :class:`Outputs` plan, in two steps:

1. **Before any work** each output path is checked: its folder exists and is writable;
   it is not a folder, a block device or a socket; it is none of the run's inputs
   (compared as files, so a link or another spelling of the same file counts) and no
   other output of the same run. ``-`` means standard output for text outputs.
2. **After the work**, :meth:`Outputs.transaction` stages every file under a hidden
   temporary name in its target's folder and, only when all are staged, moves them into
   place. A failure while staging (a full disk, a chart that cannot be drawn, Ctrl-C)
   removes every staged file, so none of the run's outputs appears; a failure while
   moving puts back what was there before.

Files are created with the user's umask (mode ``0o666`` minus the umask, as any
program that calls ``open`` gets); a file that is replaced keeps its mode. Existing
FIFOs and character devices (``/dev/null``, ``/dev/stdout``, ``/dev/fd/N``, a named
pipe) are written through, after the regular files are in place; they are never
replaced by a regular file.

>>> import tempfile, pathlib
>>> folder = pathlib.Path(tempfile.mkdtemp())
>>> plan = Outputs(inputs=[])
>>> target = plan.add("--json", folder / "a.json")
>>> with plan.transaction() as stage:
...     stage.text(target, "{}\\n")
>>> (folder / "a.json").read_text(), [p.name for p in plan.written]
('{}\\n', ['a.json'])
"""

from __future__ import annotations

import errno
import os
import stat
import sys
from contextlib import contextmanager
from dataclasses import dataclass, field
from pathlib import Path
from typing import Callable

from ..errors import OptionError, TrichargeError
from ..names import printable


class OutputError(TrichargeError, OSError):
    """An output could not be written; nothing of the run was left behind."""


STDOUT = "-"


@dataclass(frozen=True)
class Target:
    """One output: the option that named it, where it goes, and how.

    path : the path as given; stream : written through (standard output, a FIFO or a
    character device) rather than staged and renamed; to_stdout : the stream is this
    process's standard output
    """

    option: str
    path: Path
    stream: bool = False
    to_stdout: bool = False

    @property
    def shown(self) -> str:
        return "standard output" if self.to_stdout else printable(self.path)


def _is_our_stdout(path: Path) -> bool:
    try:
        here, there = os.stat(path), os.fstat(sys.stdout.fileno())
    except (OSError, ValueError, AttributeError):
        return False
    return (here.st_dev, here.st_ino) == (there.st_dev, there.st_ino)


def _same_file(a: Path, b: Path) -> bool:
    try:
        return os.path.samefile(a, b)
    except OSError:
        return os.path.abspath(a) == os.path.abspath(b)


def _check_regular_target(option: str, path: Path) -> None:
    """A regular file (or a name that does not exist yet) in a writable folder."""
    shown = printable(path)
    if path.is_dir():
        raise OptionError(f"{option} {shown}: is a folder; give a file name for the output")
    folder = path.parent
    if not folder.is_dir():
        raise OptionError(f"{option} {shown}: folder {printable(folder)} does not exist; create it or choose "
                          "another output path")
    if not os.access(folder, os.W_OK | os.X_OK):
        raise OptionError(f"{option} {shown}: folder {printable(folder)} is not writable; choose another output path")
    if path.exists() and not os.access(path, os.W_OK):
        raise OptionError(f"{option} {shown}: the file exists and is read-only; choose another output path")


@dataclass
class Outputs:
    """The outputs of one run: checked when added, written together by :meth:`transaction`.

    inputs : paths of every file the run reads (more can be added with :meth:`add_inputs`)
    """

    inputs: list = field(default_factory=list)
    targets: list = field(default_factory=list)
    written: list = field(default_factory=list)
    #: ``stage -> None`` steps that write outputs found while reading (the CAD mesh), run
    #: in the transaction of :func:`tricharge.cli.common.commit`.
    staged_early: list = field(default_factory=list)

    def add(self, option: str, path, *, text: bool = True) -> Target | None:
        """Check the output ``path`` named by ``option`` and remember it (None passes through).

        ``text`` outputs may go to standard output as ``-``; binary ones may not.
        Raises OptionError for a path that cannot or must not be written.
        """
        if path is None:
            return None
        if str(path) == STDOUT:
            if not text:
                raise OptionError(f"{option} -: this output is binary and cannot go to standard output; "
                                  "give a file name")
            target = Target(option, Path(STDOUT), stream=True, to_stdout=True)
        else:
            target = self._file_target(option, Path(path))
        self._check_against_others(target)
        self.targets.append(target)
        return target

    def _file_target(self, option: str, path: Path) -> Target:
        shown = printable(path)
        try:
            mode = os.stat(path).st_mode
        except FileNotFoundError:
            mode = None
        except OSError as exc:
            raise OptionError(f"{option} {shown}: cannot be checked ({exc.strerror}); choose another output path") \
                from None
        on_device = str(path).startswith(("/dev/", "/proc/"))
        if mode is not None and (stat.S_ISFIFO(mode) or stat.S_ISCHR(mode) or (on_device and stat.S_ISREG(mode))):
            # a pipe, a device, or /dev/stdout, /dev/fd/N standing for an open file: write through
            return Target(option, path, stream=True, to_stdout=_is_our_stdout(path))
        if mode is not None and not stat.S_ISREG(mode) and not stat.S_ISDIR(mode):
            raise OptionError(f"{option} {shown}: is not a regular file (a block device or socket); give a file "
                              "name, or - for standard output")
        if on_device:
            raise OptionError(f"{option} {shown}: is not a place for files; give a file name, or - for standard "
                              "output")
        if path.is_symlink():  # write into the file the link points to; keep the link
            path = Path(os.path.realpath(path))
        _check_regular_target(option, path)
        return Target(option, path)

    def _check_against_others(self, target: Target) -> None:
        for other in self.targets:
            if target.to_stdout and other.to_stdout:
                raise OptionError(f"{target.option} and {other.option} both write to standard output; send one of "
                                  "them to a file")
            devices = target.stream and other.stream and not (target.to_stdout or other.to_stdout)
            if not devices and _same_file(target.path, other.path):
                raise OptionError(f"{target.option} and {other.option} name the same file {target.shown}; give each "
                                  "output its own name")
        self._check_inputs([target], self.inputs)

    def add_inputs(self, paths) -> None:
        """Declare more input files (e.g. the meshes a model file names) and check every
        output against them; raises OptionError when an output would replace an input."""
        paths = [Path(p) for p in paths]
        self._check_inputs(self.targets, paths)
        self.inputs.extend(paths)

    @staticmethod
    def _check_inputs(targets, inputs) -> None:
        for target in targets:
            if target.to_stdout:
                continue
            for source in inputs:
                if _same_file(target.path, source):
                    raise OptionError(f"{target.option} {target.shown}: this is an input of the run "
                                      f"({printable(source)}); an output never replaces an input, choose another "
                                      "name")

    @property
    def to_stdout(self) -> bool:
        """True when an output goes to standard output (the report should then go to stderr)."""
        return any(t.to_stdout for t in self.targets)

    @contextmanager
    def transaction(self):
        """Stage outputs inside the ``with`` block; on leaving it normally they are all
        moved into place, on an exception none is. The paths written are appended to
        :attr:`written` (standard output shown as ``-``)."""
        stage = _Stage()
        try:
            yield stage
            stage.commit()
        except BaseException:
            stage.discard()
            raise
        self.written.extend(t.path for t in stage.done)


def _unique_name(folder: Path, name: str, suffix: str, make: Callable[[Path], None]) -> Path:
    """``make(path)`` for a new hidden path in ``folder`` ending in ``suffix``; retried with
    another random part while the name is taken."""
    import secrets

    for _ in range(100):
        path = folder / f".{name}.{secrets.token_hex(4)}{suffix}"
        try:
            make(path)
            return path
        except FileExistsError:
            continue
    raise OutputError(f"{printable(folder)}: cannot create a temporary file there; remove stray hidden files")


def _create_private(folder: Path, name: str, suffix: str) -> Path:
    """A new, empty file in ``folder`` with a unique hidden name ending in ``suffix``,
    created with mode 0o666 so the kernel applies the user's umask."""
    return _unique_name(folder, name, ".part" + suffix,
                        lambda path: os.close(os.open(path, os.O_WRONLY | os.O_CREAT | os.O_EXCL, 0o666)))


class _Stage:
    """Files staged for one transaction (see :meth:`Outputs.transaction`)."""

    def __init__(self):
        self.staged: list[tuple[Target, Path | bytes]] = []
        self.done: list[Target] = []

    # -- staging -----------------------------------------------------------------------

    def text(self, target: Target | None, text: str) -> None:
        """Stage ``text`` (UTF-8) for ``target`` (None: nothing asked, nothing done)."""
        if target is not None:
            self.bytes(target, text.encode("utf-8", errors="backslashreplace"))

    def bytes(self, target: Target | None, data: bytes) -> None:
        """Stage ``data`` for ``target``."""
        if target is None:
            return
        if target.stream:
            self.staged.append((target, bytes(data)))
            return
        self.file(target, lambda path: path.write_bytes(data))

    def file(self, target: Target | None, writer: Callable[[Path], object]) -> None:
        """Stage a file that ``writer(path)`` writes (for libraries that write to a path);
        the temporary path ends with the target's own suffix."""
        if target is None:
            return
        if target.stream:
            import tempfile

            with tempfile.TemporaryDirectory() as folder:
                scratch = Path(folder) / f"out{target.path.suffix}"
                writer(scratch)
                self.staged.append((target, scratch.read_bytes()))
            return
        path = _create_private(target.path.parent, target.path.name, target.path.suffix)
        self.staged.append((target, path))
        try:
            writer(path)
            if target.path.exists():  # a replaced file keeps its mode
                os.chmod(path, stat.S_IMODE(os.stat(target.path).st_mode))
        except OSError as exc:
            raise _write_failed(target, exc) from None

    # -- commit or discard ---------------------------------------------------------------

    def discard(self) -> None:
        for _, staged in self.staged:
            if isinstance(staged, Path):
                staged.unlink(missing_ok=True)
        self.staged = []

    def commit(self) -> None:
        files = [(t, p) for t, p in self.staged if isinstance(p, Path)]
        streams = [(t, d) for t, d in self.staged if not isinstance(d, Path)]
        moved: list[tuple[Target, Path | None]] = []
        try:
            for target, staged in files:
                backup = _keep_previous(target.path)
                os.replace(staged, target.path)
                moved.append((target, backup))
        except OSError as exc:
            _restore(moved)
            raise _write_failed(target, exc, moved=True) from None
        for _, backup in moved:
            if backup is not None:
                backup.unlink(missing_ok=True)
        self.done = [t for t, _ in moved]
        self.staged = []
        for target, data in streams:
            _write_stream(target, data)
            self.done.append(target)


def _keep_previous(path: Path) -> Path | None:
    """A hard link to the file ``path`` replaces (None if there is none), so it can be restored."""
    if not path.exists():
        return None
    try:
        return _unique_name(path.parent, path.name, ".previous", lambda backup: os.link(path, backup))
    except OSError:  # no hard links on this file system: fall back to a copy
        import shutil

        return _unique_name(path.parent, path.name, ".previous",
                            lambda backup: shutil.copy2(path, _exclusive(backup)))


def _exclusive(path: Path) -> Path:
    """``path`` after creating it empty, failing with FileExistsError when it exists."""
    os.close(os.open(path, os.O_WRONLY | os.O_CREAT | os.O_EXCL, 0o600))
    return path


def _restore(moved) -> None:
    for target, backup in reversed(moved):
        if backup is None:
            target.path.unlink(missing_ok=True)
        else:
            os.replace(backup, target.path)


def _write_stream(target: Target, data: bytes) -> None:
    try:
        if target.to_stdout:
            sys.stdout.flush()
            handle = sys.stdout.buffer
            handle.write(data)
            handle.flush()
        else:
            with open(target.path, "wb") as handle:
                handle.write(data)
    except OSError as exc:
        raise OutputError(f"{target.option} {target.shown}: writing failed ({exc.strerror or exc}); the files "
                          "before it were written") from None


def _write_failed(target: Target, exc: OSError, *, moved: bool = False) -> OutputError:
    reason = exc.strerror or str(exc)
    if exc.errno in (errno.ENOSPC, errno.EDQUOT):
        reason = "no space left on the device; free some space or write to another folder"
    what = "the outputs already moved were put back" if moved else "no output was written"
    return OutputError(f"{target.option} {target.shown}: cannot be written ({reason}); {what}")


def write_text(path, text: str, *, option: str = "output") -> Path:
    """Write one text file atomically (a one-file :class:`Outputs` plan); returns the path."""
    plan = Outputs()
    target = plan.add(option, path)
    with plan.transaction() as stage:
        stage.text(target, text)
    return Path(path)


def write_bytes(path, data: bytes, *, option: str = "output") -> Path:
    """Binary twin of :func:`write_text`."""
    plan = Outputs()
    target = plan.add(option, path, text=False)
    with plan.transaction() as stage:
        stage.bytes(target, data)
    return Path(path)
