"""Signed numbers as every text of the tool writes them: no sign on a
value that shows as zero, gains to four figures, dB to the resolution a
gain has; plain Python, so the ledger's lines need no engine to word."""

from __future__ import annotations


def signed(x: float, spec: str) -> str:
    """``format(x, spec)`` for a spec with a sign ("+.4g"), but a value that
    shows as zero (0, −0.0, or −0.00004 at two places) shows as plain 0: a
    sign on nothing reads as a direction that is not there."""
    text = format(x, spec)
    return text.lstrip("+-") if float(text) == 0 else text


def gain_text(x: float) -> str:
    """A gain (V/V) to four significant figures, its trailing zeros kept, so
    that gains side by side read alike: -10.00 beside -8.839, not -10."""
    text = signed(x, "+#.4g")
    if float(text) == 0:
        return "0"  # a gain that is not there: no sign, no figures of it
    return text.removesuffix(".")  # "#" keeps the point of a whole number: 1234.


def db_text(db: float) -> str:
    """A gain in dB: to one decimal, or to two significant figures where
    that would read 0.0 (a follower's 0.9944 V/V is -0.049 dB, not -0.0),
    down to the 0.001 dB a gain to four figures resolves near 1 V/V."""
    if 0.0005 <= abs(db) < 0.05:
        return f"{db:+.2g}"
    return signed(db, "+.1f")
