"""Command line: parse arguments, call the library, report. No numerics here.

Every command follows the same order, so a mistake costs seconds, not a solve: options
and output paths are checked first (:class:`~tricharge.io.files.Outputs`), then the
input is read and the outputs are checked against every file it names, then memory and
optional libraries, and only then the work; the files are written together at the end.

Exit status: 0 success, 2 bad input (one line on stderr), 1 internal error, 130 interrupted.
"""

from __future__ import annotations

import os
import sys

import click

from ..errors import TrichargeError
from ..names import printable
from . import capacitance, fields, sweeps  # noqa: F401  (the commands register themselves on the group)
from .common import cli

__all__ = ["cli", "main", "run"]


def _error(text: str) -> int:
    click.echo(f"tricharge: error: {printable(text)}", err=True)
    return 2


def main(argv: list[str] | None = None) -> int:
    """Run the command line in-process and return the exit status (for tests and ``run``)."""
    no_args = getattr(click.exceptions, "NoArgsIsHelpError", ())  # click >= 8.2
    try:
        cli.main(args=argv, prog_name="tricharge", standalone_mode=False)
    except click.exceptions.Exit as exc:
        return exc.exit_code
    except (click.exceptions.Abort, KeyboardInterrupt):
        click.echo("tricharge: interrupted; no output was written", err=True)
        return 130
    except no_args as exc:
        click.echo(exc.format_message())
        return 2
    except click.ClickException as exc:
        return _error(exc.format_message())
    except TrichargeError as exc:
        return _error(str(exc))
    except RecursionError:
        return _error("the input is nested too deeply to be read; simplify it")
    except MemoryError:
        return _error("ran out of memory; use --method fast, a coarser mesh or fewer refinement levels")
    except OSError as exc:  # the file system refused: a user's matter, said in one line
        where = f"{exc.filename}: " if exc.filename else ""
        return _error(f"{where}{exc.strerror or exc}; check the path, its permissions and the free space")
    except Exception as exc:  # an internal error: say so in one line, traceback on request
        if os.environ.get("TRICHARGE_DEBUG"):
            raise
        click.echo(f"tricharge: internal error: {type(exc).__name__}: {printable(exc)} "
                   "(set TRICHARGE_DEBUG=1 for a traceback, and please report it)", err=True)
        return 1
    return 0


def _terminated(signum, frame):
    raise KeyboardInterrupt  # same clean-up as Ctrl-C: staged outputs are removed


def run() -> None:
    """Console-script entry point (SIGTERM stops as cleanly as Ctrl-C)."""
    import signal

    signal.signal(signal.SIGTERM, _terminated)
    sys.exit(main())
