"""The frequency response against closed forms, a published worked example
and physical properties.

Sources, each named again beside its check:
* single-pole RC corner f = 1/(2πRC): any circuit-theory text;
* Boylestad & Nashelsky, *Electronic Devices and Circuit Theory*, 10th ed.,
  Ex. 9.11 (low-frequency response of a bypassed divider-bias stage);
* hybrid-π short-circuit current gain h21 = (gm − jωCμ)/(1/rπ + jω(Cπ + Cμ))
  and fT = gm/(2π(Cπ + Cμ)): Gray, Hurst, Lewis & Meyer, and Sedra & Smith;
* the Miller input capacitance Cπ + Cμ(1 − Av): Sedra & Smith.
"""

import math

import numpy as np
import pytest
from hypothesis import assume, example, given, settings
from hypothesis import strategies as st
from test_engine_properties import SETTINGS, _decades

from model import analyse
from model.analyses.capacitance import device_capacitance, with_device_capacitance
from model.analyses.corner_search import sweep
from model.analyses.figures import design_values
from model.analyses.midband import device_small_signal
from model.circuit.device import DeviceParams
from model.circuit.linearised import frequency_sweep
from model.circuit.netlist import GROUND, Bjt, Capacitor, Netlist, Resistor, VoltageSource
from model.circuit.newton import operating_point
from model.circuit.topologies import build
from model.design.stage import default_design, with_values

#: Big enough that a coupling or bypass capacitor is a short at every
#: frequency that matters (its corner lies below 1 mHz).
HUGE = 10.0
#: A transit frequency so high that Cπ and Cμ play no part (with cmu = 0).
NO_DEVICE_C = {"transistor.ft": 1e15, "transistor.cmu": 0.0}


def _design(topology="common-emitter", **values):
    return with_values(default_design(topology), values)


# ------------------------------------------------------- single-pole corners
def test_only_cout_gives_the_rc_corner():
    """Only cout matters: f_low = 1/(2π(rout + rl)cout), the single-pole RC
    corner (closed form).  The issue asks for 0.5 %; held to 1e-4, because
    the other poles (cin and ce at about 10 µHz) move it by ~1e-12 and the
    corner search resolves ~1e-5, so anything looser would hide a fault."""
    d = _design(**{"stage.cin": HUGE, "stage.ce": HUGE, "stage.cout": 100e-9, "load.rl": 10e3,
                   "load.cl": 0.0, **NO_DEVICE_C})
    fig = analyse(d)
    expected = 1.0 / (2.0 * math.pi * (fig.rout + 10e3) * 100e-9)
    assert fig.f_low == pytest.approx(expected, rel=1e-4)
    assert fig.response.low_by.part == "cout"


def test_only_cin_of_a_follower_gives_the_rc_corner():
    """The same closed form at the input: f_low = 1/(2π(rs + rin)cin)."""
    d = _design("emitter-follower", **{"stage.cin": 47e-9, "stage.cout": HUGE, "source.rs": 2.2e3,
                                       "load.cl": 0.0, **NO_DEVICE_C})
    fig = analyse(d)
    expected = 1.0 / (2.0 * math.pi * (2.2e3 + fig.rin) * 47e-9)
    assert fig.f_low == pytest.approx(expected, rel=1e-4)  # as above: far tighter than asked
    assert fig.response.low_by.part == "cin"


def test_only_cl_gives_the_output_rc_corner():
    """Only the load capacitance: f_high = 1/(2π(rout ‖ rl)cl), the output
    node's RC corner (closed form), to 0.5 %."""
    d = _design(**{"load.cl": 1e-9, "load.rl": 22e3, **NO_DEVICE_C})
    fig = analyse(d)
    r = fig.rout * 22e3 / (fig.rout + 22e3)
    assert fig.f_high == pytest.approx(1.0 / (2.0 * math.pi * r * 1e-9), rel=1e-4)  # as above
    assert fig.response.high_by.part == "cl"


# ---------------------------------------------- Boylestad & Nashelsky Ex. 9.11
B911 = {
    "supply.vcc": 20.0, "bias.r1": 40e3, "bias.r2": 10e3, "stage.rc": 4e3, "stage.re1": 0.0,
    "stage.re2": 2e3, "load.rl": 2.2e3, "source.rs": 1e3, "stage.cin": 10e-6, "stage.ce": 20e-6,
    "stage.cout": 1e-6, "transistor.beta": 100.0, "load.cl": 0.0,
    # The book takes ro = ∞ and looks at the low end only.
    "transistor.va": 1e4, **NO_DEVICE_C,
}
#: The book's re = 26 mV / IE = 15.76 Ω; its rπ is then β·re.
B911_R_PI = 100.0 * 15.76


def _with_book_re():
    """The Ex. 9.11 design with the saturation current that gives the book's
    rπ = β·re at the bias point, so that the small-signal device is the book's."""
    lo, hi = math.log(1e-16), math.log(1e-10)
    for _ in range(60):  # bisection in log IS: rπ falls as IS (and so IC) rises
        mid = 0.5 * (lo + hi)
        r_pi = analyse(_design(**B911, **{"transistor.i_s": math.exp(mid)}), large_signal=False).r_pi
        lo, hi = (mid, hi) if r_pi > B911_R_PI else (lo, mid)
    return _design(**B911, **{"transistor.i_s": math.exp(0.5 * (lo + hi))})


def test_boylestad_9_11_per_capacitor_estimates():
    """Boylestad & Nashelsky 10th ed., Ex. 9.11: f_Ls 6.87 Hz, f_LC 25.67 Hz,
    f_LE 326.9 Hz, with the book's re."""
    fig = analyse(_with_book_re())
    assert fig.r_pi == pytest.approx(B911_R_PI, rel=1e-6)
    parts = {p.part: p.freq for p in fig.response.low_parts}
    # f_Ls = 1/(2π(RS + Zi)Cs), Zi = R1‖R2‖βre: printed to 3 figures.
    assert parts["cin"] == pytest.approx(6.87, abs=0.006)
    # f_LC = 1/(2π(RC + RL)CC): our rout keeps ro = VA/IC (6 MΩ here) in
    # parallel with RC, 0.07 % below the book's RC; printed to 4 figures.
    assert parts["cout"] == pytest.approx(25.67, rel=0.001)
    # f_LE = 1/(2π Re CE), Re = RE ‖ (RS′/β + re).  The exact resistance into
    # the emitter is (RS′ + rπ)/(β + 1) = RS′/(β+1) + re·β/(β+1): the book's
    # β for β + 1 is a 1/β = 1 % approximation, which puts our figure 1.0 %
    # above the book's.  Allow 1.5 %: that approximation and the rounding.
    assert parts["cout"] < parts["ce"]
    assert parts["ce"] == pytest.approx(326.9, rel=0.015)
    assert parts["ce"] > 326.9  # the approximation's direction: β+1 > β
    # The exact corner: within 5 % of the dominant f_LE (the bound the issue
    # sets: the other two corners, 6.9 and 25.7 Hz, lift it by a few per cent
    # at most), and above every single estimate.
    assert fig.f_low == pytest.approx(326.9, rel=0.05)
    assert fig.f_low > max(parts.values())
    assert fig.response.low_by.part == "ce"


# ------------------------------------------------------------- device physics
def _h21_fixture(ft, cmu, ic_target=1e-3):
    """One transistor, base fed from a 1 MΩ bias resistor, collector held by a
    5 V source through a 1 mΩ sense resistor so the AC collector current is
    −v_c / 1 mΩ: the short-circuit current-gain test set-up."""
    params = DeviceParams(i_s=np.array([1e-14]), beta_f=np.array([150.0]), beta_r=np.array([1.0]),
                          va=np.array([1e4]), vt=np.array([0.025693]), sign=np.array([1.0]))
    # The base current for about the wanted IC, from a source through 1 MΩ.
    vbe = 0.025693 * math.log(ic_target / 1e-14)
    elements = [
        VoltageSource("vbb", "bb", GROUND, np.array([vbe + ic_target / 150.0 * 1e6])),
        Resistor("rb", "bb", "b", np.array([1e6])),
        VoltageSource("vcc", "s", GROUND, np.array([5.0])),
        Resistor("sense", "s", "c", np.array([1e-3])),
        Bjt("q1", "c", "b", GROUND, params),
    ]
    net = Netlist(tuple(elements), 1)
    op = operating_point(net)
    gm = float(device_small_signal(op).gm[0])
    caps = device_capacitance(gm, ft, cmu)
    net = net.with_elements(Capacitor("cpi", "b", GROUND, np.array([caps.c_pi]), coupling=False),
                            Capacitor("cmu", "b", "c", np.array([caps.c_mu]), coupling=False))
    return net, op, caps, device_small_signal(op)


@pytest.mark.parametrize("ft,cmu", [(300e6, 2e-12), (100e6, 0.5e-12), (1e9, 0.3e-12)])
def test_current_gain_follows_the_hybrid_pi_and_ft(ft, cmu):
    """The short-circuit current gain from the nodal solve equals the hybrid-π
    h21 = (gm − jωCμ)/(1/rπ + jω(Cπ + Cμ)) (Gray, Hurst, Lewis & Meyer), and
    in the −20 dB/decade region |h21|·f equals fT = gm/(2π(Cπ + Cμ))."""
    net, op, caps, dev = _h21_fixture(ft, cmu)
    assert dev.gm[0] / (2 * math.pi * (caps.c_pi + caps.c_mu)) == pytest.approx(ft, rel=1e-12)
    f = np.array([ft / 30.0, ft / 10.0, ft])
    w = 2 * math.pi * f
    v = frequency_sweep(net, op, w, inject={"b": 1.0})
    ib = 1.0 - v["b"][0] / 1e6  # the 1 MΩ bias resistor takes a little
    h21 = (-v["c"][0] / 1e-3) / ib
    gm, r_pi = float(dev.gm[0]), float(dev.r_pi[0])
    expected = (gm - 1j * w * caps.c_mu) / (1.0 / r_pi + 1j * w * (caps.c_pi + caps.c_mu))
    # 1 mΩ of sense resistance against 1/gm ≈ 26 Ω: a 4e-5 effect.
    np.testing.assert_allclose(h21, expected, rtol=2e-4)
    # At fT/10, well above fβ = fT/β (β = 150: gπ adds 0.2 %) and with the
    # feed-forward through Cμ small (ωCμ/gm ≤ 0.1·Cμ/(Cπ+Cμ)), |h21|·f = fT to 1 %.
    assert abs(h21[1]) * f[1] == pytest.approx(ft, rel=0.01)


def test_inconsistent_ft_floors_c_pi_and_warns():
    """gm/(2π·fT) below Cμ would need a negative Cπ: floored at 0, with a warning."""
    d = _design(**{"transistor.ft": 50e9, "transistor.cmu": 10e-12})
    fig = analyse(d)
    assert fig.c_pi == 0.0
    assert "FT-INCONSISTENT" in [w.code for w in fig.warnings]
    assert "FT-INCONSISTENT" not in [w.code for w in analyse(default_design("common-emitter")).warnings]


def test_miller_estimate_near_exact_when_miller_dominates():
    """A bypassed stage with a large gain and a high source resistance: Cμ
    multiplied by (1 − Av) sets the upper corner (Sedra & Smith, Miller
    theorem).  The Miller estimate ignores the output pole and the right-half
    plane zero gm/Cμ and uses the midband gain; with the output pole over a
    decade away those cost a few per cent, so 15 % is a fair bound for a
    one-pole estimate, as asked."""
    d = _design(**{"source.rs": 10e3, "stage.rc": 10e3, "load.rl": "open", "load.cl": 0.0,
                   "transistor.cmu": 4e-12, "transistor.ft": 300e6})
    fig = analyse(d)
    r = fig.response
    assert r.high_by.part == "cmu"
    cmu_tau = next(p.tau for p in r.high_parts if p.part == "cmu")
    assert cmu_tau > 3 * sum(p.tau for p in r.high_parts if p.part != "cmu")
    assert r.f_high_miller == pytest.approx(fig.f_high, rel=0.15)


# ------------------------------------------------------------------ properties
@st.composite
def band_designs(draw, topology, bypassed=False):
    """Valid, active designs whose corners lie far apart."""
    r = _decades(100.0, 100e3)
    vcc = draw(st.floats(5.0, 30.0))
    r1 = draw(_decades(10e3, 1e6))
    # The divider puts the base between 1 V and 0.4·vcc, where most stages are on.
    k = draw(st.floats(1.0, 0.4 * vcc)) / vcc
    values = {
        "supply.vcc": vcc,
        "bias.r1": r1,
        "bias.r2": r1 * k / (1.0 - k),
        "source.rs": draw(st.one_of(st.just(0.0), r)),
        "load.rl": draw(st.one_of(st.just("open"), r)),
        "load.cl": draw(st.one_of(st.just(0.0), _decades(1e-12, 1e-9))),
        "stage.cin": draw(_decades(1e-6, 100e-6)),
        "stage.cout": draw(_decades(1e-6, 100e-6)),
        "transistor.ft": draw(_decades(50e6, 1e9)),
        "transistor.cmu": draw(_decades(0.5e-12, 10e-12)),
        "transistor.polarity": draw(st.sampled_from(("npn", "pnp"))),
    }
    if topology == "common-emitter":
        values["stage.rc"] = draw(r)
        values["stage.re1"] = 0.0 if bypassed else draw(st.one_of(st.just(0.0), _decades(10.0, 1e3)))
        values["stage.re2"] = draw(_decades(100.0, 10e3))
        values["stage.ce"] = draw(_decades(10e-6, 1e-3))
    else:
        values["stage.rc"] = draw(st.one_of(st.just(0.0), _decades(10.0, 1e3)))
        values["stage.re"] = draw(r)
    d = _design(topology, **values)
    fig = analyse(d, large_signal=False)
    assume(fig.region == "active")
    return d


def _wide_band(d):
    """The full analysis of a design whose corners lie four decades apart or more."""
    fig = analyse(d)
    assume(math.isfinite(fig.f_low) and math.isfinite(fig.f_high) and fig.f_high > 1e4 * fig.f_low)
    return fig


def _response(d):
    """The full analysis of a design with a wide band.

    Also skipped: a Cπ within 1e-4 of a coupling or bypass capacitor.  The two
    then form a divider whose ratio Cπ/C does not depend on frequency (a fast
    transistor at tens of mA has nanofarads of Cπ), so no frequency is
    "midband"; the sweep is right, the comparison is not meaningful.
    """
    fig = _wide_band(d)
    s = d.stage
    coupling = [s.cin, s.cout] + ([s.ce] if d.topology == "common-emitter" and s.re2 > 0 else [])
    assume(fig.c_pi < 1e-4 * min(coupling))
    return fig


def _at(d, freq):
    """av_source of design d at the frequencies ``freq`` (Hz), from a fresh build."""
    stage = build(d.topology, design_values([d]))
    op = operating_point(stage.net)
    gm = float(device_small_signal(op).gm[0])
    caps = device_capacitance(gm, d.transistor.ft, d.transistor.cmu)
    return sweep(with_device_capacitance(stage, caps), op, np.asarray(freq, dtype=float))


#: The case that failed on a fresh randomized run (93.880 against 93.974,
#: 0.1 % below midband): with rs = 0 the base is fed through cin alone, and
#: the Miller capacitance Cμ(1 + gm·rc) ≈ 1 nF against cin = 1 µF is a
#: capacitive divider, a loss of C/cin ≈ 0.1 % at every frequency in the band.
MILLER_DIVIDER_CASE = _design(**{
    "supply.vcc": 6.0, "bias.r1": 10e3, "bias.r2": 5e3, "stage.rc": 10**4.25, "stage.re1": 0.0,
    "stage.re2": 10e3, "stage.ce": 1e-3, "stage.cin": 1e-6, "stage.cout": 1e-4, "source.rs": 0.0,
    "load.rl": "open", "load.cl": 0.0, "transistor.ft": 1e8, "transistor.cmu": 10e-12,
    "transistor.polarity": "npn"})


@given(d=st.sampled_from(("common-emitter", "emitter-follower")).flatmap(band_designs))
@example(d=MILLER_DIVIDER_CASE)
@settings(SETTINGS, max_examples=100)  # 50 a topology, as before the two were drawn together
def test_midband_centre_matches_midband_analysis(d):
    """At the geometric centre of a wide band the swept gain is the midband
    av_source, and its phase is 180° (inverting) or 0° (follower), each to the
    bound that the poles, zeros and capacitive dividers around the band set
    (``_centre_bounds``; typically 1e-4 and well under 1°)."""
    phase = 180.0 if d.topology == "common-emitter" else 0.0
    fig = _wide_band(d)
    centre = math.sqrt(fig.f_low * fig.f_high)
    magnitude, _ = _centre_bounds(d, fig, centre)
    # Past 1 % the first-order forms below stop being bounds: such a stage
    # has no midband to compare with (the gain moves by 1 % at the centre).
    assume(magnitude < 0.01)
    g = _at(d, [centre])[0]
    assert abs(g) == pytest.approx(abs(fig.av_source), rel=magnitude)
    # The phase is read off the sweep between two grid points, each within
    # its own bound, so the larger of those two bounds holds in between.
    f = fig.response.freq
    at = int(np.searchsorted(f, centre))
    assert 0 < at < f.size
    spread = max(_centre_bounds(d, fig, f[at - 1])[1], _centre_bounds(d, fig, f[at])[1])
    ph = fig.response.phase_deg()
    at_centre = float(np.interp(math.log10(centre), np.log10(f), ph))
    assert at_centre == pytest.approx(phase, abs=spread)


def _centre_bounds(d, fig, f):
    """How far |av| may lie from midband at f (relative) and its phase from
    180° or 0° (degrees), from the poles and zeros around the band.

    Built from the single-pole and single-zero forms (Sedra & Smith,
    *Microelectronic Circuits*, the appendix on single-time-constant
    circuits, with Bode's magnitude and phase of a real pole or zero):

    * a low-frequency pole at fp:  |H| = 1/√(1 + (fp/f)²), phase atan(fp/f);
    * a high-frequency pole at fp: |H| = 1/√(1 + (f/fp)²), phase atan(f/fp);
    * a zero: the reciprocal of the magnitude (whether it lies in the left or
      the right half-plane), the same size of phase.

    Magnitude, low side.  The real poles pᵢ and the bypass zero fz (the only
    zero off the origin: re2 ‖ ce is an open circuit at 1/(2π·re2·ce)) give
    |L|² = (1 + (fz/f)²)/Π(1 + (pᵢ/f)²).  At the exact corner |L|² = ½, so
    Π(1 + (pᵢ/f_low)²) = 2(1 + (fz/f_low)²), and as Π(1 + yᵢ) ≥ 1 + Σyᵢ,
    Σ(pᵢ/f_low)² ≤ 1 + 2(fz/f_low)².  Hence, above f_low,
    1 − |L| ≤ (1 + 2(fz/f_low)²)(f_low/f)², and |L| − 1 ≤ ½(fz/f)².  No
    guess about where a pole–zero pair sits is needed: a pair near the
    centre shows up through fz.  The high side is the mirror image, with
    f_high and the feed-forward zeros Gm/(2πCμ) and Gm/(2πCπ) (Gm = gm
    degenerated by re1) in place of f_low and fz.  For the follower, whose
    upper pair can be complex (it peaks into a capacitive load), the second-
    order low-pass at any Q gives at most x3²·(f/f_high)² with x3² ≤ 1 + √2
    (x3 the −3 dB point over the pair's natural frequency).

    Magnitude, flat terms.  Where a device or load capacitance hangs on a
    node fed through a coupling capacitor, the two make a divider whose loss
    C/C_coupling does not depend on frequency (circuit theory): the input
    capacitance against cin, with Cμ multiplied by 1 + gm·rc at most (the
    Miller theorem, Sedra & Smith) and, in the follower, the load's cl seen
    through the transistor as at most cl/(β + 1); Cπ against ce; cl against
    cout.  And a zero of a node gain at low frequency (a part's short-circuit
    corner, the bypass zero, rl with cout) turns the Miller admittance
    jωCμ(1 − A) partly real, a conductance that loads the base by the zero
    over the Miller corner: fz/f_high_miller for each.  Products of the terms
    add their product: (Σ)(1 + Σ).

    Phase.  The sum of the low poles equals the sum of the short-circuit
    corners and the sum of the high time constants the sum of the open-
    circuit ones (Gray, Hurst, Lewis & Meyer, the time-constant methods),
    and atan(x) ≤ x: the phase moves by at most (Σ short-circuit corners +
    fz)/f + f·2πΣτ_oc + f/(each feed-forward zero), in radians.
    """
    s, t, r = d.stage, d.transistor, fig.response
    follower = d.topology == "emitter-follower"
    fz = 0.0 if follower or s.re2 == 0 else 1.0 / (2 * math.pi * s.re2 * s.ce)
    low = (1 + 2 * (fz / fig.f_low) ** 2) * (fig.f_low / f) ** 2 + 0.5 * (fz / f) ** 2
    g_m = fig.gm / (1 + fig.gm * (0.0 if follower else s.re1))
    zeros = [g_m / (2 * math.pi * c) for c in (t.cmu, fig.c_pi) if c > 0]
    at_corner = sum((fig.f_high / z) ** 2 for z in zeros)
    high = ((1 + math.sqrt(2)) if follower else 1.0) * (1 + 2 * at_corner) * (f / fig.f_high) ** 2 \
        + 0.5 * sum((f / z) ** 2 for z in zeros)
    c_in = fig.c_pi + t.cmu * (1 + fig.gm * s.rc) + (d.load.cl / (fig.beta_ac + 1) if follower else 0.0)
    flat = c_in / s.cin + d.load.cl / s.cout + (0.0 if follower else fig.c_pi / s.ce)
    node_zeros = [p.freq for p in r.low_parts if math.isfinite(p.freq)] + [fz]
    if math.isfinite(d.load.rl):
        node_zeros.append(1.0 / (2 * math.pi * d.load.rl * s.cout))
    if math.isfinite(r.f_high_miller):
        flat += sum(node_zeros) / r.f_high_miller
    total = low + high + flat
    sc_sum = sum(p.freq for p in r.low_parts if math.isfinite(p.freq))
    oc_sum = sum(p.tau for p in r.high_parts)
    phase = (sc_sum + fz) / f + f * 2 * math.pi * oc_sum + sum(f / z for z in zeros)
    return total * (1 + total), math.degrees(phase)


@pytest.mark.parametrize("topology", ["common-emitter", "emitter-follower"])
@given(data=st.data())
@SETTINGS
def test_response_is_continuous(topology, data):
    """A linear RC network with a transistor has a response continuous in
    frequency: a relative step of 1e-6 in f moves the gain by far less than
    1e-4, and the sweep's phase never jumps between neighbouring points."""
    d = data.draw(band_designs(topology))
    fig = _response(d)
    f = fig.response.freq
    g = _at(d, np.concatenate([f, f * (1 + 1e-6)]))
    a, b = g[: f.size], g[f.size:]
    assert np.all(np.abs(b - a) <= 1e-4 * np.abs(a))
    assert np.max(np.abs(np.diff(fig.response.phase_deg()))) < 45.0


@given(which=st.sampled_from(["load.cl", "transistor.cmu", "c_pi"]), factor=st.floats(1.1, 10.0),
       data=st.data())
@SETTINGS
def test_adding_capacitance_never_raises_f_high(which, factor, data):
    """More load capacitance, more Cμ or more Cπ never widens the band of a
    common-emitter amplifier.

    Cμ is added with Cπ held (fT lowered to match): raising cmu alone at a
    fixed fT moves capacitance from Cπ to Cμ rather than adding any.

    Skipped, because there the rule is not physics: a stage whose upper
    corner comes within a decade of the feed-forward zero Gm/(2πCμ), with
    Gm = gm/(1 + gm·re1) the degenerated stage's transconductance.  There
    Cμ passes the input forward about as strongly as the transistor amplifies
    it (with an ideal source, Cμ and cl can even hold the gain above −3 dB at
    every frequency), and more capacitance can move the −3 dB point either
    way.  Likewise more Cπ in a stage with unbypassed emitter resistance
    (re1): Cπ then also carries signal around re1, undoing some of the
    degeneration at high frequency and lifting the gain.  Also not asked of
    the follower: into a capacitive load it can
    peak, and more peaking can move its −3 dB point up."""
    d = data.draw(band_designs("common-emitter", bypassed=which == "c_pi"))
    fig = _response(d)
    t = d.transistor
    if which == "load.cl":
        change = {which: d.load.cl * factor if d.load.cl else 10e-12 * factor}
    else:
        c_pi = fig.c_pi * (factor if which == "c_pi" else 1.0)
        c_mu = t.cmu * (factor if which == "transistor.cmu" else 1.0)
        change = {"transistor.cmu": c_mu, "transistor.ft": fig.gm / (2 * math.pi * (c_pi + c_mu))}
    g_m = fig.gm / (1 + fig.gm * d.stage.re1)
    zero = g_m / (2 * math.pi * change.get("transistor.cmu", t.cmu))
    assume(10 * fig.f_high < zero)
    more = analyse(with_values(d, change))
    # Below the zero the feed-forward current jωCμ·vb is a fraction f/z of the
    # amplified one.  Near the corner the amplified path lags by 45° or more,
    # so the two partly add, and the −3 dB point can move up by a fraction of
    # order f/z (first order, not (f/z)²); more than that would be an error.
    assert more.f_high <= fig.f_high * (1 + 1e-9 + fig.f_high / zero)


# ------------------------------------------------------------------ warnings
def test_no_passband_is_warned_and_the_ledger_shows_the_corners_gone(tmp_path):
    """A 1 fF coupling capacitor: the gain never comes within 3 dB of midband
    (its corner, 1/(2π(rs + rin)·1 fF), is far above every other), so both
    corners are NaN, NO-PASSBAND is raised, and a logged change says "none"."""
    from model.files.designfile import dumps_design
    from model.files.session import DesignSession
    from tui.consequences import render_consequences

    d = default_design("common-emitter")
    fig = analyse(with_values(d, {"stage.cin": 1e-15}))
    assert math.isnan(fig.f_low) and math.isnan(fig.f_high)
    assert "NO-PASSBAND" in [w.code for w in fig.warnings]
    path = tmp_path / "d.toml"
    path.write_text(dumps_design(d), encoding="utf-8")
    session = DesignSession(str(path))
    entry = session.commit({"stage.cin": "1f"}, "")
    session.close()
    assert "f_low" in entry.before and "f_low" not in entry.after
    rows = render_consequences(entry.before, entry.after, entry.raised, entry.cleared)
    assert any(r.split()[:1] == ["f_low"] and r.split()[-1] == "none" for r in rows), rows
    assert "NO-PASSBAND" in entry.raised


def test_signal_outside_the_band_is_warned_with_its_loss():
    """source.freq a decade and more below f_low: OUT-OF-BAND, and the loss it
    states is 20·log10(|gain at freq| / |midband|), from the same figures."""
    fig = analyse(_design(**{"source.freq": 0.1}))
    w = next(w for w in fig.warnings if w.code == "OUT-OF-BAND")
    loss = 20 * math.log10(fig.gain_at_freq / abs(fig.av_source))
    assert "below f_low" in w.message and f"{loss:.1f} dB" in w.message
    assert loss < -20.0  # a decade below a corner of at least first order
    assert "OUT-OF-BAND" not in [w.code for w in analyse(_design()).warnings]


def test_ft_warning_is_not_judged_in_cut_off():
    """At rest in cut-off gm is ~0, so any ft is "too fast": Q-CUTOFF says it already."""
    fig = analyse(_design(**{"bias.r1": 10e6}))
    assert fig.region == "cutoff"
    codes = [w.code for w in fig.warnings]
    assert "Q-CUTOFF" in codes and "FT-INCONSISTENT" not in codes
