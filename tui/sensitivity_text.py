"""The sensitivity matrix as text: the `stageledger sensitivity` table (80
columns) and the workbench's "knob effects" picture (one knob's row in
words, and the knobs that move the gain most)."""

from __future__ import annotations

import math

from model.advisor.sensitivity import AMBIENT, SKIPPED, YIELD, Sensitivity, unit_of
from model.design.stage import Design, get_value, rule_for
from model.errors import DesignError

from .safe_text import visible
from .wrapping import units_kept, wrap

#: Column headings of the table, five characters at most.
HEADINGS = {"ic": "ic", "vce": "vce", "av_loaded": "av dB", "rin": "rin", "rout": "rout",
            "swing_up": "swg↑", "swing_down": "swg↓", "thd": "thd", "p_transistor": "p_tr",
            "f_low": "f_low", "f_high": "f_hi", YIELD: "yield"}
#: The figure the picture ranks the knobs by: the one people watch most.
WATCHED = "av_loaded"
#: Below this a cell reads "~0": a change the table's two places cannot show.
TINY = 5e-4
KNOB_WIDTH, CELL_WIDTH = 8, 6
MARK = "▶"


def cell(value: float) -> str:
    """One cell in at most five characters: "+0.82", "+.079" (below 0.1 the
    leading zero makes room for a second figure), "~0", "0" for exactly no
    change, "—" when undefined."""
    if not math.isfinite(value):
        return "—"
    if value == 0:
        return "0"
    size = abs(value)
    if size < TINY:
        return "~0"
    if size < 0.0995:
        return f"{value:+.3f}".replace("0.", ".", 1)
    if size < 9.995:
        return f"{value:+.2f}"
    if size < 99.95:
        return f"{value:+.1f}"
    if size < 999.5:
        return f"{value:+.0f}"
    mantissa, exponent = f"{value:+.0e}".split("e")
    return f"{mantissa}e{int(exponent)}"


def short(knob: str) -> str:
    """The knob's name without its table (unique within a topology)."""
    return knob.split(".", 1)[-1]


def render_sensitivity(sens: Sensitivity, design: Design, path: str) -> str:
    """The plain-text table: one row per knob, one column per figure."""
    h = sens.step
    lines = [
        f"knob effects of {visible(path)}",
        *_wrap(f"{sens.method}, ±h with h = {100 * h:g} % (all knobs' ± pairs in one batched solve)"),
        *_wrap("Each cell: the % change of the figure for a 1 % rise of the knob (ambient: per +1 K); "
               "av dB: the change of 20·log10|av_loaded| in dB; swg↑ swg↓: swing_up, swing_down; "
               "p_tr: p_transistor; f_hi: f_high."),
    ]
    if YIELD in sens.columns:
        lines += _wrap(f"yield: percentage points against the specs, from ±{100 * sens.yield_step:g} % designs "
                       "judged on the same builds.")
    lines += _wrap("— undefined: the figure does not exist on both sides (no upper corner, flat to DC), "
                   "changes sign, or the stage leaves forward-active; ~0 below 0.0005; 0 no change at all.")
    lines.append("")
    lines.append("knob".ljust(KNOB_WIDTH) + "".join(HEADINGS[c].rjust(CELL_WIDTH) for c in sens.columns))
    for knob, row in sens.rows.items():
        name = short(knob) + ("°" if knob == AMBIENT else "")
        lines.append(name.ljust(KNOB_WIDTH) + "".join(cell(row[c]).rjust(CELL_WIDTH) for c in sens.columns))
    lines.append("")
    lines += _wrap("° per +1 K. Not rows: parts not fitted (0) or open, and "
                   + "; ".join(f"{short(k)} ({why})" for k, why in SKIPPED.items()
                               if _has(design, k)) + ".")
    return "\n".join(lines) + "\n"


def _has(design: Design, key: str) -> bool:
    try:
        rule_for(key, design.topology)
    except DesignError:  # a key this topology does not have
        return False
    return True


def _wrap(text: str) -> list:
    """``text`` in lines of 80 columns, never broken between a number and its unit."""
    return wrap(units_kept(text), 80, indent="")


def _word(value: float) -> str:
    if not math.isfinite(value):
        return "undefined"
    if abs(value) < TINY:
        return "no change" if value == 0 else "hardly moves"
    return "rises" if value > 0 else "falls"


def knob_effect_lines(sens: Sensitivity, design: Design, knob: str, height: int) -> list:
    """The "knob effects" picture for the knob under the cursor: each
    figure's change for +1 % of it in words and numbers, then the knobs
    that move av_loaded most, the current one marked with ▶ (no colour
    needed).  At most ``height`` lines."""
    lines = []
    if knob in sens.rows:
        per = "K" if knob == AMBIENT else "%"
        lines.append(f"{MARK} {knob}: a 1 {per} rise moves")
        for c in sens.columns:
            v = sens.rows[knob][c]
            unit = unit_of(c).split()[0]
            number = f"{cell(v)} {unit}" if math.isfinite(v) else "—"
            lines.append(f"  {c:<13}{number:>9}  {_word(v)}")
    else:
        lines.append(f"{MARK} {knob}: {_why_not(design, knob)}")
    movers = sens.movers(WATCHED, 5)
    room = max(0, height - len(lines) - 2)
    if movers and room:
        lines.append("")
        lines.append(f"most on {WATCHED} (dB per +1 %):")
        for k, v in movers[:min(5, room)]:
            lines.append(f"{MARK if k == knob else ' '} {short(k):<10}{cell(v):>6}")
    return lines[:height]


def _why_not(design: Design, knob: str) -> str:
    """Why ``knob`` has no row, in words."""
    if knob in SKIPPED:
        return f"not a row: {SKIPPED[knob]}"
    try:
        value = get_value(design, knob)
    except DesignError:  # not a design key at all
        return "not a row"
    if isinstance(value, str):
        return "not a number: no row"
    if value == 0:
        return "not fitted (0): a 1 % change of nothing means nothing"
    if math.isinf(value):
        return "open: a 1 % change of infinity means nothing"
    return "not a row"
