"""The textbook hand estimate, printed beside the exact solution.

Constant VBE, the bias divider as its Thevenin equivalent, the forward β and
re = VT/IE, as in Sedra & Smith, *Microelectronic Circuits*, and Boylestad &
Nashelsky, *Electronic Devices and Circuit Theory*.  ``stiff=True`` drops the
base current against the divider current, the quicker method both books use
in their worked examples when βRE ≫ R2.  Every figure is a magnitude-true
equivalent of the exact one of the same name, so the two can be reconciled.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

from .design import Design
from .device import ZERO_CELSIUS, thermal_voltage


@dataclass(frozen=True)
class HandEstimate:
    """ic (A), vce (V), re (Ω), av_open and av_loaded (V/V), rin (Ω)."""

    ic: float
    vce: float
    re: float
    av_open: float
    av_loaded: float
    rin: float

    def to_dict(self) -> dict:
        return {k: getattr(self, k) for k in ("ic", "vce", "re", "av_open", "av_loaded", "rin")}


def _par(a: float, b: float) -> float:
    if math.isinf(a):
        return b
    if math.isinf(b):
        return a
    return a * b / (a + b) if a + b > 0 else 0.0


def hand_estimate(design: Design, *, vt: float | None = None, stiff: bool = False) -> HandEstimate:
    """The hand estimate of ``design``.

    Parameters
    ----------
    vt : V, the thermal voltage to use for re; kT/q at the ambient by default
        (books often round it to 25 or 26 mV).
    stiff : ignore the base current in the divider (IC ≈ IE = (VTH − VBE)/RE).
    """
    d = design
    if vt is None:
        vt = float(thermal_voltage(ZERO_CELSIUS + d.environment.ambient))
    beta, vbe, vcc = d.transistor.beta, d.estimate.vbe, d.supply.vcc
    r1, r2, rl = d.bias.r1, d.bias.r2, d.load.rl
    vth = vcc * r2 / (r1 + r2)
    rth = _par(r1, r2)
    follower = d.topology == "emitter-follower"
    r_emitter = d.stage.re if follower else d.stage.re1 + d.stage.re2
    if stiff:
        ie = (vth - vbe) / r_emitter if r_emitter > 0 else math.inf
        ic = ie
    else:
        ib = (vth - vbe) / (rth + (beta + 1.0) * r_emitter)
        ie, ic = (beta + 1.0) * ib, beta * ib
    if not ie > 0:
        # The divider cannot forward-bias the junction: nothing conducts.
        return HandEstimate(0.0, vcc, math.inf, 0.0, 0.0, rth)
    re = vt / ie
    vce = vcc - ic * d.stage.rc - ie * r_emitter
    if follower:
        def gain(r_ac):
            return r_ac / (r_ac + re)

        r_ac = _par(d.stage.re, rl)
        rin = _par(rth, beta * (re + r_ac))
        return HandEstimate(ic, vce, re, gain(d.stage.re), gain(r_ac), rin)
    re1 = d.stage.re1
    rin = _par(rth, beta * re + (beta + 1.0) * re1)
    return HandEstimate(
        ic, vce, re, -d.stage.rc / (re + re1), -_par(d.stage.rc, rl) / (re + re1), rin
    )
