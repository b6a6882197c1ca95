"""How large an input may be, checked before it is read whole.

A file far beyond any model tricharge can solve is refused from its size on disk, and a
compressed payload from its declared size, before anything is allocated for it, with a
message that says the limit and how to raise it. Declared counts (points, cells) must
fit in the file that declares them.

The limits are settings, not facts: ``TRICHARGE_MAX_INPUT_MB`` (mebibytes) replaces
every one of them when set.
"""

from __future__ import annotations

import os
from pathlib import Path

from ..errors import InputFileError, OptionError

#: Largest mesh file (bytes), and largest decoded payload of a compressed one. The
#: largest solves measured (bench/fast.py) have 1e6 panels; a surface of 10 million
#: triangles, ten times more, takes about 0.5 GB as binary STL and 2.5 GB as ASCII STL,
#: so 2 GiB is far beyond any model that can be solved (our choice, no source).
MESH_FILE_LIMIT = 2 * 2**30

#: Largest model file (bytes). A model file lists names and settings, a few lines per
#: conductor: 4 MiB holds tens of thousands of conductors (our choice, no source).
MODEL_FILE_LIMIT = 4 * 2**20

#: The environment variable that replaces every limit here, in MiB.
LIMIT_VARIABLE = "TRICHARGE_MAX_INPUT_MB"

#: Compressed mesh data may expand at most this many times. Measured on meshio's VTU
#: output of spheres, plates and cubes (zlib and lzma, 72k-180k triangles): 2.9x to
#: 11.4x, base64 included. Zip-bomb guards use the same order (from memory: Apache POI
#: refuses entries that inflate more than 100 times).
MAX_EXPANSION = 100

#: Decoded payloads up to this size (bytes) are never refused for their expansion:
#: they are harmless whatever their ratio (our choice, no source).
EXPANSION_FLOOR = 64 * 2**20

_KINDS = {"mesh": MESH_FILE_LIMIT, "model": MODEL_FILE_LIMIT}


def input_limit(kind: str = "mesh") -> int:
    """Largest input of ``kind`` ("mesh" or "model"), bytes; ``TRICHARGE_MAX_INPUT_MB``
    replaces the default. Raises OptionError for an unusable value of the variable."""
    text = os.environ.get(LIMIT_VARIABLE, "").strip()
    if not text:
        return _KINDS[kind]
    try:
        mib = float(text)
    except ValueError:
        mib = float("nan")
    if not (0 < mib < 2**43):  # refuses nan, inf, zero, negatives and 8 EiB or more
        raise OptionError(f"{LIMIT_VARIABLE}={text[:40]!r} is not a size; give a positive number of MiB, e.g. "
                          f"{LIMIT_VARIABLE}=4096, or unset it for the defaults")
    return int(mib * 2**20)


def _mib(nbytes: float) -> str:
    """'2,048.0 MiB', or '3.5 KiB' below a MiB."""
    return f"{nbytes / 2**20:,.1f} MiB" if nbytes >= 2**20 else f"{nbytes / 2**10:,.1f} KiB"


def _raise_hint(needed: float) -> str:
    return f"{LIMIT_VARIABLE}={max(int(needed / 2**20) + 1, 1)}"


def check_input_file(path, kind: str = "mesh") -> Path:
    """A readable, non-empty regular file no larger than the ``kind`` limit, or an
    InputFileError saying what is wrong (OptionError for a bad limit variable)."""
    path = Path(path)
    try:
        if path.is_dir():
            raise InputFileError(f"{path}: is a folder, not a file; give the mesh or model file inside it")
        if not path.exists():
            raise InputFileError(f"{path}: file not found; check the path")
        if not path.is_file():
            raise InputFileError(f"{path}: is not a regular file (a device, pipe or socket); give a file")
        size = path.stat().st_size
    except (OSError, ValueError) as exc:  # a name too long, with a NUL character, no permission, ...
        if isinstance(exc, InputFileError):
            raise
        reason = getattr(exc, "strerror", None) or str(exc)
        raise InputFileError(f"{path}: cannot be opened ({reason}); check the path") from None
    if size == 0:
        raise InputFileError(f"{path}: the file is empty; export it again")
    check_size(path, size, kind)
    return path


def check_size(path, size: float, kind: str = "mesh", what: str = "the file has") -> None:
    """Refuse ``size`` bytes of a ``kind`` input beyond its limit (InputFileError)."""
    limit = input_limit(kind)
    if size > limit:
        raise InputFileError(f"{path}: {what} {_mib(size)}, more than the {_mib(limit)} a {kind} file may have "
                             f"(far beyond any model tricharge can solve); check it is the right file, or raise the "
                             f"limit with {_raise_hint(size)}")


def read_limited(path, kind: str = "mesh") -> bytes:
    """The bytes of a file checked by :func:`check_input_file`, never more than the
    limit (a file growing while read is refused too)."""
    limit = input_limit(kind)
    chunks, total = [], 0
    try:
        with open(path, "rb") as handle:
            size = os.fstat(handle.fileno()).st_size
            while total <= limit:  # asks for what the file holds (read(n) reserves n bytes), then more
                chunk = handle.read(min(max(size + 1 - total, 2**20), limit + 1 - total))
                if not chunk:
                    break
                chunks.append(chunk)
                total += len(chunk)
    except OSError as exc:
        raise InputFileError(f"{path}: cannot be read ({exc.strerror or exc}); check its permissions") from None
    if total > limit:
        check_size(path, max(total, size), kind)
    return b"".join(chunks)


def check_count(path, what: str, count: int, item_bytes: int, available: int) -> None:
    """Refuse a declared ``count`` of items of at least ``item_bytes`` bytes each that
    cannot fit in the ``available`` bytes of the file (InputFileError)."""
    if count < 0 or count * item_bytes > available:
        raise InputFileError(f"{path}: {what} declares {count:,} items, which need at least {count * item_bytes:,} "
                             f"bytes, but the file has {available:,}; the file is corrupt or truncated, export it "
                             "again")


def check_expansion(path, decoded: int, encoded: int, what: str = "its compressed data expand to") -> None:
    """Refuse data that declare ``decoded`` bytes from ``encoded`` bytes of file when
    that is beyond the mesh limit or expands more than MAX_EXPANSION times; ``what``
    says what expands."""
    check_size(path, decoded, "mesh", what=what)
    if decoded > EXPANSION_FLOOR and decoded > MAX_EXPANSION * encoded:
        raise InputFileError(f"{path}: {what} {_mib(decoded)} from {_mib(encoded)} "
                             f"({decoded / max(encoded, 1):,.0f} times; real meshes compress less than "
                             f"{MAX_EXPANSION} times); the file is corrupt or hostile, export it again")
