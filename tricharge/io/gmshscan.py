"""What we read of a Gmsh file ourselves, before meshio reads it: the declared node and
element counts (which must fit in the file) and the ``$PhysicalNames`` section.

meshio keeps physical names in a dict keyed by name, so of two groups with the same
name one loses its name; reading the section here keeps every (dimension, tag, name)
entry. The section is text in ASCII and binary files alike, in format 2 and 4.
"""

from __future__ import annotations

import mmap
import re
import shlex
import struct
from pathlib import Path

from ..errors import InputFileError
from .limits import check_count

#: Smallest number of bytes a node or an element takes, by (format major version,
#: binary): a node is a tag and three coordinates ("1 0 0 0\n", or 4 + 24 bytes in
#: binary format 2, 24 bytes of coordinates in format 4); an element at least two
#: numbers (from the format specification as we read it; the bound only has to be low).
NODE_BYTES = {(2, False): 8, (2, True): 28, (4, False): 8, (4, True): 24}
ELEMENT_BYTES = {(2, False): 8, (2, True): 8, (4, False): 4, (4, True): 8}

#: Most of a $PhysicalNames section read (bytes): 100,000 names of 600 characters
#: (our choice, no source); a longer section is cut there and meshio judges the rest.
NAMES_BYTES = 64 * 2**20

_FORMAT = re.compile(rb"\$MeshFormat[ \t\r]*\n[ \t]*(\d+)(?:\.\d+)?[ \t]+(\d+)[ \t]+(\d+)")


def _section(data, name: bytes) -> int:
    """Offset just after the line ``$<name>`` (first at a line start), or -1."""
    found = re.search(rb"(?:^|\n)\$" + name + rb"[ \t\r]*\n", data)
    return found.end() if found else -1


def _declared(data, start: int, version: int, binary: bool, size_t: int) -> int:
    """The total count at the start of a $Nodes/$Elements section."""
    if version >= 4 and binary:
        fields = struct.unpack_from("<4Q" if size_t == 8 else "<4I", data, start)
        return int(fields[1])
    line = bytes(data[start:start + 200]).split(b"\n", 1)[0].split()
    return int(line[1] if version >= 4 else line[0])


def check_gmsh_counts(path: Path) -> None:
    """Refuse a .msh file whose $Nodes or $Elements count cannot fit in the file."""
    with open(path, "rb") as handle, mmap.mmap(handle.fileno(), 0, access=mmap.ACCESS_READ) as data:
        header = _FORMAT.search(data, 0, 4096)
        if header is None:
            return  # not a Gmsh file we understand: meshio says so
        version, binary, size_t = int(header[1]), header[2] != b"0", int(header[3])
        key = (4 if version >= 4 else 2, binary)
        for name, item_bytes in ((b"Nodes", NODE_BYTES[key]), (b"Elements", ELEMENT_BYTES[key])):
            start = _section(data, name)
            if start < 0:
                continue
            try:
                count = _declared(data, start, version, binary, size_t)
            except (ValueError, IndexError, struct.error):
                continue  # malformed: meshio reports it
            check_count(path, f"the ${name.decode()} section", count, item_bytes, len(data) - start)


def physical_names(path: Path) -> list[tuple[int, int, str]]:
    """(dimension, tag, name) of every entry of the file's $PhysicalNames section, in
    file order, parsed as meshio does (shell-like quoting, the third word is the name).

    Raises InputFileError for an entry meshio could not read either, saying which line.
    """
    with open(path, "rb") as handle, mmap.mmap(handle.fileno(), 0, access=mmap.ACCESS_READ) as data:
        start = _section(data, b"PhysicalNames")
        if start < 0:
            return []
        end = data.find(b"$EndPhysicalNames", start, start + NAMES_BYTES)
        text = bytes(data[start:end if end >= 0 else start + NAMES_BYTES])
    lines = text.split(b"\n")
    entries = []
    try:
        count = int(lines[0])
    except ValueError:
        raise InputFileError(f"{path}: the $PhysicalNames section does not start with a count; export it "
                             "again") from None
    for k, line in enumerate(lines[1:count + 1], start=1):
        try:
            words = shlex.split(line.decode("utf-8"))
            entries.append((int(words[0]), int(words[1]), words[2]))
        except (ValueError, IndexError) as exc:  # UnicodeDecodeError is a ValueError
            reason = "is not UTF-8 text" if isinstance(exc, UnicodeDecodeError) else "is not: dimension tag \"name\""
            raise InputFileError(f"{path}: entry {k} of $PhysicalNames {reason}; rename the physical group in "
                                 "Gmsh and export again") from None
    return entries
