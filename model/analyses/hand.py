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

from model.circuit.device import ZERO_CELSIUS, thermal_voltage
from model.design.stage import Design


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


def _thevenin(*branches) -> tuple[float, float]:
    """(V, Ω): the Thevenin equivalent of resistors (Ω) to fixed voltages (V),
    each branch (r, v).  A branch of 0 Ω fixes the node outright."""
    for r, v in branches:
        if r == 0:
            return v, 0.0
    g = sum(1.0 / r for r, _ in branches if math.isfinite(r))
    if g == 0:
        return 0.0, math.inf
    return sum(v / r for r, v in branches if math.isfinite(r)) / g, 1.0 / g


def hand_estimate(design: Design, *, vt: float | None = None, stiff: bool = False) -> HandEstimate:
    """The hand estimate of ``design``.

    Parameters
    ----------
    vt : V, the thermal voltage to use for re; kT/q at the ambient by default
        (books often round it to 25 or 26 mV).
    stiff : ignore the base current in the divider (IC ≈ IE = (VTH − VBE)/RE).

    A capacitor not fitted (0) changes the method as it changes the circuit:
    without ce all of re1 + re2 degenerates the gain; without cin the source's
    rs to its 0 V DC level joins the divider, and without cout the load's rl
    joins the collector (or, in a follower, the emitter) circuit at DC.
    """
    d = design
    if vt is None:
        vt = float(thermal_voltage(ZERO_CELSIUS + d.environment.ambient))
    beta, vbe, vcc = d.transistor.beta, d.estimate.vbe, d.supply.vcc
    r1, r2, rl, rs = d.bias.r1, d.bias.r2, d.load.rl, d.source.rs
    follower = d.topology == "emitter-follower"
    # Worked as the NPN twin (a PNP stage is its mirror image): the source and
    # the load return to real ground, which in the twin sits at the supply.
    ground = 0.0 if d.transistor.polarity == "npn" else vcc
    bias = [(r1, vcc), (r2, 0.0)] + ([(rs, ground)] if d.stage.cin == 0 else [])
    vth, rth = _thevenin(*bias)
    dc_load = [(rl, ground)] if d.stage.cout == 0 and math.isfinite(rl) else []
    r_emitter = d.stage.re if follower else d.stage.re1 + d.stage.re2
    ve_th, re_th = _thevenin((r_emitter, 0.0), *(dc_load if follower else []))
    vc_th, rc_th = _thevenin((d.stage.rc, vcc), *([] if follower else dc_load))
    drive = vth - vbe - ve_th
    if stiff:
        ie = _ratio(drive, re_th)
        ic = ie
    else:
        ib = _ratio(drive, rth + (beta + 1.0) * re_th)
        ie, ic = (beta + 1.0) * ib, beta * ib
    rth = _par(r1, r2)  # the signal sees the divider alone: the source is its driver
    if not ie > 0:
        # The divider cannot forward-bias the junction: nothing conducts, so
        # no resistor drops a volt and VCE is what the two Thevenin circuits
        # leave (without cout, rl divides the supply down at the collector).
        return HandEstimate(0.0, vc_th - ve_th, math.inf, 0.0, 0.0, rth)
    if math.isinf(ie):
        # Nothing but the constant VBE limits the current: no estimate exists.
        return HandEstimate(math.inf, math.nan, 0.0, math.nan, math.nan, rth)
    re = vt / ie
    vce = (vc_th - ic * rc_th) - (ve_th + ie * re_th)
    if follower:
        def gain(r_ac):
            return r_ac / (r_ac + re)

        r_ac = _par(d.stage.re, rl)
        rin = _par(rth, beta * (re + r_ac))
        return HandEstimate(ic, vce, re, gain(d.stage.re), gain(r_ac), rin)
    # The common emitter with an emitter resistance Re left in the signal path
    # (Sedra & Smith, *Microelectronic Circuits*, "the CE amplifier with an
    # emitter resistance": Av = −α(RC ‖ RL)/(re + Re), taken with α ≈ 1 as
    # Boylestad & Nashelsky do in Ex. 5.5, RE unbypassed).  Re is re1, plus
    # re2 when no ce bypasses it.
    r_signal = d.stage.re1 + (d.stage.re2 if d.stage.ce == 0 else 0.0)
    rin = _par(rth, beta * re + (beta + 1.0) * r_signal)
    return HandEstimate(
        ic, vce, re, -d.stage.rc / (re + r_signal), -_par(d.stage.rc, rl) / (re + r_signal), rin
    )


def _ratio(num: float, den: float) -> float:
    """num/den, with a zero denominator read as a limit: ±inf, or 0 when num ≤ 0
    (a junction that is not driven forward conducts nothing)."""
    if den > 0:
        return num / den
    return math.inf if num > 0 else 0.0
