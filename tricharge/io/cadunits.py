"""The length unit a STEP or IGES file declares, read from its text, so that a user who
knows the file's numbers are really in another unit can say so (``--cad-unit``).

STEP (ISO 10303-21): the ``LENGTH_UNIT`` of the file's unit context, an ``SI_UNIT`` with
an optional prefix (``SI_UNIT(.MILLI.,.METRE.)``, ``SI_UNIT($,.METRE.)``) or a
``CONVERSION_BASED_UNIT`` named ``'INCH'``, ``'FOOT'``... IGES (5.3, global section):
parameter 14, the units flag (1 inch, 2 mm, 3 named by parameter 15, 4 foot, 5 mile,
6 metre, 7 km, 8 mil, 9 micron, 10 cm, 11 microinch).
"""

from __future__ import annotations

import re
from pathlib import Path

from ..errors import InputFileError

#: Metres per declared unit, by the names the two formats use.
STEP_PREFIXES = {"$": 1.0, ".KILO.": 1e3, ".DECI.": 0.1, ".CENTI.": 1e-2, ".MILLI.": 1e-3, ".MICRO.": 1e-6,
                 ".NANO.": 1e-9}
NAMED_UNITS = {"INCH": 0.0254, "IN": 0.0254, "FOOT": 0.3048, "FT": 0.3048, "MIL": 2.54e-5, "MM": 1e-3, "CM": 1e-2,
               "M": 1.0, "UM": 1e-6, "MICRON": 1e-6, "KM": 1e3, "MI": 1609.344, "MILE": 1609.344,
               "UIN": 2.54e-8}
IGES_FLAGS = {1: 0.0254, 2: 1e-3, 4: 0.3048, 5: 1609.344, 6: 1.0, 7: 1e3, 8: 2.54e-5, 9: 1e-6, 10: 1e-2, 11: 2.54e-8}

_STEP_SI = re.compile(r"LENGTH_UNIT\s*\(\s*\)[^;]*?SI_UNIT\s*\(\s*(\$|\.[A-Z]+\.)\s*,\s*\.METRE\.\s*\)"
                      r"|SI_UNIT\s*\(\s*(\$|\.[A-Z]+\.)\s*,\s*\.METRE\.\s*\)[^;]*?LENGTH_UNIT", re.S)
_STEP_NAMED = re.compile(r"CONVERSION_BASED_UNIT\s*\(\s*'([^']*)'[^;]*?LENGTH_UNIT"
                         r"|LENGTH_UNIT\s*\(\s*\)[^;]*?CONVERSION_BASED_UNIT\s*\(\s*'([^']*)'", re.S)


def declared_metres(path: Path) -> float:
    """Metres per unit the STEP or IGES file ``path`` declares; InputFileError when it
    declares none that can be read."""
    text = Path(path).read_text(encoding="latin-1", errors="replace")
    found = _iges_unit(text) if path.suffix.lower() in (".iges", ".igs") else _step_unit(text)
    if found is None:
        raise InputFileError(f"{path}: cannot read the length unit the file declares, so --cad-unit cannot "
                             "replace it; leave --cad-unit out")
    return found


def _step_unit(text: str) -> float | None:
    named = _STEP_NAMED.search(text)
    if named:
        return NAMED_UNITS.get((named.group(1) or named.group(2) or "").strip().upper())
    si = _STEP_SI.search(text)
    if si:
        return STEP_PREFIXES.get(si.group(1) or si.group(2))
    return None


def _iges_unit(text: str) -> float | None:
    lines = text.splitlines()
    glob = "".join(line[:72] for line in lines if len(line) >= 73 and line[72] == "G")
    params = _iges_parameters(glob)
    if len(params) < 15:
        return None
    try:
        flag = int(params[13].strip() or 0)
    except ValueError:
        return None
    if flag == 3:
        return NAMED_UNITS.get(params[14].strip().upper())
    return IGES_FLAGS.get(flag)


def _iges_parameters(glob: str) -> list[str]:
    """The global section's parameters: Hollerith strings (``nH...``) read by their
    length, so a delimiter inside a name does not split it."""
    delimiter, end = ",", ";"
    if glob.startswith("1H"):
        delimiter = glob[2]
    params, at = [], 0
    while at < len(glob):
        hollerith = re.match(r"\s*(\d+)H", glob[at:])
        if hollerith:
            start = at + hollerith.end()
            value = glob[start : start + int(hollerith.group(1))]
            at = start + len(value)
        else:
            stop = min([i for i in (glob.find(delimiter, at), glob.find(end, at)) if i >= 0], default=len(glob))
            value, at = glob[at:stop], stop
        params.append(value)
        if at < len(glob) and glob[at] == end:
            break
        at += 1  # the delimiter
    return params
