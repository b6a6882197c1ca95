"""Names read from users' files, made safe for each place they are shown.

A conductor, medium or file name is data: it stays unchanged in the model and in the
JSON result. Every other place that shows it gets its own safe form here, because each
would misread some characters in its own way: a terminal runs escape sequences, a
SPICE netlist ends a comment at a newline, a spreadsheet runs a cell starting with
``=`` as a formula, matplotlib parses ``$...$`` as mathematics.

>>> printable("lead\\n\\x1b[31m1")
'lead\\\\n\\\\x1b[31m1'
>>> spice_comment("pin\\nR1 a b 1")
'pin\\\\nR1 a b 1'
>>> csv_cell("=HYPERLINK(1)"), csv_cell("-5V")
("'=HYPERLINK(1)", "'-5V")
>>> chart_label("$x$ " + "a" * 60)
'\\\\$x\\\\$ aaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaa…'
"""

from __future__ import annotations

#: Characters a spreadsheet may treat as the start of a formula (OWASP's CSV
#: injection advice; tab and carriage return included).
FORMULA_STARTS = ("=", "+", "-", "@", "\t", "\r")

#: Longest name drawn in a picture or chart before it is shortened (our choice: about
#: a third of a chart's width at the font sizes used).
LABEL_LIMIT = 40

_NAMED = {"\n": "\\n", "\r": "\\r", "\t": "\\t"}


def _escape(char: str) -> str:
    if char in _NAMED:
        return _NAMED[char]
    code = ord(char)
    return f"\\x{code:02x}" if code < 0x100 else f"\\u{code:04x}" if code < 0x10000 else f"\\U{code:08x}"


def printable(text) -> str:
    """``text`` with every non-printable character (controls, escape sequences, line
    separators, bidirectional overrides, surrogates from undecodable file names) shown
    as a backslash escape; everything else unchanged. Safe for a terminal line."""
    text = str(text)
    if text.isprintable():
        return text
    return "".join(c if c.isprintable() else _escape(c) for c in text)


def spice_comment(text) -> str:
    """``text`` reduced to printable ASCII (other characters escaped), so that inside a
    SPICE ``*`` comment it can never end the line and start a card."""
    return "".join(c if " " <= c <= "~" else _escape(c) for c in str(text))


def csv_cell(text) -> str:
    """A name for a CSV cell: printable, and prefixed with ``'`` when a spreadsheet
    would run it as a formula. Quoting of commas and quotes is left to :mod:`csv`."""
    text = printable(text)
    return "'" + text if text.startswith(FORMULA_STARTS) else text


def shortened(text, limit: int = LABEL_LIMIT) -> str:
    """Printable ``text`` of at most ``limit`` characters (an ellipsis marks a cut)."""
    text = printable(text)
    return text if len(text) <= limit else text[: limit - 1] + "…"


def chart_label(text, limit: int = LABEL_LIMIT) -> str:
    """A name drawn literally in a matplotlib or VTK picture: printable, shortened, and
    with ``$`` escaped so it is never parsed as a formula."""
    return shortened(text, limit).replace("$", "\\$")
