"""The engine checked against sources outside the project.

Every check names its source in a comment. The sources are:

* the SI Brochure, 9th edition (2019), for k and e, and ``scipy.constants``,
  which carries the same exact values;
* the closed-form small-signal results of Sedra & Smith, *Microelectronic
  Circuits*, and Gray, Hurst, Lewis & Meyer, *Analysis and Design of Analog
  Integrated Circuits* (GHLM), plus the output resistance looking into a
  degenerated collector (UC Berkeley EE105 notes);
* the Ebers–Moll transport equations with the Gummel–Poon-style forward Early
  factor (Jaeger & Blalock, ch. 5) and the Getreu (1976) temperature laws,
  written out again by hand here and solved with ``scipy.optimize.root``;
* GHLM's nonlinear-analysis results for harmonic distortion, with the modified
  Bessel functions from ``scipy.special.iv``.

The closed forms are stated in terms of the hybrid-π parameters at the
operating point, so they take the engine's own gm, rπ, ro and β_ac at the
operating point as inputs; what they check is the engine's linear solve of the
whole circuit, which assumes no topology formula. Where a closed form is exact
for the hybrid-π model the tolerance only covers rounding; where the book
neglects something (ro, the base current, higher-order terms) the tolerance
says what and how big.
"""

from __future__ import annotations

import math
from pathlib import Path

import numpy as np
import pytest
from numpy.testing import assert_allclose
from scipy import constants, optimize, special

import model
from model.analyses.figures import analyse_batch, design_values
from model.circuit.device import evaluate, params_at, thermal_voltage
from model.circuit.newton import operating_point
from model.circuit.topologies import build
from model.design.stage import default_design, with_values

CE, EF = "common-emitter", "emitter-follower"
SAVED = Path(__file__).resolve().parent.parent / "saved_designs"
T0 = 298.15  # K, the 25 °C at which the transistor parameters are given


def vt_at(celsius: float) -> float:
    """kT/q from scipy.constants (the exact SI 2019 k and e), independent of the engine."""
    return constants.k * (constants.zero_Celsius + celsius) / constants.e


def par(*rs: float) -> float:
    """Resistors in parallel (an infinite one drops out)."""
    return 1.0 / sum(1.0 / r for r in rs if not math.isinf(r))


def ce(**kw) -> model.Design:
    return with_values(default_design(CE), kw_keys(kw))


def ef(**kw) -> model.Design:
    return with_values(default_design(EF), kw_keys(kw))


def kw_keys(kw: dict) -> dict:
    """stage__rc=... → {"stage.rc": ...}: keyword arguments cannot hold a dot."""
    return {k.replace("__", "."): v for k, v in kw.items()}


def biased_ce(ic: float, *, vcc: float, rc: float, re1: float, re2: float, **kw) -> model.Design:
    """A common emitter whose divider is set (stiff, 10·IB) for roughly ``ic``,
    with β = 200 and IS = 1e-14 A of the default transistor at 25 °C."""
    ib = ic / 200.0
    vb = ic * (1.0 + 1.0 / 200.0) * (re1 + re2) + vt_at(25.0) * math.log(ic / 1e-14)
    idiv = 10.0 * ib
    return ce(supply__vcc=vcc, stage__rc=rc, stage__re1=re1, stage__re2=re2,
              bias__r2=vb / idiv, bias__r1=(vcc - vb) / (idiv + ib), **kw)


# ---------------------------------------------------------------------------
# 4. Constants: SI Brochure, 9th edition (2019)
# ---------------------------------------------------------------------------


@pytest.mark.parametrize(
    "kelvin, millivolts",
    [(298.15, 25.69258), (300.0, 25.85200), (300.15, 25.86493)],  # REFERENCES.md, from the SI 2019 k and e
)
def test_thermal_voltage_matches_si_2019(kelvin, millivolts):
    # The check values carry 7 significant figures, so rounding is below 2e-7;
    # rtol 1e-6 is the brief's tolerance and still catches any wrong constant.
    assert_allclose(float(thermal_voltage(kelvin)) * 1e3, millivolts, rtol=1e-6)
    # scipy.constants holds the exact k and e, so agreement is to rounding only.
    assert_allclose(float(thermal_voltage(kelvin)), constants.k * kelvin / constants.e, rtol=1e-14)


def test_si_constants_are_the_exact_2019_values():
    # SI Brochure 9th ed.: k = 1.380649e-23 J/K and e = 1.602176634e-19 C exactly.
    from model.circuit import device

    assert device.BOLTZMANN == constants.k == 1.380649e-23
    assert device.ELEMENTARY_CHARGE == constants.e == 1.602176634e-19


def _vbe_for(ic: float, celsius: float, *, i_s=1e-14, xti=3.0, eg=1.11) -> float:
    """The VBE at which the engine's device carries ``ic`` with VBC = 0 (root of IC − ic)."""
    p = params_at(i_s=i_s, beta_f=200.0, beta_r=2.0, va=100.0, polarity_sign=1.0,
                  celsius=celsius, xti=xti, eg=eg, xtb=1.5)

    def f(vbe):
        return float(evaluate(p, np.array([vbe]), np.array([0.0])).ic[0]) - ic

    return optimize.brentq(f, 0.0, 1.2, xtol=1e-15, rtol=1e-15)


@pytest.mark.parametrize("ic", [100e-6, 1e-3, 5e-3])
def test_vbe_temperature_coefficient(ic):
    # Central difference over ±0.5 K about 25 °C at constant IC.
    h = 0.5
    lo, mid, hi = (_vbe_for(ic, 25.0 + d) for d in (-h, 0.0, h))
    slope = (hi - lo) / (2 * h)  # V/K
    # Sedra & Smith, common practice: VBE falls by about 2 mV/K at constant IC.
    # The brief's band −2.2 … −1.6 mV/K holds for 0.1–5 mA with IS = 1e-14 A.
    assert -2.2e-3 <= slope <= -1.6e-3
    # Theory from the IS(T) law (Getreu): dVBE/dT = (VBE − XTI·VT − EG)/T.
    # The central difference's truncation error is O(h²·VBE''') ≈ 1e-9 V/K,
    # so rtol 1e-5 is loose for it yet far tighter than any wrong exponent.
    theory = (mid - 3.0 * vt_at(25.0) - 1.11) / T0
    assert_allclose(slope, theory, rtol=1e-5)


def test_saturation_current_and_beta_follow_getreu_temperature_laws():
    # Getreu (1976): IS(T) = IS(T0)(T/T0)^XTI exp[(EG/VT(T))(T/T0 − 1)], βF(T) = βF(T0)(T/T0)^XTB.
    celsius = np.array([-40.0, 0.0, 25.0, 85.0, 125.0])
    p = params_at(i_s=2e-14, beta_f=150.0, beta_r=3.0, va=80.0, polarity_sign=1.0,
                  celsius=celsius, xti=3.5, eg=1.12, xtb=1.7)
    t = constants.zero_Celsius + celsius
    vt = constants.k * t / constants.e
    # Both are closed forms evaluated in floating point: rtol 1e-12 covers rounding.
    assert_allclose(p.i_s, 2e-14 * (t / T0) ** 3.5 * np.exp((1.12 / vt) * (t / T0 - 1.0)), rtol=1e-12)
    assert_allclose(p.beta_f, 150.0 * (t / T0) ** 1.7, rtol=1e-12)
    assert_allclose(p.beta_r, 3.0, rtol=0)  # βR is not scaled (documented in params_at)


# ---------------------------------------------------------------------------
# 1. Closed forms: hybrid-π parameters (Sedra & Smith; GHLM)
# ---------------------------------------------------------------------------

DEVICE_CASES = [
    # (Early voltage V, ambient °C); the default CE otherwise (IC ≈ 0.5 mA, VCB ≈ 3.7 V).
    (1e9, 25.0),
    (100.0, 25.0),
    (30.0, 25.0),
    (1e9, 70.0),
    (50.0, -20.0),
]


@pytest.mark.parametrize("va, ambient", DEVICE_CASES)
def test_hybrid_pi_parameters(va, ambient):
    d = ce(transistor__va=va, environment__ambient=ambient)
    f = model.analyse(d)
    assert f.region == "active"
    vt = vt_at(ambient)
    vcb = f.vc - f.vb
    # Sedra & Smith: gm = IC/VT. The model's gm = ∂IC/∂VBE at constant VCE also
    # carries the Early term −IF/VA (IC = IF(1 + VCB/VA)), a relative −VT/(VA + VCB):
    # 2.5e-4 at VA = 100 V, 7e-4 at 30 V. rtol 1.5·VT/(VA + VCB) admits that term only.
    # The IS(T)/IC term (below) is ~7e-9 at 70 °C, hence the + 1e-8.
    assert_allclose(f.gm, f.ic / vt, rtol=1.5 * vt / (va + vcb) + 1e-8)
    # With the Early term written out (Gummel–Poon factor, REFERENCES.md) the only
    # neglected term is IS(T)/IC: 2e-11 at 25 °C, 7e-9 at 70 °C; rtol 1e-8.
    i_f = f.ic / (1.0 + vcb / va)
    assert_allclose(f.gm, f.ic / vt - i_f / va, rtol=1e-8)
    # Sedra & Smith: rπ = β/gm = VT/IB with β = IC/IB. Neglected: the collector
    # junction's reverse leakage −IS/βR inside IB, a relative βF·IS(T)/(βR·IC):
    # ~2e-9 at 25 °C but ~9e-7 at 70 °C, where IS(T) (Getreu) is ~400 times larger.
    t_k = constants.zero_Celsius + ambient
    is_t = 1e-14 * (t_k / T0) ** 3 * math.exp((1.11 / vt) * (t_k / T0 - 1.0))
    leak = 200.0 * (t_k / T0) ** 1.5 * is_t / (2.0 * f.ic)
    assert_allclose(f.r_pi, vt / f.ib, rtol=2.0 * leak + 1e-8)
    # GHLM / REFERENCES.md: ro ≈ (VA + VCB)/IC. Exact for the forward Early factor
    # up to the collector junction's leakage, IS(T)/(βR·IC) ≤ 4e-9 here; rtol 1e-8.
    assert_allclose(f.ro, (va + vcb) / f.ic, rtol=1e-8)
    # β_DC = IC/IB = βF(T)(1 + VCB/VA), βF(T) from the Getreu law (XTB = 1.5).
    # Neglected: the same reverse leakage as above; rtol as there.
    beta_t = 200.0 * (t_k / T0) ** 1.5
    assert_allclose(f.ic / f.ib, beta_t * (1.0 + vcb / va), rtol=2.0 * leak + 1e-8)
    # β_ac = gm·rπ (documented in midband) is below β_DC by the same Early term as
    # gm: βF(T)(1 + VCB/VA − VT/VA), from differentiating the transport equations;
    # the derivatives carry no leakage term, so rtol 1e-8.
    assert_allclose(f.beta_ac, beta_t * (1.0 + vcb / va - vt / va), rtol=1e-8)


# ---------------------------------------------------------------------------
# 1. Closed forms: common-emitter gain, input and output resistance
# ---------------------------------------------------------------------------

#: Undegenerated CE (re1 = re2 = 0, emitter grounded), biased by the divider
#: alone: IC ≈ 2 mA at 25 °C with β = 200 and IS = 1e-14 A.
GROUNDED_EMITTER = dict(supply__vcc=10.0, bias__r1=120e3, bias__r2=10e3, stage__rc=2e3,
                        stage__re1=0.0, stage__re2=0.0, source__rs=0.0)


@pytest.mark.parametrize("va", [1e9, 100.0, 20.0])
@pytest.mark.parametrize("rl", ["open", 10e3, 2.2e3])
def test_ce_gain_without_degeneration(va, rl):
    f = model.analyse(ce(**GROUNDED_EMITTER, transistor__va=va, load__rl=rl))
    assert f.region == "active"
    rc = 2e3
    rl_ohms = math.inf if rl == "open" else rl
    # Sedra & Smith / GHLM: with no RE, Av = −gm(RC ‖ ro), and −gm(RC ‖ ro ‖ RL) loaded.
    # Exact for the hybrid-π model (the base is driven, so rπ does not enter);
    # rtol 1e-9 covers the linear solve's rounding.
    assert_allclose(f.av_open, -f.gm * par(rc, f.ro), rtol=1e-9)
    assert_allclose(f.av_loaded, -f.gm * par(rc, f.ro, rl_ohms), rtol=1e-9)
    # Looking into the grounded-emitter base: rπ; the input adds R1 ‖ R2.
    assert_allclose(f.rin_base, f.r_pi, rtol=1e-9)
    assert_allclose(f.rin, par(120e3, 10e3, f.r_pi), rtol=1e-9)


@pytest.mark.parametrize("re, re2", [(100.0, 0.0), (470.0, 0.0), (1e3, 0.0), (220.0, 1e3)])
@pytest.mark.parametrize("rl", ["open", 10e3])
def test_ce_gain_and_input_with_degeneration(re, re2, rl):
    # VA = 1e9 V makes ro ≈ 1e12 Ω, as the closed forms assume (no ro).
    # re2 > 0 is bypassed by ce, a short at midband, so RE is re1 alone.
    d = biased_ce(1e-3, vcc=12.0, rc=4.7e3, re1=re, re2=re2, transistor__va=1e9, load__rl=rl)
    f = model.analyse(d)
    assert f.region == "active"
    r1, r2 = d.bias.r1, d.bias.r2
    rc_ac = par(4.7e3, math.inf if rl == "open" else rl)
    # Sedra & Smith / GHLM: Av = −gm RC/(1 + RE(gm + 1/rπ)). Neglected: ro, whose
    # terms are of order RC/ro and RE/ro ≈ 1e-8; rtol 1e-7.
    assert_allclose(f.av_open, -f.gm * 4.7e3 / (1.0 + re * (f.gm + 1.0 / f.r_pi)), rtol=1e-7)
    assert_allclose(f.av_loaded, -f.gm * rc_ac / (1.0 + re * (f.gm + 1.0 / f.r_pi)), rtol=1e-7)
    # Sedra & Smith: Rin,base = rπ + (β + 1)RE with β = β_ac = gm·rπ; same neglected terms.
    assert_allclose(f.rin_base, f.r_pi + (f.beta_ac + 1.0) * re, rtol=1e-7)
    # The input terminal sees the divider in parallel (midband, cin a short).
    assert_allclose(f.rin, par(r1, r2, f.rin_base), rtol=1e-9)


@pytest.mark.parametrize("re", [47.0, 100.0, 330.0])
@pytest.mark.parametrize("va", [10.0, 30.0])
def test_ce_output_resistance_with_emitter_degeneration(re, va):
    # rs = 0: the source (EMF 0) holds the input at AC ground, so the base is
    # AC-grounded and the R1 ‖ R2 divider is shorted out.
    rc = 22e3
    d = biased_ce(0.3e-3, vcc=15.0, rc=rc, re1=re, re2=0.0, source__rs=0.0, transistor__va=va,
                  load__rl="open")
    f = model.analyse(d)
    assert f.region == "active"
    # UC Berkeley EE105 notes (standard result): looking into the collector,
    # R_col = ro[1 + gm(RE ‖ rπ)] + RE ‖ rπ. Our rout is RC ‖ R_col. Exact for the
    # hybrid-π model (the reverse-junction terms are ~e^{−VCB/VT}); rtol 1e-9 for rounding.
    z = par(re, f.r_pi)
    r_col = f.ro * (1.0 + f.gm * z) + z
    assert_allclose(f.rout, par(rc, r_col), rtol=1e-9)
    # Backed out of the parallel combination; the subtraction loses about
    # log10(R_col/RC) digits, so rtol 1e-7.
    assert_allclose(1.0 / (1.0 / f.rout - 1.0 / rc), r_col, rtol=1e-7)


@pytest.mark.parametrize("rs", [600.0, 10e3])
def test_ce_output_resistance_with_base_resistance(rs):
    # With a base resistance RB = RS ‖ R1 ‖ R2 the same hybrid-π analysis
    # (test current into the collector; ve = i·Z, vbe = −ve·rπ/(rπ + RB)) gives
    #   R_col = ro + Z·(1 + gm·ro·rπ/(rπ + RB)),  Z = RE ‖ (rπ + RB),
    # which reduces to the EE105 form above at RB = 0. Derived here from the
    # hybrid-π model (not quoted from a book); exact for the model.
    rc, re = 22e3, 150.0
    d = biased_ce(0.3e-3, vcc=15.0, rc=rc, re1=re, re2=0.0, source__rs=rs, transistor__va=20.0,
                  load__rl="open")
    r1, r2 = d.bias.r1, d.bias.r2
    f = model.analyse(d)
    assert f.region == "active"
    rb = par(rs, r1, r2)
    z = par(re, f.r_pi + rb)
    r_col = f.ro + z * (1.0 + f.gm * f.ro * f.r_pi / (f.r_pi + rb))
    assert_allclose(f.rout, par(rc, r_col), rtol=1e-9)  # rounding only


# ---------------------------------------------------------------------------
# 1. Closed forms: emitter follower
# ---------------------------------------------------------------------------


@pytest.mark.parametrize("va", [1e9, 50.0])
@pytest.mark.parametrize("re, rl, rs", [(2.2e3, 10e3, 1e3), (1e3, "open", 50.0), (4.7e3, 1e3, 10e3)])
def test_emitter_follower_gain_and_output_resistance(va, re, rl, rs):
    # rc = 0: the collector is on the supply, an AC ground.
    r1 = r2 = 10e3
    f = model.analyse(ef(stage__re=re, load__rl=rl, source__rs=rs, transistor__va=va,
                         bias__r1=r1, bias__r2=r2))
    assert f.region == "active"
    rl_ohms = math.inf if rl == "open" else rl
    b1 = f.beta_ac + 1.0
    # Sedra & Smith / GHLM: Av = (β+1)RE′/(rπ + (β+1)RE′), RE′ = RE ‖ RL ‖ ro
    # (ro sits from the emitter to the AC-grounded collector). Exact for the
    # hybrid-π model; rtol 1e-9 for rounding.
    for gain, r_e in ((f.av_loaded, par(re, rl_ohms, f.ro)), (f.av_open, par(re, f.ro))):
        assert_allclose(gain, b1 * r_e / (f.r_pi + b1 * r_e), rtol=1e-9)
    # Rin,base = rπ + (β+1)RE′ (Sedra & Smith), loaded.
    assert_allclose(f.rin_base, f.r_pi + b1 * par(re, rl_ohms, f.ro), rtol=1e-9)
    # Sedra & Smith / GHLM: Rout = RE ‖ (rπ + RS′)/(β + 1), RS′ = RS ‖ R1 ‖ R2.
    # The book drops ro; keeping it puts ro in parallel too (same analysis).
    rs_b = par(rs, r1, r2)
    assert_allclose(f.rout, par(re, f.ro, (f.r_pi + rs_b) / b1), rtol=1e-9)
    if va >= 1e9:
        # Textbook form as printed: the neglected ro ≈ 1e12 Ω changes it by ~1e-11.
        assert_allclose(f.rout, par(re, (f.r_pi + rs_b) / b1), rtol=1e-8)


# ---------------------------------------------------------------------------
# 2. An independent DC solution with scipy.optimize.root
# ---------------------------------------------------------------------------


def _device(vbe, vbc, *, i_s, beta, beta_r, va, celsius, xti, eg, xtb):
    """Ebers–Moll transport currents with the forward Early factor, written out
    again from REFERENCES.md (Jaeger & Blalock ch. 5; Getreu 1976 for T)."""
    t = constants.zero_Celsius + celsius
    vt = constants.k * t / constants.e
    is_t = i_s * (t / T0) ** xti * math.exp((eg / vt) * (t / T0 - 1.0))
    bf_t = beta * (t / T0) ** xtb
    # The clamp at 200·VT only stops a wild trial point of the root finder from
    # overflowing; every solution here has both junctions below 50·VT.
    i_f = is_t * math.expm1(min(vbe / vt, 200.0))
    i_r = is_t * math.expm1(min(vbc / vt, 200.0))
    ic = (i_f - i_r) * (1.0 - vbc / va) - i_r / beta_r
    ib = i_f / bf_t + i_r / beta_r
    return ic, ib, vt, is_t


def _dev_kw(d):
    t = d.transistor
    return dict(i_s=t.i_s, beta=t.beta, beta_r=t.beta_r, va=t.va, celsius=d.environment.ambient,
                xti=t.xti, eg=t.eg, xtb=t.xtb)


def scipy_dc(d) -> dict:
    """Node voltages and currents of an NPN design: KCL solved with scipy.optimize.root.

    Capacitors are open at DC, so the source and load hang off cin and cout and
    carry nothing. Unknowns are vb, vc, ve and vm (the re1/re2 junction); a zero
    resistor turns its KCL equation into a joining equation. Nothing from the
    engine is used, not even as a first guess.
    """
    kw = _dev_kw(d)
    vcc, r1, r2 = d.supply.vcc, d.bias.r1, d.bias.r2
    s = d.stage
    follower = d.topology == EF
    re1, re2 = (s.re, 0.0) if follower else (s.re1, s.re2)
    rc = s.rc
    r_e = re1 + re2
    _, _, vt, is_t = _device(0.0, 0.0, **kw)
    beta = d.transistor.beta * ((constants.zero_Celsius + d.environment.ambient) / T0) ** d.transistor.xtb
    # First guess: the hand estimate (Thevenin divider, constant VBE), with VBE
    # refined twice from the guessed current; then clipped to saturation if RC is too big.
    vth, rth = vcc * r2 / (r1 + r2), par(r1, r2)
    vbe = 0.65
    for _ in range(3):
        ib0 = max((vth - vbe) / (rth + (beta + 1.0) * r_e), 1e-12)
        vbe = vt * math.log((beta * ib0) / is_t + 1.0)
    ie0 = (beta + 1.0) * ib0
    ve0 = ie0 * r_e
    vb0 = ve0 + vbe
    vc0 = max(vcc - beta * ib0 * rc, ve0 + 0.1)
    vm0 = ie0 * re2
    scale = ie0  # currents are compared in units of the expected emitter current

    def residual(x):
        vb, vc, ve, vm = x
        ic, ib, _, _ = _device(vb - ve, vb - vc, **kw)
        ie = ic + ib
        out = [((vcc - vb) / r1 - vb / r2 - ib) / scale]
        out.append(((vcc - vc) / rc - ic) / scale if rc > 0 else vc - vcc)
        if re1 > 0:
            out.append((ie - (ve - vm) / re1) / scale)
            out.append(((ve - vm) / re1 - vm / re2) / scale if re2 > 0 else vm)
        else:
            out.append(ve - vm)
            out.append((ie - vm / re2) / scale if re2 > 0 else vm)
        return out

    best = None
    for method, opts in (("hybr", {"xtol": 1e-14}), ("lm", {"xtol": 1e-15, "ftol": 1e-15})):
        sol = optimize.root(residual, [vb0, vc0, ve0, vm0], method=method, options=opts)
        err = float(np.max(np.abs(residual(sol.x))))
        if best is None or err < best[0]:
            best = (err, sol.x)
    # KCL holds to 1e-12 of the emitter current: the root is found.
    assert best[0] < 1e-12, f"scipy root did not converge: residual {best[0]:.1e}"
    vb, vc, ve, vm = best[1]
    ic, ib, _, _ = _device(vb - ve, vb - vc, **kw)
    return dict(vb=vb, vc=vc, ve=ve, vm=vm, ic=ic, ib=ib)


def _generated_designs():
    """Designs spanning IC = 10 µA … 20 mA, with varied device and temperature."""
    out = []
    currents = np.geomspace(10e-6, 20e-3, 14)
    vccs = [5.0, 9.0, 12.0, 15.0, 24.0]
    betas = [80.0, 150.0, 200.0, 300.0, 450.0]
    vas = [30.0, 60.0, 100.0, 200.0, 1e9]
    iss = [1e-15, 1e-14, 1e-13, 5e-15]
    beta_rs = [0.5, 2.0, 5.0]
    ambients = [-20.0, 0.0, 25.0, 50.0, 85.0]
    splits = [(0.2, 0.8), (1.0, 0.0), (0.0, 1.0), (0.5, 0.5)]  # re1 : re2
    for i, ic in enumerate(currents):
        vcc = vccs[i % 5]
        beta = betas[(3 * i) % 5]
        common = {
            "transistor.beta": beta, "transistor.va": vas[(2 * i) % 5], "transistor.i_s": iss[i % 4],
            "transistor.beta_r": beta_rs[i % 3], "environment.ambient": ambients[(i + 2) % 5],
            "transistor.xti": [3.0, 3.5, 2.0][i % 3], "transistor.eg": [1.11, 1.12, 1.0][(i + 1) % 3],
            "transistor.xtb": [1.5, 1.0, 2.0][(i + 2) % 3],
            "supply.vcc": vcc,
        }
        # Common emitter: VE ≈ 0.15 vcc, VC ≈ 0.6 vcc, divider current ≈ 10 IB.
        ve = 0.15 * vcc
        a, b = splits[i % 4]
        r_e = ve / ic
        vb = ve + 0.65
        idiv = 10.0 * ic / beta
        out.append(with_values(default_design(CE), {
            **common, "stage.re1": a * r_e, "stage.re2": b * r_e, "stage.rc": 0.4 * vcc / ic,
            "bias.r2": vb / idiv, "bias.r1": (vcc - vb) / (idiv + ic / beta),
        }))
        # Emitter follower: VE ≈ vcc/2; every third one with a collector resistor.
        ve = 0.45 * vcc
        vb = ve + 0.65
        out.append(with_values(default_design(EF), {
            **common, "stage.re": ve / ic, "stage.rc": (0.2 * vcc / ic) if i % 3 == 0 else 0.0,
            "bias.r2": vb / idiv, "bias.r1": (vcc - vb) / (idiv + ic / beta),
        }))
    # Two deliberately saturated common emitters (RC far too large), where the
    # reverse terms of the transport model carry real current.
    for rc in (200e3, 2e6):
        out.append(ce(stage__rc=rc))
    # And a grounded emitter (re1 = re2 = 0: the emitter node is ground itself).
    out.append(ce(**GROUNDED_EMITTER))
    return out


GENERATED = _generated_designs()


def _engine_dc(d) -> dict:
    stage = build(d.topology, design_values([d]))
    op = operating_point(stage.net)
    assert op.converged[0]
    v = op.voltages
    em = v[stage.net.element("re2").a][0] if d.topology == CE and d.stage.re2 > 0 else None
    return dict(vb=v[stage.base][0], vc=v[stage.collector][0], ve=v[stage.emitter][0], vm=em,
                ic=op.states["q1"].ic[0], ib=op.states["q1"].ib[0])


def test_generated_designs_span_the_current_range():
    # Guard for the next test: the generated set really spans 10 µA … 20 mA (±50 %).
    ics = [scipy_dc(d)["ic"] for d in GENERATED]
    assert len(GENERATED) >= 20
    assert min(ics) < 15e-6 and max(ics) > 10e-3


@pytest.mark.parametrize("d", GENERATED, ids=[f"{d.topology}-{i}" for i, d in enumerate(GENERATED)])
def test_dc_operating_point_matches_scipy_root(d):
    ref = scipy_dc(d)
    eng = _engine_dc(d)
    # Both solve the same equations: the engine's Newton stops after a step below
    # 1e-9 V (quadratic convergence leaves the point far better than that) and
    # hybr/lm run to xtol ~1e-14. IC is exponential in VBE, so even a 1e-9 V error
    # would be 4e-8 relative: rtol 1e-7 as in the brief, atol 1e-12 V only for a
    # node that sits at 0 V.
    for k in ("vb", "vc", "ve"):
        assert_allclose(eng[k], ref[k], rtol=1e-7, atol=1e-12, err_msg=k)
    if eng["vm"] is not None:
        assert_allclose(eng["vm"], ref["vm"], rtol=1e-7, err_msg="vm")
    assert_allclose(eng["ic"], ref["ic"], rtol=1e-7, err_msg="ic")
    assert_allclose(eng["ib"], ref["ib"], rtol=1e-7, err_msg="ib")
    # The public figures carry the same solution.
    f = model.analyse(d)
    assert_allclose([f.vb, f.vc, f.ve, f.ic], [ref["vb"], ref["vc"], ref["ve"], ref["ic"]],
                    rtol=1e-7, atol=1e-12)


@pytest.mark.parametrize("topology", [CE, EF])
def test_batched_dc_matches_scipy_root(topology):
    # analyse_batch groups rows of different shape (zero resistors) and solves each
    # group as one batch; every row must still match its own scipy solution.
    ds = [d for d in GENERATED if d.topology == topology]
    vals = design_values(ds)
    got = analyse_batch(topology, vals)
    assert got.converged.all()
    assert_allclose(got.ic, [scipy_dc(d)["ic"] for d in ds], rtol=1e-7)  # as above


# ---------------------------------------------------------------------------
# 3. Distortion (GHLM, nonlinear analysis)
# ---------------------------------------------------------------------------


@pytest.mark.parametrize("x, hd2, hd3", [(0.1, 0.024990, None), (0.5, 0.123718, 0.010257), (1.0, 0.240194, None)])
def test_bessel_check_values(x, hd2, hd3):
    # REFERENCES.md values are I2/I1 and I3/I1 to 6 decimals: atol 6e-7 is half a unit
    # in the last place plus float rounding.
    assert_allclose(special.iv(2, x) / special.iv(1, x), hd2, rtol=0, atol=6e-7)
    if hd3 is not None:
        assert_allclose(special.iv(3, x) / special.iv(1, x), hd3, rtol=0, atol=6e-7)


#: Undegenerated CE for distortion: emitter grounded, rs = 0 so the base sees the
#: EMF itself, VA = 1e9 V (negligible Early effect, as GHLM assume), and a small RC
#: so even x = 1 (a collector-current peak of IC(e − 1)) stays forward-active.
DISTORTION_CE = dict(GROUNDED_EMITTER, stage__rc=500.0, transistor__va=1e9, load__rl="open",
                     stage__cin=1e-3, stage__cout=1e-3)


@pytest.mark.parametrize("x", [0.01, 0.1, 0.5, 1.0])
def test_undegenerated_harmonics_are_bessel_ratios(x):
    vt = vt_at(25.0)
    d = ce(**DISTORTION_CE, source__vpk=x * vt)
    f = model.analyse(d)
    assert f.region == "active"
    # The collector current's excursions stay inside the active region.
    drop = f.ic * math.expm1(x) * 500.0
    assert f.swing_down > 1.2 * drop and f.swing_up > 1.2 * f.ic * -math.expm1(-x) * 500.0
    # GHLM: with vbe = VBE + x·VT·sin ωt, IC = IS e^{VBE/VT} e^{x sin ωt}, whose
    # harmonics are In(x) (modified Bessel), so HDn = In(x)/I1(x) exactly. What is
    # neglected: IS (the −1, ~1e-11), the Early factor with VA = 1e9 (swing/VA ~1e-9),
    # and the 256-point FFT's aliasing of harmonics ≥ 128 (far below 1e-20).
    # The engine agrees to ~1e-8, so rtol 1e-6 leaves margin for the Newton tolerance.
    assert_allclose(f.hd2, special.iv(2, x) / special.iv(1, x), rtol=1e-6)
    assert_allclose(f.hd3, special.iv(3, x) / special.iv(1, x), rtol=1e-6)
    # THD includes every harmonic: sqrt(Σ In²)/I1, n ≥ 2 (terms beyond 40 are < 1e-60).
    n = np.arange(2, 41)
    assert_allclose(f.thd, np.sqrt(np.sum(special.iv(n, x) ** 2)) / special.iv(1, x), rtol=1e-6)


@pytest.mark.parametrize("x, rtol", [(0.01, 1e-4), (0.1, 1e-3)])
def test_undegenerated_hd2_small_signal_limit(x, rtol):
    # GHLM: HD2 ≈ x/4 for small x. The next term is −x²/24 relative
    # (I2/I1 = (x/4)(1 − x²/24 + …)): 4e-6 at x = 0.01 and 4e-4 at 0.1, hence the tolerances.
    f = model.analyse(ce(**DISTORTION_CE, source__vpk=x * vt_at(25.0)))
    assert_allclose(f.hd2, x / 4.0, rtol=rtol)
    # And HD3 ≈ x²/24 (GHLM); I3/I1 = (x²/24)(1 − x²/16 + …), so the same
    # tolerances hold (6e-6 and 6e-4 neglected).
    assert_allclose(f.hd3, x * x / 24.0, rtol=rtol)


@pytest.mark.parametrize("re", [51.0, 82.0, 130.0])
@pytest.mark.parametrize("x", [0.1, 0.3])
def test_degeneration_reduces_distortion(re, x):
    # Unbypassed re1 = RE, re2 = 0; rs = 0 so the base amplitude is the EMF, x·VT.
    # IC ≈ 1 mA so that RE = 51 … 130 Ω gives T ≈ 2 … 5.
    d = biased_ce(1e-3, vcc=10.0, rc=1e3, re1=re, re2=0.0, source__rs=0.0, transistor__va=1e9,
                  load__rl="open", stage__cin=1e-3, stage__cout=1e-3, source__vpk=x * vt_at(25.0))
    f = model.analyse(d)
    assert f.region == "active"
    t = f.gm * re  # GHLM's loop gain T = gm·RE
    assert 1.8 <= t <= 5.5  # the moderate range the brief asks for
    # GHLM: HD2 ≈ (x/4)/(1 + T)² for the same base amplitude. Loose, because T = gm·RE
    # ignores the base current in RE (the loop gain is really gm·RE·(1 + 1/β), ~0.5 %
    # here, so (1 + T)² is off by ~1 %) and the result is first order in x;
    # rtol 3 % allows for both.
    assert_allclose(f.hd2, (x / 4.0) / (1.0 + t) ** 2, rtol=3e-2)
    # GHLM: HD3 ≈ (x²/24)|1 − 2T|/(1 + T)⁴, same neglected terms, about twice as
    # sensitive to T; rtol 5 %.
    assert_allclose(f.hd3, (x * x / 24.0) * abs(1.0 - 2.0 * t) / (1.0 + t) ** 4, rtol=5e-2)
    # Our refinement (not the book's): with the loop gain gm·RE/α, α = β/(β + 1),
    # HD2 agrees to the O(x²) terms the formula drops (~x²/10); rtol 2e-2·x².
    t_alpha = t * (1.0 + 1.0 / f.beta_ac)
    assert_allclose(f.hd2, (x / 4.0) / (1.0 + t_alpha) ** 2, rtol=2e-2 * x * x)
    # And against the undegenerated stage at the same x: reduced by about (1 + T)².
    f0 = model.analyse(ce(**DISTORTION_CE, source__vpk=x * vt_at(25.0)))
    assert f.hd2 < f0.hd2 / (1.0 + t) ** 2 * 1.03


# ---------------------------------------------------------------------------
# 5. PNP twin
# ---------------------------------------------------------------------------

TWINS = [
    default_design(CE),
    default_design(EF),
    model.read_design(SAVED / "geophone_preamp.toml"),
    model.read_design(SAVED / "cable_driver.toml"),
    ce(**GROUNDED_EMITTER),
    ce(stage__re2=0.0, load__rl="open", source__rs=0.0),
    ef(stage__rc=1e3, load__rl=1e3),
    ef(environment__ambient=60.0, transistor__va=30.0),
]

#: Forward-sense figures that must not change when the stage is mirrored.
SAME = ("ic", "ib", "vbe", "vce", "gm", "r_pi", "ro", "beta_ac", "av_open", "av_loaded",
        "av_source", "rin", "rin_base", "rout", "thd", "hd2", "hd3",
        "p_transistor", "p_supply", "i_supply", "tj")


@pytest.mark.parametrize("d", TWINS, ids=lambda d: f"{d.topology}-{d.name}")
def test_pnp_twin_mirrors_npn(d):
    npn = model.analyse(d)
    pnp = model.analyse(with_values(d, {"transistor.polarity": "pnp"}))
    vcc = d.supply.vcc
    # The PNP stage is its NPN twin mirrored about vcc/2 (topologies docstring):
    # the same equations with every voltage negated, so the figures agree to the
    # solver's rounding; rtol 1e-9 as in the brief (Newton converges quadratically,
    # so both twins sit at the machine-precision root).
    assert pnp.region == npn.region
    for k in SAME:
        # The harmonic ratios are FFT bins of solved waveforms: their absolute
        # noise is the Newton residue over the fundamental, ~1e-13; atol 1e-11.
        atol = 1e-11 if k in ("thd", "hd2", "hd3") else 0.0
        assert_allclose(getattr(pnp, k), getattr(npn, k), rtol=1e-9, atol=atol, err_msg=k)
    # Gains keep their sign too: the small-signal circuit is identical (both rails
    # are AC ground), so an inverting stage stays inverting.
    # Node voltages mirror: v_pnp = vcc − v_npn (atol 1e-12 V for a node at a rail).
    for k in ("vb", "ve", "vc"):
        assert_allclose(getattr(pnp, k), vcc - getattr(npn, k), rtol=1e-9, atol=1e-12, err_msg=k)
    # The output's excursions mirror with it: the PNP's upward swing is the NPN's
    # downward one (a rise at the PNP output is a fall at the NPN output).
    # rtol 1e-7: the edges come from a fitted, extrapolated margin.
    assert_allclose(pnp.swing_up, npn.swing_down, rtol=1e-7)
    assert_allclose(pnp.swing_down, npn.swing_up, rtol=1e-7)
    for k in set(npn.p_resistors) | set(pnp.p_resistors):
        assert_allclose(pnp.p_resistors[k], npn.p_resistors[k], rtol=1e-9, atol=1e-18, err_msg=k)


# ---------------------------------------------------------------------------
# 6. Energy: conservation of power at the quiescent point
# ---------------------------------------------------------------------------

ENERGY = [
    model.read_design(SAVED / "geophone_preamp.toml"),
    model.read_design(SAVED / "cable_driver.toml"),
    default_design(CE),
    default_design(EF),
    ce(**GROUNDED_EMITTER),
    ce(stage__rc=200e3),  # saturated
    ef(stage__rc=1e3, transistor__polarity="pnp"),
    ce(transistor__polarity="pnp", environment__ambient=80.0),
] + GENERATED[::5]


@pytest.mark.parametrize("d", ENERGY, ids=lambda d: f"{d.topology}-{d.name}-{d.transistor.polarity}")
def test_supply_power_equals_dissipation(d):
    f = model.analyse(d)
    # Tellegen's theorem / conservation of energy at DC: the supply delivers what
    # the transistor and resistors dissipate (the source is at 0 V EMF and both
    # coupling capacitors are open at DC). Rounding only: rtol 1e-9.
    total = f.p_transistor + sum(f.p_resistors.values())
    assert f.p_supply > 0
    assert_allclose(f.p_supply, total, rtol=1e-9)
    assert_allclose(f.i_supply, f.p_supply / d.supply.vcc, rtol=1e-12)


def test_every_saved_design_conserves_power():
    # The same check on every bundled demo, including any added later.
    paths = sorted(SAVED.glob("*.toml"))
    assert paths
    for p in paths:
        f = model.analyse(model.read_design(p))
        assert_allclose(f.p_supply, f.p_transistor + sum(f.p_resistors.values()), rtol=1e-9,
                        err_msg=p.name)  # rounding only, as above
