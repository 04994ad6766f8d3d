"""The plain-text `stageledger report`: readable without colour, 80 columns wide."""

from __future__ import annotations

import math

from model.analysis import Figures
from model.design import Design
from model.midband import decibels
from model.units import format_si


def _si(x: float, unit: str) -> str:
    return format_si(x, unit) if math.isfinite(x) else ("∞ " + unit if x > 0 else "—")


def _gain(x: float) -> str:
    return f"{x:+.4g} V/V ({float(decibels(x)):+.1f} dB)"


def _pct(x: float) -> str:
    return f"{100.0 * x:.3g} %"


def render_report(design: Design, fig: Figures, source: str) -> str:
    """The report of one analysed design as text lines."""
    h = fig.hand
    t = design.transistor
    rows = [
        f"{design.name or '(unnamed design)'} — {design.topology}, {t.polarity.upper()}",
        f"file: {source}",
        "",
        "Operating point                    exact          hand estimate",
        f"  region                           {fig.region}",
        f"  IC                               {_si(fig.ic, 'A'):<14} {_si(h.ic, 'A')}",
        f"  VCE                              {_si(fig.vce, 'V'):<14} {_si(h.vce, 'V')}",
        f"  VBE                              {_si(fig.vbe, 'V'):<14} {_si(design.estimate.vbe, 'V')} (assumed)",
        f"  IB                               {_si(fig.ib, 'A')}",
        f"  nodes to ground                  vb {_si(fig.vb, 'V')}   ve {_si(fig.ve, 'V')}   vc {_si(fig.vc, 'V')}",
        "",
        "Small signal at the operating point",
        f"  gm {_si(fig.gm, 'S')}   rπ {_si(fig.r_pi, 'Ω')}   ro {_si(fig.ro, 'Ω')}   "
        f"β_ac {fig.beta_ac:.4g}   re (hand) {_si(h.re, 'Ω')}",
        "",
        "Midband                            exact                      hand estimate",
        f"  av_open                          {_gain(fig.av_open):<26} {h.av_open:+.4g} V/V",
        f"  av_loaded                        {_gain(fig.av_loaded):<26} {h.av_loaded:+.4g} V/V",
        f"  av_source                        {_gain(fig.av_source)}",
        f"  rin                              {_si(fig.rin, 'Ω'):<26} {_si(h.rin, 'Ω')}",
        f"  rin_base                         {_si(fig.rin_base, 'Ω')}",
        f"  rout                             {_si(fig.rout, 'Ω')}",
        "",
        f"Headroom and distortion at vpk {_si(design.source.vpk, 'V')}",
        f"  output wanted                    {_si(fig.vout_wanted, 'V')} peak",
        f"  swing_up / swing_down            {_si(fig.swing_up, 'V')} / {_si(fig.swing_down, 'V')}",
        f"  thd / hd2 / hd3                  {_pct(fig.thd)} / {_pct(fig.hd2)} / {_pct(fig.hd3)}",
        "",
        "Dissipation at rest",
        f"  transistor                       {_si(fig.p_transistor, 'W')} (pd_max {_si(t.pd_max, 'W')})",
        f"  junction temperature             {fig.tj:.1f} °C (tj_max {t.tj_max:g} °C, ambient "
        f"{design.environment.ambient:g} °C)",
        f"  supply                           {_si(fig.p_supply, 'W')} at {_si(fig.i_supply, 'A')}",
    ]
    parts = [f"{k} {_si(v, 'W')}" for k, v in fig.p_resistors.items()]
    for i in range(0, len(parts), 3):
        label = "resistors" if i == 0 else ""
        rows.append(f"  {label:<33}" + "   ".join(parts[i : i + 3]))
    rows += ["", "Warnings"]
    rows += [f"  {w.code}: {w.message}" for w in fig.warnings] or ["  none"]
    return "\n".join(rows) + "\n"
