"""The plain-text `stageledger report`: readable without colour, 80 columns wide."""

from __future__ import annotations

import math

import numpy as np

from model.analyses.figures import Figures
from model.analyses.midband import decibels
from model.design.stage import Design
from model.design.units import format_si

from .number_text import db_text, gain_text
from .safe_text import visible
from .wrapping import units_kept, whole, wrap

#: The words for a figure that is not a finite number: an infinite one is
#: unbounded (a resistance with no path, a band with no upper corner); a NaN
#: one does not exist for this design (the corners of a stage with no passband).
UNBOUNDED, NONE = "unbounded", "none"


#: Under the hand VCE of a saturated stage.  The textbook method has no
#: saturation: it assumes the forward-active region, so it carries on and
#: its VCE (often negative) and gains only show how far the bias is from
#: working; they are printed as computed, not clipped to a made-up VCE(sat).
SATURATED_NOTE = "(hand method assumes forward-active; the stage saturates)"


def _si(x: float, unit: str, infinite: str = UNBOUNDED) -> str:
    if math.isfinite(x):
        return format_si(x, unit)
    return NONE if math.isnan(x) else infinite


def _db(x: float) -> str:
    """A gain's magnitude in dB; a zero gain has none."""
    db = float(decibels(x))
    return f"{db_text(db)} dB" if math.isfinite(db) else "zero gain, no dB"


def _gain(x: float) -> str:
    return f"{gain_text(x)} V/V ({_db(x)})" if math.isfinite(x) else _si(x, "V/V")


def _hand_gain(x: float) -> str:
    return f"{gain_text(x)} V/V" if math.isfinite(x) else _si(x, "V/V")


def _pct(x: float) -> str:
    return f"{100.0 * x:.3g} %" if math.isfinite(x) else NONE


def _plain(x: float) -> str:
    """A plain number to 4 figures, or "none" where it does not exist
    (β_ac of a junction whose derivatives underflow to 0)."""
    return f"{x:.4g}" if math.isfinite(x) else NONE


def _follower_rows(fig: Figures, t) -> list:
    """The follower's (q2's) operating point, for a two-transistor stage."""
    if not fig.two_transistors:
        return []
    return [
        "",
        "Follower (q2)",
        f"  region                           {fig.region2}",
        f"  IC / VCE                         {_si(fig.ic2, 'A')} / {_si(fig.vce2, 'V')}",
        f"  gm / rπ                          {_si(fig.gm2, 'S')} / {_si(fig.r_pi2, 'Ω')}",
        f"  dissipation                      {_si(fig.p_transistor2, 'W')} (pd_max {_si(t.pd_max, 'W')}), "
        f"tj {fig.tj2:.1f} °C",
    ]


def _db_or_none(x: float) -> str:
    return f"{x:.2f} dB" if math.isfinite(x) else NONE


def noise_lines(design: Design, fig: Figures) -> list:
    """The report's noise section: densities at source.freq, NF, the band's
    integral and SNR, and the largest contributors."""
    n = fig.noise
    if n is None:
        return []
    at = _si(design.source.freq, "Hz")
    band = (f"{_si(n.band[0], 'Hz')} – {_si(n.band[1], 'Hz')}" if math.isfinite(n.band[0])
            else "none: the stage has no −3 dB band")
    first = f"  {'largest sources':<33}"
    return [
        "",
        f"Noise, input-referred (ambient {design.environment.ambient:g} °C)",
        f"  at {at:<30} en {_si(n.en, 'V')}/√Hz   in {_si(n.in_, 'A')}/√Hz",
        f"  {'total with rs':<33}{_si(n.en_total, 'V')}/√Hz (rs {_si(design.source.rs, 'Ω')} alone "
        f"{_si(n.spectrum[4][0] if len(n.spectrum[4]) else math.nan, 'V')}/√Hz)",
        f"  {'noise figure':<33}{_db_or_none(n.nf_db)}; best {_db_or_none(n.nf_min_db)} at rs "
        f"{_si(n.rs_opt, 'Ω')}",
        f"  {'band':<33}{band}",
        f"  {'integrated':<33}{_si(n.vn_in_rms, 'V', NONE)} rms; SNR of vpk {_db_or_none(n.snr_db)}",
        *wrap(", ".join(map(whole, noise_shares(fig, 5))) or NONE, 78, " " * len(first), first),
    ]


def noise_shares(fig: Figures, count: int) -> list:
    """The ``count`` largest noise sources with their shares of the total
    power ("rs thermal 56 %"), those under half a per cent left out."""
    n = fig.noise
    return [] if n is None else [f"{name} {100 * share:.0f} %" for name, share in n.contributors[:count]
                                 if share >= 0.005]


def _title(design: Design) -> str:
    return visible(design.name) or "(unnamed design)"


def render_report(design: Design, fig: Figures, source: str) -> str:
    """The report of one analysed design as text lines."""
    h = fig.hand
    t = design.transistor
    rows = [
        f"{_title(design)} — {design.topology}, {t.polarity.upper()}",
        f"file: {visible(source)}",
        "",
        "Operating point                    exact          hand estimate",
        f"  region                           {fig.region}",
        f"  IC                               {_si(fig.ic, 'A'):<14} {_si(h.ic, 'A')}",
        f"  VCE                              {_si(fig.vce, 'V'):<14} {_si(h.vce, 'V')}",
        *([f"    {SATURATED_NOTE}"] if fig.region == "saturation" else []),
        f"  VBE                              {_si(fig.vbe, 'V'):<14} {_si(design.estimate.vbe, 'V')} (assumed)",
        f"  IB                               {_si(fig.ib, 'A')}",
        f"  nodes to ground                  vb {_si(fig.vb, 'V')}   ve {_si(fig.ve, 'V')}   vc {_si(fig.vc, 'V')}",
        *_follower_rows(fig, t),
        "",
        "Small signal at the operating point",
        f"  gm {_si(fig.gm, 'S')}   rπ {_si(fig.r_pi, 'Ω')}   ro {_si(fig.ro, 'Ω')}   "
        f"β_ac {_plain(fig.beta_ac)}   re (hand) {_si(h.re, 'Ω')}",
        "",
        "Midband                            exact                      hand estimate",
        f"  av_open                          {_gain(fig.av_open):<26} {_hand_gain(h.av_open)}",
        f"  av_loaded                        {_gain(fig.av_loaded):<26} {_hand_gain(h.av_loaded)}",
        f"  av_source                        {_gain(fig.av_source)}",
        f"  rin                              {_si(fig.rin, 'Ω'):<26} {_si(h.rin, 'Ω')}",
        f"  rin_base                         {_si(fig.rin_base, 'Ω')}",
        f"  rout                             {_si(fig.rout, 'Ω')}",
        "",
        f"Headroom and distortion at vpk {_si(design.source.vpk, 'V')}",
        f"  output wanted                    {_si(fig.vout_wanted, 'V')} peak",
        f"  swing_up / swing_down            {_si(fig.swing_up, 'V')} / {_si(fig.swing_down, 'V')}",
        *([f"  ended by                         {' / '.join(x or '—' for x in fig.swing_limits)}"]
          if fig.two_transistors else []),
        f"  thd / hd2 / hd3                  {_pct(fig.thd)} / {_pct(fig.hd2)} / {_pct(fig.hd3)}",
        "",
        "Dissipation at rest",
        f"  {'gain transistor (q1)' if fig.two_transistors else 'transistor':<33}{_si(fig.p_transistor, 'W')} (pd_max {_si(t.pd_max, 'W')})",
        f"  junction temperature             {fig.tj:.1f} °C (tj_max {t.tj_max:g} °C, ambient "
        f"{design.environment.ambient:g} °C)",
        f"  supply                           {_si(fig.p_supply, 'W')} at {_si(fig.i_supply, 'A')}",
    ]
    parts = [f"{k} {_si(v, 'W')}" for k, v in fig.p_resistors.items()]
    for i in range(0, len(parts), 3):
        label = "resistors" if i == 0 else ""
        rows.append(f"  {label:<33}" + "   ".join(parts[i : i + 3]))
    rows += ["", "Frequency response of av_source (exact −3 dB points)"]
    rows += response_lines(design, fig)
    rows += noise_lines(design, fig)
    rows += ["", "Warnings"]
    rows += [line for w in fig.warnings
             for line in wrap(units_kept(f"{w.code}: {w.message}"), 78, indent="    ", first="  ")] or ["  none"]
    return "\n".join(rows) + "\n"


#: How the parts behind the corners are shown; the file and JSON use the keys.
PART_NAMES = {"cpi": "Cπ", "cmu": "Cμ"}


def part_name(part: str) -> str:
    return PART_NAMES.get(part, part)


def _hz(x: float, infinite: str = NONE) -> str:
    """A corner or a part's corner alone (Hz): an infinite one (a part
    with no capacitance, no corner below 10 THz) does not exist."""
    if math.isnan(x):
        return NONE
    return _si(x, "Hz", infinite) if x > 0 else "below 1 µHz"


def corner_sentence(which: str, freq: float, by) -> str:
    """``f_low 8.5 Hz, set by ce (6.9 Hz alone)``: the corner and the part to change."""
    text = f"{which} {_hz(freq)}"
    if which == "f_low" and freq == 0 and by is None:
        return "f_low 0 Hz: flat to DC, no coupling or bypass capacitor fitted"
    if which == "f_high" and freq == math.inf:
        text += " below 10 THz"
    if by is not None and math.isfinite(freq) and freq > 0:
        text += f", set by {part_name(by.part)} ({_hz(by.freq)} alone)"
    return text


def response_lines(design: Design, fig: Figures) -> list:
    """The report's response section (indented lines); empty if not computed."""
    r = fig.response
    if r is None:
        return ["  not computed"]
    # With no coupling or bypass capacitor fitted there is no lower corner to estimate.
    low = (" · ".join(f"{part_name(p.part)} {_hz(p.freq)}" for p in r.low_parts) if r.low_parts
           else "none fitted (flat to DC)")
    high = " · ".join(f"{part_name(p.part)} {_hz(p.freq)}" for p in r.high_parts)
    pad = " " * 29
    rows = [
        f"  {corner_sentence('f_low', r.f_low, r.low_by)}",
        f"    short-circuit estimates  {low}",
        *([f"{pad}sum {_hz(r.f_low_estimate)}"] if r.low_parts else []),
        f"  {corner_sentence('f_high', r.f_high, r.high_by)}",
        f"    open-circuit estimates   {high}",
        f"{pad}1/(2πΣτ) {_hz(r.f_high_estimate)}; Miller (input pole) {_hz(r.f_high_miller)}",
        f"  bandwidth                        {_hz(r.bandwidth, UNBOUNDED)}",
        f"  at source.freq {_si(design.source.freq, 'Hz'):<17} {gain_text(abs(r.gain_at_freq)).lstrip('+')} V/V "
        f"({_db(r.gain_at_freq)}), phase {_deg(r.phase_at_freq)}",
        f"  device capacitance               Cπ {_si(r.device.c_pi, 'F')}, Cμ {_si(r.device.c_mu, 'F')}"
        + (" (Cπ floored at 0)" if r.device.floored else ""),
    ]
    return rows


def _deg(x: float) -> str:
    return f"{x:.1f}°" if math.isfinite(x) else NONE


def _cell(x: float) -> str:
    """A CSV number; a non-finite one (the dB of a zero gain, its undefined
    phase) leaves the cell empty, as spreadsheets read a missing value."""
    return f"{x:.6g}" if math.isfinite(x) else ""


def render_response(design: Design, fig: Figures, source: str, as_csv: bool) -> str:
    """The sweep as CSV, or as a table under the corners."""
    r = fig.response
    mag, phase = r.magnitude_db(), r.phase_deg()
    noise = fig.noise.spectrum[1] if fig.noise is not None else np.full(len(r.freq), math.nan)
    if as_csv:
        rows = ["freq_hz,gain_db,phase_deg,noise_in_v_rthz"]
        rows += [f"{_cell(f)},{_cell(m)},{_cell(p)},{_cell(n)}" for f, m, p, n in zip(r.freq, mag, phase, noise)]
        return "\n".join(rows) + "\n"
    rows = [f"{_title(design)} — av_source against frequency", f"file: {visible(source)}"]
    rows += response_lines(design, fig)
    rows += ["", f"  {'frequency':>12}  {'gain':>10}  {'phase':>8}"]
    rows += [f"  {_si(f, 'Hz'):>12}  {_fixed(m, 7, 2, ' dB'):>10}  {_fixed(p, 7, 1, '°'):>8}"
             for f, m, p in zip(r.freq, mag, phase)]
    return "\n".join(rows) + "\n"


def _fixed(x: float, width: int, places: int, unit: str) -> str:
    return f"{x:>{width}.{places}f}{unit}" if math.isfinite(x) else NONE
