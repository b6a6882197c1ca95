"""Checks of VTK files before meshio reads them, so that a small hostile file cannot make
it allocate without bound.

VTK XML (.vtu), as meshio reads it (``meshio/vtu/_vtu.py``): no DOCTYPE or ENTITY
declarations; piece sizes (``NumberOfPoints``, ``NumberOfCells``) within the input
limit; for compressed files (``compressor`` zlib or lzma), every data array's block
header (``header_type`` UInt32 or UInt64: number of blocks, block size, last block size,
compressed sizes) is decoded, inline base64, appended base64 or appended raw alike,
the declared sizes are checked against the limits (:mod:`.limits`), and every block is
decompressed a chunk at a time, refused as soon as it yields more than it declared.
Nothing larger than one chunk is ever allocated for the expansion.

VTK legacy (.vtk): every declared count must fit in the file (one byte per number at
least), and grids generated from ``DIMENSIONS`` count as an expansion of the file.
"""

from __future__ import annotations

import base64
import lzma
import mmap
import re
import zlib
from pathlib import Path
from xml.etree import ElementTree as ET

import numpy as np

from ..errors import InputFileError
from .limits import check_count, check_expansion, check_size
from .rawsurface import unreadable

#: Bytes of one header integer by ``header_type`` (VTK allows only these two).
HEADER_TYPES = {"UInt32": 4, "UInt64": 8}

#: Bytes per value of the VTK XML data types.
ITEM_BYTES = {"Int8": 1, "UInt8": 1, "Int16": 2, "UInt16": 2, "Int32": 4, "UInt32": 4, "Int64": 8, "UInt64": 8,
              "Float32": 4, "Float64": 8}

#: Decompressed bytes produced per step while checking a block (our choice).
CHUNK = 2**20

#: Memory an lzma stream may ask for (bytes): xz's largest preset dictionary is 64 MiB
#: (from memory), so 256 MiB refuses only streams made to exhaust memory.
LZMA_MEMORY = 256 * 2**20

_DTD = re.compile(rb"<!\s*(?:DOCTYPE|ENTITY)", re.IGNORECASE)
_RAW_START = re.compile(rb'<AppendedData[^>]+(?:">)')  # meshio's own pattern


def scan_vtu(path: Path) -> tuple[int, int]:
    """Refuse a VTK XML file that is hostile or beyond the limits (InputFileError);
    returns the numbers of points and cells its pieces declare."""
    with open(path, "rb") as handle, mmap.mmap(handle.fileno(), 0, access=mmap.ACCESS_READ) as data:
        if _DTD.search(data):
            raise InputFileError(f"{path}: the file declares a DOCTYPE or ENTITY, which VTK files never have (entity "
                                 "declarations can expand without bound); export it again")
        root, appended = _parse(path, data)
        codec = _codec(path, root)
        counts = _check_pieces(path, root)
        if codec["compressor"] is None:
            return counts
        arrays = _raw_arrays(path, root, appended, codec) if isinstance(appended, bytes) else \
            _text_arrays(path, root, appended, codec)
        check_expansion(path, sum(declared for _, declared, _ in arrays), len(data))
        for name, declared, (block_size, last, blocks) in arrays:
            for k, block in enumerate(blocks):
                _inflate(path, codec["compressor"], block, last if k == len(blocks) - 1 else block_size, name)
    return counts


def _parse(path: Path, data) -> tuple:
    """(root element, appended data): the AppendedData text after '_' (str), raw bytes
    when the file has raw appended data (as meshio cuts them), or None."""
    parser = ET.XMLParser()
    try:
        for start in range(0, len(data), CHUNK):
            parser.feed(data[start:start + CHUNK])
        root = parser.close()
    except ET.ParseError:
        return _parse_raw(path, data)
    section = root.find("AppendedData")
    if section is None:
        return root, None
    text = (section.text or "").strip()
    return root, (text[1:] if text.startswith("_") else None)


def _parse_raw(path: Path, data) -> tuple:
    found = _RAW_START.search(data)
    stop = data.find(b"</AppendedData>")
    underscore = data.find(b"_", found.end(), stop) if found and stop > 0 else -1
    if underscore < 0:
        raise unreadable(path, "VTU", ValueError("not well-formed XML"))
    end = data.rfind(b"\n", underscore + 1, stop)
    try:
        root = ET.fromstring(data[:found.end()].decode() + data[stop:].decode())
    except (ET.ParseError, UnicodeDecodeError) as exc:
        raise unreadable(path, "VTU", exc) from None
    return root, data[underscore + 1:end if end >= 0 else stop]


def _codec(path: Path, root) -> dict:
    """Header integer size and byte order, and the decompressor module (or None)."""
    header_type = root.get("header_type", "UInt32")
    if header_type not in HEADER_TYPES:
        raise InputFileError(f"{path}: header_type {header_type[:40]!r} is not one VTK uses (UInt32, UInt64); export "
                             "it again")
    compressor = root.get("compressor")
    modules = {None: None, "vtkZLibDataCompressor": zlib, "vtkLZMADataCompressor": lzma}
    if compressor not in modules:
        raise InputFileError(f"{path}: unknown compressor {compressor[:60]!r}; export it with zlib, lzma or no "
                             "compression")
    order = "big" if root.get("byte_order") == "BigEndian" else "little"
    return {"size": HEADER_TYPES[header_type], "order": order, "compressor": modules[compressor]}


def _check_pieces(path: Path, root) -> tuple[int, int]:
    """Total points and cells the pieces declare, refused beyond the limit."""
    total_points = total_cells = 0
    for piece in root.iter("Piece"):
        try:
            points, cells = int(piece.get("NumberOfPoints", 0)), int(piece.get("NumberOfCells", 0))
        except ValueError as exc:
            raise unreadable(path, "VTU", exc) from None
        if points < 0 or cells < 0:
            raise InputFileError(f"{path}: a piece declares {points:,} points and {cells:,} cells; the file is corrupt")
        total_points, total_cells = total_points + points, total_cells + cells
    check_size(path, 12 * total_points, what=f"its pieces declare {total_points:,} points, coordinates of at least")
    check_size(path, 2 * total_cells, what=f"its pieces declare {total_cells:,} cells, types and offsets of at least")
    return total_points, total_cells


def _integers(raw: bytes, codec) -> np.ndarray:
    """Header integers of ``raw`` (whole integers only), as unsigned numpy integers."""
    size = codec["size"]
    dtype = np.dtype(f"{'>' if codec['order'] == 'big' else '<'}u{size}")
    return np.frombuffer(raw[:len(raw) // size * size], dtype=dtype)


def _declared(path: Path, name: str, header: np.ndarray, available: int) -> tuple[int, tuple]:
    """Declared decoded bytes and (block size, last block size, compressed sizes) of an
    array's block header (number of blocks, block size, last block size or 0, sizes)."""
    if len(header) < 3:
        raise InputFileError(f"{path}: data array '{name[:60]}' has a truncated block header; the file is corrupt")
    count, block_size = int(header[0]), int(header[1])
    last = int(header[2]) or block_size
    sizes = header[3:3 + count]
    if len(sizes) and int(sizes.max()) > available or int(sizes.sum(dtype=np.uint64)) > available:
        raise InputFileError(f"{path}: data array '{name[:60]}' declares more compressed bytes than the file has "
                             f"left ({max(available, 0):,}); the file is truncated or corrupt")
    return (count - 1) * block_size + last if count else 0, (block_size, last, [int(s) for s in sizes])


def _text_arrays(path: Path, root, appended, codec) -> list:
    """(name, declared bytes, (block size, last size, blocks)) of every compressed base64
    array (inline, or appended when the appended data are base64 text)."""
    arrays = []
    for element in root.iter("DataArray"):
        name, fmt = element.get("Name", "?"), element.get("format", "ascii")
        if fmt == "binary":
            text, start = (element.text or "").strip(), 0
        elif fmt == "appended" and appended is not None:
            text, start = appended, _offset(path, element)
        else:
            continue
        try:
            arrays.append(_text_array(path, name, text, start, codec))
        except ValueError as exc:  # binascii.Error, or text that is not ASCII
            raise unreadable(path, "VTU", exc) from None
    return arrays


def _text_array(path: Path, name: str, text: str, start: int, codec) -> tuple:
    """One base64 array as meshio reads it: the header's first integer (its base64 chars
    decoded alone), then the whole header, then the compressed blocks after it."""
    size = codec["size"]
    first = _integers(base64.b64decode(text[start:start + -(-size // 3) * 4])[:size], codec)
    if not len(first):
        raise InputFileError(f"{path}: data array '{name[:60]}' has no block header; the file is corrupt")
    check_count(path, f"data array '{name[:60]}'", int(first[0]), size, len(text) - start)
    header_chars = -(-(3 + int(first[0])) * size // 3) * 4
    header = _integers(base64.b64decode(text[start:start + header_chars]), codec)[:3 + int(first[0])]
    wanted = int(header[3:].sum(dtype=np.uint64)) if len(header) > 3 else 0
    body = start + header_chars
    raw = base64.b64decode(text[body:body + min(-(-wanted // 3) * 4 + 64, len(text))])
    if len(raw) < wanted:  # whitespace inside: decode the rest, as meshio does
        raw = base64.b64decode(text[body:])
    declared, (block_size, last, sizes) = _declared(path, name, header, len(raw))
    return name, declared, (block_size, last, _blocks(raw, 0, sizes))


def _raw_arrays(path: Path, root, data: bytes, codec) -> list:
    """The same for raw appended data, walked from offset 0 array by array as meshio does."""
    by_offset = {}
    for element in root.iter("DataArray"):
        by_offset.setdefault(element.get("offset"), element)
    arrays, i, size = [], 0, codec["size"]
    while i < len(data):
        element = by_offset.get(str(i))
        if element is None or len(data) < i + 3 * size:
            raise unreadable(path, "VTU", ValueError(f"no complete data array at appended offset {i}"))
        name = element.get("Name", "?")
        count = int(_integers(data[i:i + size], codec)[0])
        check_count(path, f"data array '{name[:60]}'", count, size, len(data) - i - 3 * size)
        start = i + (3 + count) * size
        declared, (block_size, last, sizes) = _declared(path, name, _integers(data[i:start], codec),
                                                         len(data) - start)
        arrays.append((name, declared, (block_size, last, _blocks(data, start, sizes))))
        i = start + sum(sizes)
    return arrays


def _offset(path: Path, element) -> int:
    try:
        return int(element.get("offset", ""))
    except ValueError as exc:
        raise unreadable(path, "VTU", exc) from None


def _blocks(raw: bytes, start: int, sizes: list[int]) -> list[bytes]:
    bounds = np.concatenate([[start], start + np.cumsum(sizes, dtype=np.int64)]).tolist()
    return [raw[a:b] for a, b in zip(bounds[:-1], bounds[1:])]


def _inflate(path: Path, module, block: bytes, expected: int, name: str) -> None:
    """Decompress ``block`` a chunk at a time; refuse it when it yields more than
    ``expected`` bytes, is corrupt or ends early. Concatenated lzma streams count
    together, and bytes after them that are no stream are ignored (as
    ``lzma.decompress`` does); zlib reads one stream (as ``zlib.decompress`` does)."""
    total, data, streams = 0, block, 0
    while data:
        engine = zlib.decompressobj() if module is zlib else lzma.LZMADecompressor(memlimit=LZMA_MEMORY)
        try:
            total = _drain(path, engine, data, total, expected, name)
        except (zlib.error, lzma.LZMAError) as exc:
            if streams:
                return
            raise InputFileError(f"{path}: a compressed block of data array '{name[:60]}' is corrupt ({exc}); "
                                 "export the file again") from None
        if not engine.eof:
            raise InputFileError(f"{path}: a compressed block of data array '{name[:60]}' ends early; the file is "
                                 "truncated or corrupt")
        streams += 1
        data = engine.unused_data if module is lzma else b""


def _drain(path: Path, engine, data: bytes, total: int, expected: int, name: str) -> int:
    """Feed ``data`` to a zlib or lzma decompressor, CHUNK bytes of output at a time,
    counting them onto ``total``; stop at the end of the stream or when it stalls."""
    out, pending = engine.decompress(data, CHUNK), len(data)
    while True:
        total += len(out)
        if total > expected:
            raise InputFileError(f"{path}: a compressed block of data array '{name[:60]}' expands beyond the "
                                 f"{expected:,} bytes it declares; the file is corrupt or hostile")
        more = getattr(engine, "unconsumed_tail", b"")
        stalled = not out and len(more) == pending
        if engine.eof or stalled or getattr(engine, "needs_input", not more and len(out) < CHUNK):
            return total
        pending = len(more)
        out = engine.decompress(more, CHUNK)


_LEGACY = re.compile(rb"^[ \t]*(POINTS|CELLS|POLYGONS|TRIANGLE_STRIPS|LINES|VERTICES|CELL_TYPES|CELL_DATA|POINT_DATA)"
                     rb"[ \t]+(\d+)(?:[ \t]+(\d+))?", re.MULTILINE)
_FIELD_ARRAY = re.compile(rb"^[ \t]*\S+[ \t]+(\d+)[ \t]+(\d+)[ \t]+(?:bit|unsigned_char|char|unsigned_short|short|"
                          rb"unsigned_int|int|unsigned_long|long|float|double|vtktypeu?int64)[ \t\r]*$", re.MULTILINE)
_DIMENSIONS = re.compile(rb"^[ \t]*DIMENSIONS[ \t]+(\d+)[ \t]+(\d+)[ \t]+(\d+)", re.MULTILINE)


def scan_vtk_legacy(path: Path) -> None:
    """Refuse a legacy .vtk file whose declared counts cannot fit in it, or whose grid
    dimensions would make meshio generate more points than the limits allow."""
    with open(path, "rb") as handle, mmap.mmap(handle.fileno(), 0, access=mmap.ACCESS_READ) as data:
        for found in _LEGACY.finditer(data):
            keyword, count = found[1].decode(), int(found[3] or found[2])
            numbers = 3 * count if keyword == "POINTS" else count
            check_count(path, f"the {keyword} line", numbers, 1, len(data))
        for found in _FIELD_ARRAY.finditer(data):
            check_count(path, "a FIELD array", int(found[1]) * int(found[2]), 1, len(data))
        for found in _DIMENSIONS.finditer(data):
            check_expansion(path, 24 * int(found[1]) * int(found[2]) * int(found[3]), len(data),
                            what="its DIMENSIONS make a grid whose coordinates take")
