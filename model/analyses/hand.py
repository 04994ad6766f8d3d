"""The textbook hand estimate, printed beside the exact solution.

Constant VBE, the bias network as its Thevenin equivalent, the forward β and
re = VT/IE, as in Sedra & Smith, *Microelectronic Circuits*, and Boylestad &
Nashelsky, *Electronic Devices and Circuit Theory*; each topology by the
method those books give for it (named beside each).  ``stiff=True`` drops the
base current against the divider current, the quicker method both books use
in their worked examples when βRE ≫ R2.  Every figure is a magnitude-true
equivalent of the exact one of the same name, so the two can be reconciled.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

from model.circuit.device import ZERO_CELSIUS, thermal_voltage
from model.design.stage import CB, CEF, CF, EF, EF_SPLIT, SPLIT, Design


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
    """The hand estimate of ``design``, by the textbook method of its topology.

    Parameters
    ----------
    vt : V, the thermal voltage to use for re; kT/q at the ambient by default
        (books often round it to 25 or 26 mV).
    stiff : ignore the base current in the divider (IC ≈ IE = (VTH − VBE)/RE).

    A capacitor not fitted (0) changes the method as it changes the circuit:
    without ce all of re1 + re2 degenerates the gain; without cin the source's
    rs to its 0 V DC level joins the divider (a common base's emitter
    circuit), and without cout the load's rl joins the output node's circuit
    at DC.  For ce-follower, ic, vce and re are the gain transistor's.
    """
    d = design
    if vt is None:
        vt = float(thermal_voltage(ZERO_CELSIUS + d.environment.ambient))
    top, bottom, ground = _rails(d)
    if d.topology == CF:
        return _collector_feedback(d, vt, top, bottom, ground)
    beta, vbe = d.transistor.beta, d.estimate.vbe
    r1, r2, rl, rs = d.bias.r1, d.bias.r2, d.load.rl, d.source.rs
    follower = d.topology in (EF, EF_SPLIT)
    from_source = [(rs, ground)] if d.stage.cin == 0 else []
    base = [(d.bias.rb, ground)] if d.topology in SPLIT else [(r1, top), (r2, bottom)]
    vth, rth = _thevenin(*base, *([] if d.topology == CB else from_source))
    # The load's DC path, without cout, at the node the load hangs on.
    dc_load = [(rl, ground)] if d.stage.cout == 0 and math.isfinite(rl) else []
    r_emitter = d.stage.re if d.topology in (EF, EF_SPLIT, CB) else d.stage.re1 + d.stage.re2
    ve_th, re_th = _thevenin((r_emitter, bottom), *(dc_load if follower else []),
                             *(from_source if d.topology == CB else []))
    vc_th, rc_th = _thevenin((d.stage.rc, top), *([] if follower or d.topology == CEF else dc_load))
    drive = vth - vbe - ve_th
    if stiff:
        ie = _ratio(drive, re_th)
        ic = ie
    else:
        ib = _ratio(drive, rth + (beta + 1.0) * re_th)
        ie, ic = (beta + 1.0) * ib, beta * ib
    rth = _thevenin(*base)[1]  # the signal sees the bias network alone: the source is its driver
    if not ie > 0:
        # The bias cannot forward-bias the junction: nothing conducts, so
        # no resistor drops a volt and VCE is what the two Thevenin circuits
        # leave (without cout, rl divides the supply down at the collector).
        return HandEstimate(0.0, vc_th - ve_th, math.inf, 0.0, 0.0, rth)
    if math.isinf(ie):
        # Nothing but the constant VBE limits the current: no estimate exists.
        return HandEstimate(math.inf, math.nan, 0.0, math.nan, math.nan, rth)
    re = vt / ie
    if d.topology == CEF:
        return _ce_follower(d, vt, top, bottom, ground, ic, ie, re, rth)
    vce = (vc_th - ic * rc_th) - (ve_th + ie * re_th)
    if follower:
        def gain(r_ac):
            return r_ac / (r_ac + re)

        r_ac = _par(d.stage.re, rl)
        rin = _par(rth, beta * (re + r_ac))
        return HandEstimate(ic, vce, re, gain(d.stage.re), gain(r_ac), rin)
    if d.topology == CB:
        # The common-base amplifier (Sedra & Smith, *Microelectronic
        # Circuits*, "the common-base amplifier"; Boylestad & Nashelsky,
        # "common-base configuration"): Rin = RE ‖ re, Av ≈ RC/re with α ≈ 1.
        # Without cb the divider's RTH stays in the base, and reflects into
        # the emitter divided by β + 1.
        r_in_e = re + (0.0 if d.stage.cb > 0 else rth / (beta + 1.0))
        return HandEstimate(ic, vce, re, d.stage.rc / r_in_e, _par(d.stage.rc, rl) / r_in_e,
                            _par(d.stage.re, r_in_e))
    # The common emitter with an emitter resistance Re left in the signal path
    # (Sedra & Smith, *Microelectronic Circuits*, "the CE amplifier with an
    # emitter resistance": Av = −α(RC ‖ RL)/(re + Re), taken with α ≈ 1 as
    # Boylestad & Nashelsky do in Ex. 5.5, RE unbypassed).  Re is re1, plus
    # re2 when no ce bypasses it.
    r_signal = _r_signal(d)
    rin = _par(rth, beta * re + (beta + 1.0) * r_signal)
    return HandEstimate(
        ic, vce, re, -d.stage.rc / (re + r_signal), -_par(d.stage.rc, rl) / (re + r_signal), rin
    )


def _rails(d: Design) -> tuple[float, float, float]:
    """(top, bottom, ground) in V of the stage's NPN twin: a PNP stage is
    worked as its mirror image.  On a single supply the mirror puts real
    ground (where the source and load return) at the supply; on a split
    supply the rails swap sign and ground stays at 0 V."""
    vcc, vee, npn = d.supply.vcc, d.supply.vee, d.transistor.polarity == "npn"
    if d.topology in SPLIT:
        return (vcc, vee, 0.0) if npn else (-vee, -vcc, 0.0)
    return vcc, 0.0, (0.0 if npn else vcc)


def _r_signal(d: Design) -> float:
    """The emitter resistance left in the signal path (Ω): re1, and re2 unbypassed."""
    return d.stage.re1 + (d.stage.re2 if d.stage.ce == 0 else 0.0)


def _collector_feedback(d: Design, vt: float, top: float, bottom: float, ground: float) -> HandEstimate:
    """Collector-to-base feedback bias (Boylestad & Nashelsky, *Electronic
    Devices and Circuit Theory*, "DC bias with voltage feedback":
    IB = (VCC − VBE)/(RF + β(RC + RE)) without r2), written here without the
    book's IC' ≈ IC and β ≈ β + 1, so that r2 to ground, and rs or rl joined
    at DC, enter the same linear equations: with VB = VBE + VE(IE) and the
    feedback current IF = IB + (VB − VTH2)/RTH2,

        VC = VB + IF·RF   and   VC = VCTH − (IC + IF)·RCTH.

    The ac figures (the same book, "collector feedback configuration"): the
    feedback resistor seen by Miller's theorem, RF at the output and
    RF/(1 + |Av|) at the input, so Av = −(RC ‖ RL ‖ RF)/(re + Re) and
    Zi = (βre + (β + 1)Re) ‖ R2 ‖ RF/(1 + |Av|).
    """
    beta, vbe, rf = d.transistor.beta, d.estimate.vbe, d.bias.rf
    rl, rs = d.load.rl, d.source.rs
    # What holds the base besides rf: r2 (may be open) and, without cin, rs.
    vb0, rb0 = _thevenin((d.bias.r2, bottom), *([(rs, ground)] if d.stage.cin == 0 else []))
    dc_load = [(rl, ground)] if d.stage.cout == 0 and math.isfinite(rl) else []
    vc_th, rc_th = _thevenin((d.stage.rc, top), *dc_load)
    ve_th, re_th = bottom, d.stage.re1 + d.stage.re2
    rth = _par(d.bias.r2, rf)  # what the signal sees with the transistor off
    if rb0 == 0:
        # Without cin a source of 0 Ω holds the base at its 0 V: rf only
        # loads the collector, and the emitter circuit alone sets IE.
        return _held_base(d, vt, vb0, vc_th, rc_th, ve_th, re_th, rth)
    # Each voltage as a + b·IB: VB, the feedback current IF, and VC.
    g0 = 0.0 if math.isinf(rb0) else 1.0 / rb0
    vb_a, vb_b = vbe + ve_th, (beta + 1.0) * re_th
    if_a, if_b = (vb_a - vb0) * g0, 1.0 + vb_b * g0
    vc_a, vc_b = vb_a + if_a * rf, vb_b + if_b * rf
    ib = _ratio(vc_th - vc_a - if_a * rc_th, vc_b + (beta + if_b) * rc_th)
    if not ib > 0:
        return HandEstimate(0.0, vc_th - ve_th, math.inf, 0.0, 0.0, rth)
    if math.isinf(ib):
        return HandEstimate(math.inf, math.nan, 0.0, math.nan, math.nan, rth)
    ic, ie = beta * ib, (beta + 1.0) * ib
    return _feedback_ac(d, vt, ic, ie, (vc_a + vc_b * ib) - (ve_th + ie * re_th))


def _feedback_ac(d: Design, vt: float, ic: float, ie: float, vce: float) -> HandEstimate:
    """The ac figures of collector feedback by Miller's theorem (see
    :func:`_collector_feedback`), at the operating point ic, ie (A), vce (V)."""
    beta, rf, rl = d.transistor.beta, d.bias.rf, d.load.rl
    re = vt / ie
    r_signal = _r_signal(d)

    def gain(r_load):
        return -_par(_par(d.stage.rc, r_load), rf) / (re + r_signal)

    av_open, av_loaded = gain(math.inf), gain(rl)
    rin = _par(_par(beta * re + (beta + 1.0) * r_signal, d.bias.r2), rf / (1.0 + abs(av_loaded)))
    return HandEstimate(ic, vce, re, av_open, av_loaded, rin)


def _held_base(d: Design, vt: float, vb: float, vc_th: float, rc_th: float, ve_th: float, re_th: float,
               rth: float) -> HandEstimate:
    """Collector feedback with the base held at ``vb`` (V) by the source:
    IE = (VB − VBE − VE)/RE, and the collector node is RC's Thevenin
    circuit with RF to the fixed base, VC = (VCTH/RCTH + VB/RF − IC)/(1/RCTH + 1/RF)."""
    beta, rf = d.transistor.beta, d.bias.rf
    ie = _ratio(vb - d.estimate.vbe - ve_th, re_th)
    def collector(ic):
        return (vc_th / rc_th + vb / rf - ic) / (1.0 / rc_th + 1.0 / rf)  # rc > 0 in this topology

    if not ie > 0:
        return HandEstimate(0.0, collector(0.0) - ve_th, math.inf, 0.0, 0.0, rth)
    if math.isinf(ie):
        return HandEstimate(math.inf, math.nan, 0.0, math.nan, math.nan, rth)
    ic = ie * beta / (beta + 1.0)
    return _feedback_ac(d, vt, ic, ie, collector(ic) - (ve_th + ie * re_th))


def _ce_follower(d: Design, vt: float, top: float, bottom: float, ground: float,
                 ic: float, ie: float, re: float, rth: float) -> HandEstimate:
    """A common emitter direct-coupled to an emitter follower: the two-stage
    cascade of Sedra & Smith, *Microelectronic Circuits* ("the cascade
    amplifier"; "the emitter follower"), the gain stage taken as its
    Thevenin equivalent at the collector: the open-circuit gain −RC/(re + Re)
    behind RC, which the follower sees as its source resistance, so
    Av = −RC/(re + Re) · RE′/(RE′ + re2 + RC/(β2 + 1)), RE′ = RE ‖ RL.  The
    follower's base current comes from RC, so VC1 = VCC − (IC1 + IB2)·RC."""
    beta2, vbe, rc, rl = d.transistor2.beta, d.estimate.vbe, d.stage.rc, d.load.rl
    dc_load = [(rl, ground)] if d.stage.cout == 0 and math.isfinite(rl) else []
    ve2_th, re2_th = _thevenin((d.stage.re, bottom), *dc_load)
    ib2 = max(_ratio(top - ic * rc - vbe - ve2_th, rc + (beta2 + 1.0) * re2_th), 0.0)
    vc1 = top - (ic + ib2) * rc
    ve1 = bottom + ie * (d.stage.re1 + d.stage.re2)
    vce = vc1 - ve1
    if not ib2 > 0:
        # The follower is off: the gain stage drives nothing.
        return HandEstimate(ic, vce, re, 0.0, 0.0, _par(rth, d.transistor.beta * re))
    re2 = vt / ((beta2 + 1.0) * ib2)
    r_signal = _r_signal(d)

    def gain(r_load):
        r_ac = _par(d.stage.re, r_load)
        return -rc / (re + r_signal) * r_ac / (r_ac + re2 + rc / (beta2 + 1.0))

    rin = _par(rth, d.transistor.beta * re + (d.transistor.beta + 1.0) * r_signal)
    return HandEstimate(ic, vce, re, gain(math.inf), gain(rl), rin)


def _ratio(num: float, den: float) -> float:
    """num/den, with a zero denominator read as a limit: ±inf, or 0 when num ≤ 0
    (a junction that is not driven forward conducts nothing)."""
    if den > 0:
        return num / den
    return math.inf if num > 0 else 0.0
