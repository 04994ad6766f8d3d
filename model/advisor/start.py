"""The proposal's starting point and its grid, by the usual rules of thumb.

Every rule here is common practice for a small-signal stage, not a law:

* the emitter takes about 10 % of the supply (VE ≈ 0.1·VCC), enough to
  hold IC against VBE and β spread without costing much headroom;
* the divider carries about 10 × the base current, so the base current
  barely loads it (a "stiff" divider);
* the collector sits near the middle of what is left above the emitter,
  so the output can swing about as far up as down;
* a coupling or bypass capacitor is sized from the resistance it sees:
  the bypass sets the low corner, the coupling capacitors sit a decade
  below it.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from model.design.eseries import nearest, step
from model.design.spread_tables import Limit
from model.design.stage import CE, Design

#: VE as a fraction of VCC (common practice).
EMITTER_SHARE = 0.1
#: Divider current over base current (common practice).
DIVIDER_RATIO = 10.0
#: A VBE for the starting point only (silicon, common practice); the search uses the exact engine.
VBE_GUESS = 0.65
#: The collector current when no spec points elsewhere: 1 mA (common practice for a small-signal stage).
IC_DEFAULT = 1e-3
#: The coupling capacitors' corners sit this far below the bypass's (common practice: a decade).
COUPLING_BELOW = 10.0
#: Without an f_low spec, the low corner aimed at (Hz): below the audio band (common practice).
F_LOW_DEFAULT = 10.0
#: The series capacitors are snapped to (IEC 60063; the values sold with wide tolerances).
CAPACITOR_SERIES = "E12"
#: The coarse grid's ladder: E6 values (IEC 60063), about three to a half decade.
GRID_SERIES = "E6"


@dataclass(frozen=True)
class Start:
    """A starting point: every main resistor (Ω) by its design key."""

    resistors: dict


def _target(limit: Limit | None, default: float | None = None) -> float | None:
    """A value to aim at inside ``limit``: the geometric mean of its ends, or
    a little inside the one end given (magnitudes; dB ends as V/V)."""
    if limit is None:
        return default
    lin = (lambda x: None if x is None else (10.0 ** (x / 20.0) if limit.db else abs(x)))
    lo, hi = lin(limit.low), lin(limit.high)
    if lo and hi:
        return math.sqrt(lo * hi)
    if lo:
        return lo * 1.5
    return hi / 1.5 if hi else default


def starting_point(design: Design, specs: tuple) -> Start:
    """The rules-of-thumb design for ``specs`` on ``design``'s supply, load and transistor."""
    by = {s.key: s for s in specs}
    vcc, beta = design.supply.vcc, design.transistor.beta
    budget = _target(by.get("i_supply"))
    if budget is None and "p_supply" in by:
        budget = _target(by["p_supply"]) / vcc
    rout = _target(by.get("rout"))
    ve = EMITTER_SHARE * vcc
    if design.topology == CE:
        vrc = 0.5 * (vcc - ve)  # the collector mid-way between emitter and supply (common practice)
        if budget is not None:
            ic = budget / (1.0 + DIVIDER_RATIO / beta)
        elif rout is not None:
            ic = vrc / rout
        else:
            ic = IC_DEFAULT
        rc = vrc / ic
        re_total = ve / ic
        gain = _target(by.get("av_loaded") or by.get("av_open") or by.get("av_source"))
        rl = design.load.rl
        rac = rc * rl / (rc + rl) if math.isfinite(rl) else rc
        # |av| ≈ rac/(re1 + 1/gm) (the hand formula), gm = IC/VT at about 25 mV.
        re1 = min(max(rac / gain - 0.025 / ic, 0.0), re_total) if gain else 0.1 * re_total
        parts = {"stage.rc": rc, "stage.re1": re1, "stage.re2": max(re_total - re1, 0.1 * re_total)}
    else:
        # A follower's emitter sits near mid-supply for symmetric swing (common practice).
        ve = 0.5 * vcc
        ic = budget / (1.0 + DIVIDER_RATIO / beta) if budget is not None else IC_DEFAULT
        parts = {"stage.re": ve / ic}
    vb = ve + VBE_GUESS
    ib = ic / beta
    divider = DIVIDER_RATIO * ib
    parts["bias.r2"] = vb / divider
    parts["bias.r1"] = (vcc - vb) / (divider + ib)
    return Start(parts)


def ladder(centre: float, steps: int, series: str) -> list:
    """The GRID_SERIES values within ``steps`` of ``centre`` on either side,
    each snapped to ``series`` (so every grid value is a part one can buy)."""
    mid = nearest(centre, GRID_SERIES)
    values = {nearest(step(mid, GRID_SERIES, n) if n else mid, series) for n in range(-steps, steps + 1)}
    return sorted(values)


def grid_axes(start: Start, steps: int, series: str) -> dict:
    """Each main resistor's grid values; re1 also takes 0 (fully bypassed)."""
    axes = {}
    for key, value in start.resistors.items():
        if key == "stage.re1":
            axes[key] = [0.0] + ladder(max(value, 10.0), steps, series)
        else:
            axes[key] = ladder(value, steps, series)
    return axes


def grid_rows(axes: dict) -> dict:
    """Every combination of the axes' values, one row each (a full factorial)."""
    mesh = np.meshgrid(*[np.asarray(v, dtype=float) for v in axes.values()], indexing="ij")
    return {k: m.ravel() for k, m in zip(axes, mesh)}


def low_corner(specs: tuple) -> float:
    """The f_low the capacitors are sized for (Hz): well inside the spec's
    ends, with room for the corners adding up, or F_LOW_DEFAULT."""
    limit = next((s for s in specs if s.key == "f_low"), None)
    if limit is None:
        return F_LOW_DEFAULT
    lo, hi = limit.low, limit.high
    if lo and hi:
        return math.sqrt(lo * hi)
    if hi:
        return hi / 2.0
    return 2.0 * lo if lo else F_LOW_DEFAULT


def capacitor(resistance: np.ndarray, corner: float) -> np.ndarray:
    """C = 1/(2π·R·f) for each row, rounded up onto CAPACITOR_SERIES (a larger
    capacitor keeps its corner below the one aimed at)."""
    raw = 1.0 / (2.0 * math.pi * np.asarray(resistance, dtype=float) * corner)
    out = []
    for c in raw:
        if not (math.isfinite(c) and c > 0):
            out.append(math.nan)
            continue
        snapped = nearest(float(c), CAPACITOR_SERIES)
        out.append(snapped if snapped >= c else step(snapped, CAPACITOR_SERIES, 1))
    return np.array(out)
