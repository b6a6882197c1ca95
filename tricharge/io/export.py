"""Write results to files. Every write is atomic: a temporary file in the target's
folder is renamed over the target only when it is complete."""

from __future__ import annotations

import json
import os
import tempfile
from pathlib import Path

from ..errors import InputFileError


def check_writable(path) -> Path:
    """Fail early, before any work, when ``path`` cannot be written: missing folder or a directory."""
    path = Path(path)
    if path.is_dir():
        raise InputFileError(f"{path}: is a folder; give a file name for the output")
    if not path.parent.is_dir():
        raise InputFileError(f"{path}: folder {path.parent} does not exist; create it or choose another output path")
    if not os.access(path.parent, os.W_OK):
        raise InputFileError(f"{path}: folder {path.parent} is not writable; choose another output path")
    return path


def write_atomic(path, text: str) -> None:
    """Write ``text`` to ``path`` via a temporary file and a rename.

    An interrupted run leaves the previous file (or none), never a truncated one.
    """
    path = check_writable(path)
    folder = path.parent
    fd, tmp = tempfile.mkstemp(prefix=f".{path.name}.", suffix=".tmp", dir=folder)
    try:
        with os.fdopen(fd, "w", encoding="utf-8") as handle:
            handle.write(text)
        os.replace(tmp, path)
    except BaseException:
        Path(tmp).unlink(missing_ok=True)
        raise


def result_json(result, **provenance) -> str:
    """JSON text of a result: the stable keys of DESIGN.md plus provenance."""
    data = result.to_dict()
    data.update(provenance)
    return json.dumps(data, indent=2) + "\n"


def write_json(path, result, **provenance) -> None:
    """Write :func:`result_json` to ``path`` atomically."""
    write_atomic(path, result_json(result, **provenance))
