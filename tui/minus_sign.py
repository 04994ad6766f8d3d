"""The screen's minus sign: U+2212 for a number's sign in every text the
workbench draws (Readout, Ledger, pictures), while the command line keeps
ASCII "-", which scripts, float() and a pasted `set` read."""

from __future__ import annotations

import re

SCREEN_MINUS = "\u2212"
#: A number's sign: a minus before a digit or point, after no letter, digit or
#: point (a date's 2026-12-03, a name's "amp-2" and "cut-off" keep their hyphens).
_SIGN = re.compile(r"(?<![\w.])[-\u2212](?=[\d.])")


def minus_signs(text: str, sign: str = SCREEN_MINUS) -> str:
    """``text`` with every number's sign written ``sign``."""
    if sign == "-" and SCREEN_MINUS not in text:
        return text  # every sign is already ASCII: a long history's lines skip the pass
    return _SIGN.sub(sign, text)


def minus(number: str) -> str:
    """A formatted number with the minus sign U+2212 for its hyphens (a sign,
    or an exponent's): one minus sign in every picture."""
    return number.replace("-", SCREEN_MINUS)
