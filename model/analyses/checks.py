"""Warnings: each a code of our own and a one-line explanation.

The codes are stable identifiers for scripts and the ledger; the messages are
for people and carry the numbers that tripped them.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

from model.design.units import format_si

#: Supplies above this are treated as hazardous (conservative common practice;
#: IEC 62368-1 ES1 as commonly cited and IEC 60598-1 use 60 V DC).
SAFE_DC_VOLTS = 60.0
#: Fractional IC change with β halved or doubled that marks bias as β-dependent.
BETA_SENSITIVITY = 0.10


#: Every warning code, in README "Warnings" order; a history's raised and
#: cleared lists may hold only these.
CODES = ("Q-SATURATED", "Q-CUTOFF", "HEADROOM-SHORT", "TJ-OVER", "PD-OVER", "VCE-OVER", "R-OVERLOAD",
         "BETA-DEPENDENT", "FT-INCONSISTENT", "NO-PASSBAND", "OUT-OF-BAND", "HAZARDOUS-VOLTAGE",
         "Q2-SATURATED", "Q2-CUTOFF", "Q2-TJ-OVER", "Q2-PD-OVER", "Q2-VCE-OVER", "Q2-CLIPS-FIRST")


@dataclass(frozen=True)
class Warning_:
    code: str
    message: str

    def __post_init__(self):
        if self.code not in CODES:
            raise ValueError(f"warning code {self.code!r} is not in CODES")

    def to_dict(self) -> dict:
        return {"code": self.code, "message": self.message}


def _v(x, unit):
    return format_si(x, unit)


def stage_warnings(d, *, region, ic, vce, vbc, swing_up, swing_down, wanted_out,
                   p_transistor, tj, p_resistors, ic_beta_half, ic_beta_double, device, ft,
                   band=None, follower=None, swing_limits=("", "")) -> tuple:
    """All warnings for one analysed design (scalars in SI units).

    ``band`` is (f_low, f_high, gain at source.freq over midband) from the
    frequency response, or None where that was not computed.  ``follower``:
    the second transistor's Figures fields (region2, ic2, vce2, p_transistor2,
    tj2, ...) of a two-transistor stage; ``swing_limits`` what ends the swing
    up and down ("q2 cutoff").
    """
    t = d.transistor
    out = []
    if region == "saturation":
        out.append(Warning_("Q-SATURATED", f"transistor saturated at rest: VBC {_v(vbc, 'V')} above 0.4 V "
                            f"(VCE {_v(vce, 'V')}); the stage cannot amplify{_dc_coupled(d)}"))
    elif region == "cutoff":
        out.append(Warning_("Q-CUTOFF", f"transistor cut off at rest: IC {_v(ic, 'A')} below 10 nA; "
                            f"the bias does not turn it on{_dc_coupled(d)}"))
    short = [(name, s) for name, s in (("up", swing_up), ("down", swing_down)) if s < wanted_out]
    # A stage that is not active at rest already has its own warning; saying
    # that its zero swing is short of the request would only add noise.
    if wanted_out > 0 and short and region == "active":
        sides = ", ".join(f"swing_{name} {_v(s, 'V')}" for name, s in short)
        out.append(Warning_("HEADROOM-SHORT", f"requested output {_v(wanted_out, 'V')} peak "
                            f"(vpk × |av_source|) exceeds {sides}: the output clips"))
    if tj >= t.tj_max:
        out.append(Warning_("TJ-OVER", f"junction temperature {tj:.1f} °C at or above tj_max {t.tj_max:g} °C"))
    if p_transistor > t.pd_max:
        out.append(Warning_("PD-OVER", f"transistor dissipates {_v(p_transistor, 'W')}, above pd_max "
                            f"{_v(t.pd_max, 'W')}"))
    if vce > t.vceo:
        out.append(Warning_("VCE-OVER", f"VCE {_v(vce, 'V')} above vceo {_v(t.vceo, 'V')}"))
    rating = d.parts.resistor_power
    for name, p in p_resistors.items():
        if p > rating:
            out.append(Warning_("R-OVERLOAD", f"{name} dissipates {_v(p, 'W')}, above its "
                                f"{_v(rating, 'W')} rating"))
    if ic > 0:
        moves = [abs(x / ic - 1.0) for x in (ic_beta_half, ic_beta_double)]
        if max(moves) > BETA_SENSITIVITY:
            out.append(Warning_("BETA-DEPENDENT", f"IC moves {100 * moves[0]:.0f} % with β halved and "
                                f"{100 * moves[1]:.0f} % with β doubled (limit 10 %): stiffen the divider "
                                "or add emitter resistance"))
    # Judged only while active: at rest in cut-off gm is ~0 and any ft is
    # "too fast", which would only repeat Q-CUTOFF.
    if device.floored and region == "active":
        out.append(Warning_("FT-INCONSISTENT", f"ft {_v(ft, 'Hz')} is beyond what gm and cmu allow at IC "
                            f"{_v(ic, 'A')}: gm/(2π·ft) is below cmu {_v(device.c_mu, 'F')}, so Cπ is "
                            "taken as 0; a real part's ft falls at low current, so give its ft at this IC"))
    if band is not None and region == "active":
        f_low, f_high, relative = band
        if math.isnan(f_low):
            out.append(Warning_("NO-PASSBAND", "the gain never comes within 3 dB of its midband value: "
                                "a coupling or bypass capacitor is far too small or a device capacitance far too large"))
        elif not f_low <= d.source.freq <= f_high:
            where = "below f_low" if d.source.freq < f_low else "above f_high"
            corner = f_low if d.source.freq < f_low else f_high
            out.append(Warning_("OUT-OF-BAND", f"source.freq {_v(d.source.freq, 'Hz')} is {where} "
                                f"{_v(corner, 'Hz')}: the gain there is {20 * math.log10(max(relative, 1e-300)):.1f} dB "
                                "from midband"))
    if follower:
        out += _follower_warnings(d, follower, region, short if wanted_out > 0 else (), swing_limits)
    span = d.supply.vcc - d.supply.vee
    if span > SAFE_DC_VOLTS:
        shown = (f"supply {_v(d.supply.vcc, 'V')}" if d.supply.vee == 0 else
                 f"split supply {_v(d.supply.vcc, 'V')} / {_v(d.supply.vee, 'V')} ({_v(span, 'V')} rail to rail)")
        out.append(Warning_("HAZARDOUS-VOLTAGE", f"{shown} exceeds 60 V DC: a shock "
                            "hazard; follow local codes and licensed practice"))
    return tuple(out)


def _follower_warnings(d, f: dict, region: str, short, swing_limits) -> list:
    """The follower's own failures: not active at rest, past its ratings, or
    clipping the output before the gain stage does."""
    t, out = d.transistor, []
    if f["region2"] == "saturation":
        out.append(Warning_("Q2-SATURATED", f"follower q2 saturated at rest (VCE {_v(f['vce2'], 'V')}): "
                            "the gain stage's collector sits too close to the supply"))
    elif f["region2"] == "cutoff":
        out.append(Warning_("Q2-CUTOFF", f"follower q2 cut off at rest (IC {_v(f['ic2'], 'A')}): "
                            "its emitter resistor re carries no current"))
    if f["tj2"] >= t.tj_max:
        out.append(Warning_("Q2-TJ-OVER", f"follower junction temperature {f['tj2']:.1f} °C at or above "
                            f"tj_max {t.tj_max:g} °C"))
    if f["p_transistor2"] > t.pd_max:
        out.append(Warning_("Q2-PD-OVER", f"follower q2 dissipates {_v(f['p_transistor2'], 'W')}, above "
                            f"pd_max {_v(t.pd_max, 'W')}"))
    if f["vce2"] > t.vceo:
        out.append(Warning_("Q2-VCE-OVER", f"follower VCE {_v(f['vce2'], 'V')} above vceo {_v(t.vceo, 'V')}"))
    # Worth saying only where the output falls short of the request: then
    # the follower, not the gain stage, is what to change.
    if region == "active" and f["region2"] == "active":
        for side, s in short:
            why = swing_limits[0] if side == "up" else swing_limits[1]
            if why.startswith("q2 "):
                out.append(Warning_("Q2-CLIPS-FIRST", f"the follower q2 reaches {why.split()[1]} before the "
                                    f"gain stage going {side} (swing_{side} {_v(s, 'V')}): lower re or "
                                    "raise the follower's current"))
    return out


def _dc_coupled(d) -> str:
    """Why the bias may not be what the divider alone would give: a coupling
    capacitor not fitted puts the source's or the load's DC path in it."""
    parts = []
    if d.stage.cin == 0:
        parts.append(f"with cin none the source's 0 V through rs {_v(d.source.rs, 'Ω')} is part of the bias")
    if d.stage.cout == 0 and math.isfinite(d.load.rl):
        parts.append(f"with cout none rl {_v(d.load.rl, 'Ω')} carries DC from the "
                     + ("emitter" if d.topology in ("emitter-follower", "emitter-follower-split", "ce-follower")
                        else "collector"))
    return "".join(f"; {p}" for p in parts)
