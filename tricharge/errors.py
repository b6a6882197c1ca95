"""One exception hierarchy for everything tricharge reports to a user.

Each message names the input, what arrived, what was expected and how to fix it.
The CLI catches :class:`TrichargeError`, prints the message on one line and exits
with status 2. Library code never calls ``sys.exit``.
"""

from __future__ import annotations


class TrichargeError(Exception):
    """Base class of errors caused by the user's input (exit status 2 in the CLI)."""


class MeshError(TrichargeError, ValueError):
    """A surface mesh is empty, degenerate or otherwise unusable."""


class InputFileError(TrichargeError, OSError):
    """A file is missing, unreadable or in a format we cannot read."""


class OptionError(TrichargeError, ValueError):
    """A command-line option or keyword argument has an invalid value."""


class SolverError(TrichargeError, RuntimeError):
    """The linear system could not be solved (singular, or not converged)."""


class MissingDependency(TrichargeError, ImportError):
    """An optional package is needed for the requested feature; the message says how to
    install it."""
