"""Where tricharge keeps files it can make again: numba's compiled kernels.

Never inside the installed package. pip removes only the files it installed, so compiled
kernels written beside the source stay behind when the package is uninstalled or
reinstalled, and the leftover ``site-packages/tricharge`` folder then hides an editable
install of the same package as an empty namespace package.

The folder is ``$TRICHARGE_CACHE_DIR`` when that is set, otherwise ``tricharge`` in the
user's cache folder (``$XDG_CACHE_HOME``, or ``~/.cache``); compiled kernels go into its
``numba`` subfolder. Without ``TRICHARGE_CACHE_DIR``, a cache folder the user gave numba
itself (``NUMBA_CACHE_DIR``) is used as it is. When the chosen folder cannot be created
or written, the kernels are compiled on every run instead of cached (a few seconds).
"""

from __future__ import annotations

import os
import tempfile
from pathlib import Path

#: Environment variable naming tricharge's cache folder.
CACHE_VARIABLE = "TRICHARGE_CACHE_DIR"


def cache_root() -> Path | None:
    """tricharge's cache folder (not created here); None when no home folder is known."""
    own = os.environ.get(CACHE_VARIABLE)
    if own:
        return Path(own).expanduser().absolute()
    xdg = os.environ.get("XDG_CACHE_HOME")
    if xdg and Path(xdg).is_absolute():  # the XDG rules ignore a relative value
        return Path(xdg) / "tricharge"
    try:
        return Path.home() / ".cache" / "tricharge"
    except RuntimeError:  # no HOME and no password-database entry
        return None


def writable_folder(path: Path | None) -> Path | None:
    """``path``, created if needed, when a file can be written in it; otherwise None."""
    if path is None:
        return None
    try:
        path.mkdir(parents=True, exist_ok=True)
        tempfile.TemporaryFile(dir=path).close()
    except OSError:
        return None
    return path


def numba_cache_dir(numba_setting: str = "") -> Path | None:
    """The folder for numba's compiled kernels, created; None to compile without caching.

    ``numba_setting`` is numba's own cache folder setting (``numba.config.CACHE_DIR``,
    from ``NUMBA_CACHE_DIR``), used when ``TRICHARGE_CACHE_DIR`` is not set.
    """
    if not os.environ.get(CACHE_VARIABLE) and numba_setting:
        return writable_folder(Path(numba_setting).expanduser().absolute())
    root = cache_root()
    return writable_folder(None if root is None else root / "numba")
