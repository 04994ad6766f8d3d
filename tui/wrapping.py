"""Lines wrapped at their separators, never inside a value with its unit or
an arrow pair ("220 Ω→330 Ω"): a piece that must stay whole has its spaces
joined by no-break spaces, which textwrap never breaks at (it breaks at
ASCII white space only), and :func:`plain` turns them back into spaces
once the line is wrapped.  Textual's own wrapping does break at them, so
the workbench wraps its lines here too."""

from __future__ import annotations

import re
import textwrap

#: Joins the words of a piece that must stay whole.
KEEP = "\u00a0"
#: The space between a number and the unit after it ("2.5 mW", "-41.7 %").
_NUMBER_UNIT = re.compile(r"(?<=\d) (?=(?:[TGMkmµnpf]?(?:Ω|V/V|V|A|W|F|Hz|S)|dB|%|K|°C|pts)(?![\w/]))")


def whole(text: str) -> str:
    """``text`` as one piece that is never broken."""
    return text.replace(" ", KEEP)


def units_kept(text: str) -> str:
    """``text`` with each number joined to its unit, and each " → " to the
    values either side of it."""
    return _NUMBER_UNIT.sub(KEEP, text).replace(" → ", f"{KEEP}→{KEEP}")


def plain(text: str) -> str:
    """Wrapped (or one-line) text with its no-break spaces as spaces."""
    return text.replace(KEEP, " ")


def wrap(text: str, width: int, indent: str = "  ", first: str = "") -> list:
    """``text`` in rows of at most ``width`` cells, broken only at its plain
    spaces, the rows after the first indented by ``indent``; a piece wider
    than a row stays whole (so a row may be longer, never cut)."""
    if width <= len(indent) + 1:
        return [plain(first + text)]
    rows = textwrap.wrap(text, width, initial_indent=first, subsequent_indent=indent,
                         break_long_words=False, break_on_hyphens=False)
    return [plain(row) for row in rows] or [first.rstrip()]
