"""The one-line message for a valid design with no operating point: which
values to look at first.

A solver failure has no single broken rule to name, so the message names the
design keys the DC solve reads whose values are furthest, by ratio, from the
topology's default design (a working stage): an engineer looks there first.
"""

from __future__ import annotations

import math

from model.design.fields import FIELDS
from model.design.stage import Design, default_design, get_value
from model.design.units import format_si

#: The keys the DC operating point depends on (capacitors are open at DC;
#: the source and load join in only when their coupling capacitor is not fitted).
_DC_KEYS = (
    "supply.vcc", "bias.r1", "bias.r2", "stage.rc", "stage.re1", "stage.re2", "stage.re",
    "transistor.beta", "transistor.beta_r", "transistor.va", "transistor.i_s", "transistor.eg",
)
#: The CLI's one-line error and the workbench status line.
WIDTH = 80
REASON = "no operating point found"


def furthest_from_default(design: Design) -> list[tuple[str, float, float]]:
    """(key, value, distance) of the DC keys, furthest from the default first;
    distance = |ln(value / default)|, written as a difference of logarithms
    (5e-324 / 220 underflows to 0).  Keys at 0 (not fitted) or infinite are
    left out: a ratio says nothing about them."""
    base = default_design(design.topology)
    keys = list(_DC_KEYS)
    if design.stage.cin == 0.0:
        keys.append("source.rs")
    if design.stage.cout == 0.0:
        keys.append("load.rl")
    out = []
    for key in keys:
        if design.topology not in FIELDS[key].rules:
            continue
        value, usual = float(get_value(design, key)), float(get_value(base, key))
        if 0.0 < value < math.inf and 0.0 < usual < math.inf and value != usual:
            out.append((key, value, abs(math.log(value) - math.log(usual))))
    return sorted(out, key=lambda t: -t[2])


def unsolved_message(design: Design, residual: float, iterations: int) -> tuple[str, str, tuple[str, ...]]:
    """(reason, hint, keys) for SolveError: the rule first, then as many of
    the furthest keys as keep ``str(error)`` within WIDTH columns (at least
    one); with every key at its default, the KCL residual instead."""
    furthest = furthest_from_default(design)
    if not furthest:
        return REASON, f"KCL residual {residual:.1e} after {iterations} iterations", ()
    named = [f"{k} = {format_si(v, FIELDS[k].unit)}" for k, v, _ in furthest]
    hint, keys = "far from default: " + named[0], [furthest[0][0]]
    for (key, _, _), more in list(zip(furthest, named))[1:3]:
        # str(SolveError) is "reason (hint)": 3 columns besides the two.
        if len(REASON) + len(hint) + len(", " + more) + 3 > WIDTH:
            break
        hint, keys = hint + ", " + more, keys + [key]
    return REASON, hint, tuple(keys)
