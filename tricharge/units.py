"""Length units users work in, and engineering notation for printed values."""

from __future__ import annotations

import math

from .errors import OptionError

#: Metres per unit. "um" is micrometres; "mil" is a thousandth of an inch.
LENGTH_UNITS: dict[str, float] = {"m": 1.0, "cm": 1e-2, "mm": 1e-3, "um": 1e-6, "in": 0.0254, "mil": 2.54e-5}

_PREFIXES = [(1e-18, "a"), (1e-15, "f"), (1e-12, "p"), (1e-9, "n"), (1e-6, "u"), (1e-3, "m"), (1.0, ""),
             (1e3, "k"), (1e6, "M"), (1e9, "G")]


def metres_per(unit: str) -> float:
    """Scale factor from ``unit`` to metres; raises OptionError naming the valid units."""
    try:
        return LENGTH_UNITS[unit]
    except KeyError:
        raise OptionError(f"unknown length unit {unit!r}; use one of {', '.join(LENGTH_UNITS)}") from None


def prefix_for(value: float) -> tuple[float, str]:
    """Largest engineering prefix (scale, symbol) not above |value| (1 for zero).

    >>> prefix_for(3.2e-13)
    (1e-15, 'f')
    """
    magnitude = abs(value)
    if magnitude == 0 or not math.isfinite(magnitude):
        return 1.0, ""
    chosen = _PREFIXES[0]
    for scale, symbol in _PREFIXES:
        if magnitude >= scale * (1 - 1e-12):
            chosen = (scale, symbol)
    return chosen


def format_eng(value: float, unit: str, digits: int = 4) -> str:
    """Value with an engineering prefix and ``digits`` significant digits.

    >>> format_eng(1.11265e-10, "F")
    '111.3 pF'
    """
    scale, symbol = prefix_for(value)
    return f"{value / scale:.{digits}g} {symbol}{unit}"
