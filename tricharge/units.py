"""Length units users work in, and engineering notation for printed values."""

from __future__ import annotations

import math

from .errors import OptionError
from .names import printable

#: Metres per unit. "um" is micrometres; "mil" is a thousandth of an inch.
LENGTH_UNITS: dict[str, float] = {"m": 1.0, "cm": 1e-2, "mm": 1e-3, "um": 1e-6, "in": 0.0254, "mil": 2.54e-5}

#: SI prefixes: symbol -> scale (the one table of the package; "u" is micro, "µ" too on input).
SI_PREFIXES: dict[str, float] = {"a": 1e-18, "f": 1e-15, "p": 1e-12, "n": 1e-9, "u": 1e-6, "m": 1e-3, "": 1.0,
                                 "k": 1e3, "M": 1e6, "G": 1e9}
_INPUT_PREFIXES = {**SI_PREFIXES, "µ": 1e-6}


def metres_per(unit: str) -> float:
    """Scale factor from ``unit`` to metres; raises OptionError naming the valid units."""
    try:
        return LENGTH_UNITS[unit]
    except KeyError:
        raise OptionError(f"unknown length unit {unit!r}; use one of {', '.join(LENGTH_UNITS)}") from None


def prefix_for(value: float) -> tuple[float, str]:
    """Largest engineering prefix (scale, symbol) not above |value| (1 for zero).

    >>> prefix_for(3.2e-13), prefix_for(2e-28)
    ((1e-15, 'f'), (1.0, ''))
    """
    magnitude = abs(value)
    if magnitude < min(SI_PREFIXES.values()) * (1 - 1e-12) or not math.isfinite(magnitude):
        return 1.0, ""  # zero, or below every prefix: plain scientific notation
    chosen = (SI_PREFIXES["a"], "a")
    for symbol, scale in sorted(SI_PREFIXES.items(), key=lambda item: item[1]):
        if magnitude >= scale * (1 - 1e-12):
            chosen = (scale, symbol)
    return chosen


def format_eng(value: float, unit: str, digits: int = 4, *, keep_zeros: bool = True) -> str:
    """Value with an engineering prefix and ``digits`` significant digits (trailing zeros
    kept, as a computed value's precision, unless ``keep_zeros`` is False).

    >>> format_eng(1.11265e-10, "F"), format_eng(1.3799e-13, "F")
    ('111.3 pF', '138.0 fF')
    """
    scale, symbol = prefix_for(value)
    number = f"{value / scale:#.{digits}g}" if keep_zeros else f"{value / scale:.{digits}g}"
    return f"{number.rstrip('.')} {symbol}{unit}"


def parse_quantity(value, unit: str, *, what: str = "value") -> float:
    """A number, or text like ``"12kV"``, ``"3.3 V"``, ``"-500 mV"``, ``"2e3"``, in base units.

    >>> parse_quantity("12kV", "V"), parse_quantity(" -500 mV", "V"), parse_quantity(3.3, "V")
    (12000.0, -0.5, 3.3)
    """
    import re

    if isinstance(value, bool):
        raise OptionError(f"{what}: expected a number of {unit} or a text like '12k{unit}', got {value!r}")
    if isinstance(value, (int, float)):
        return _finite(float(value), value, unit, what)
    text = str(value).strip()
    match = re.fullmatch(r"([-+]?(?:\d+\.?\d*|\.\d+)(?:[eE][-+]?\d+)?)\s*([afpnuµmkMG]?)" + re.escape(unit) + r"?",
                         text)
    if not match or (match.group(2) and not text.endswith(unit)):
        raise OptionError(f"{what}: cannot read {printable(value)!r} as {unit}; write a number like 1500 or "
                          f"'1.5k{unit}'")
    return _finite(float(match.group(1)) * _INPUT_PREFIXES[match.group(2)], value, unit, what)


#: Largest magnitude accepted for a voltage, charge or field strength: far beyond any
#: device (1e15 V, 1e15 C, 1e15 V/m), small enough that products stay finite.
MAX_QUANTITY = 1e15


def _finite(number: float, given, unit: str, what: str) -> float:
    if not math.isfinite(number) or abs(number) > MAX_QUANTITY:
        raise OptionError(f"{what}: {printable(given)!r} is not a usable number of {unit}; give a finite value "
                          f"below {MAX_QUANTITY:g} {unit}")
    return number


_FIELD_UNITS = {"V/m": 1.0, "kV/m": 1e3, "V/mm": 1e3, "kV/cm": 1e5, "MV/m": 1e6, "kV/mm": 1e6, "V/um": 1e6}


def parse_field_strength(value, *, what: str = "field strength") -> float:
    """Text like ``"3kV/mm"``, ``"30 kV/cm"`` or a number (V/m), in V/m.

    >>> parse_field_strength("3 kV/mm"), parse_field_strength("30kV/cm"), parse_field_strength(2e6)
    (3000000.0, 3000000.0, 2000000.0)
    """
    import re

    if isinstance(value, (int, float)) and not isinstance(value, bool):
        try:
            number = float(value)
        except OverflowError:
            number = float("inf")
    else:
        match = re.fullmatch(r"\s*([-+]?(?:\d+\.?\d*|\.\d+)(?:[eE][-+]?\d+)?)\s*([A-Za-z/]*)\s*", str(value))
        if not match or (match.group(2) or "V/m") not in _FIELD_UNITS:
            raise OptionError(f"{what}: cannot read {printable(value)!r}; write e.g. '3kV/mm' (units: "
                              f"{', '.join(_FIELD_UNITS)})")
        number = float(match.group(1)) * _FIELD_UNITS[match.group(2) or "V/m"]
    if not number > 0:
        raise OptionError(f"{what}: {printable(value)!r} is not a withstand strength; give a positive field "
                          "strength, e.g. '3kV/mm'")
    return _finite(number, value, "V/m", what)


def parse_fraction(value, *, what: str = "value") -> float:
    """A relative accuracy: ``"0.5%"`` or a fraction like ``0.005``; must lie in (0, 1).

    >>> parse_fraction("0.5%"), parse_fraction("0.002")
    (0.005, 0.002)
    """
    text = str(value).strip()
    percent = text.endswith("%")
    try:
        number = float(text[:-1] if percent else text) / (100.0 if percent else 1.0)
    except ValueError:
        number = float("nan")
    if not 0.0 < number < 1.0:
        raise OptionError(f"{what}: cannot read {printable(value)!r} as a relative accuracy; write a percentage "
                          "like 0.5% or a fraction like 0.005")
    return number


def parse_numbers(text: str, count: int, what: str) -> list[float]:
    """``count`` finite numbers separated by commas, e.g. a point ``"1,2.5,-3"``.

    >>> parse_numbers("1, 2.5,-3", 3, "--probe")
    [1.0, 2.5, -3.0]
    """
    try:
        values = [float(x) for x in str(text).split(",")]
    except ValueError:
        values = []
    if len(values) != count:
        raise OptionError(f"{what} {printable(text)!r}: expected {count} number{'s' if count > 1 else ''} "
                          "separated by commas")
    if not all(math.isfinite(v) and abs(v) <= MAX_QUANTITY for v in values):
        raise OptionError(f"{what} {printable(text)!r}: every number must be finite (no nan or inf) and below "
                          f"{MAX_QUANTITY:g}")
    return values
