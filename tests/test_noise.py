"""Noise against published formulas and independent computations.

Sources, named beside each check:

* Johnson (1928) and Nyquist (1928): a resistance R at temperature T has an
  open-circuit noise density 4kTR (V²/Hz); k is the exact 2019 SI value
  (scipy.constants holds it);
* Gray, Hurst, Lewis & Meyer, *Analysis and Design of Analog Integrated
  Circuits*, ch. 11, and Motchenbacher & Connelly, *Low-Noise Electronic
  System Design*: a bipolar transistor's input generators en² = 4kT(rb +
  1/(2gm)) and in² = 2qIB (plus 2qIC/|β|², which they note is small), and
  the noise factor F = 1 + (en² + in²·Rs²)/(4kT·Rs) for uncorrelated
  generators, least at Rs = en/in;
* the integral of a 1/f density K/f over [f1, f2] is K·ln(f2/f1);
* scipy.integrate.quad for an integral of a density given as a formula.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from hypothesis import HealthCheck, assume, given, settings
from hypothesis import strategies as st
from scipy import constants, integrate
from test_engine_properties import designs

from model import analyse
from model.analyses.capacitance import device_capacitance, with_device_capacitance
from model.analyses.figures import dc_midband, design_values
from model.analyses.noise import TransistorNoise, band_grid, noise_spectrum
from model.analyses.noise import integrate as integrate_log
from model.circuit.netlist import Netlist, Resistor, VoltageSource
from model.circuit.topologies import build
from model.design.stage import CE, TOPOLOGIES, default_design, with_values

K, Q = constants.k, constants.e

SETTINGS = settings(max_examples=30, deadline=None, derandomize=True, database=None,
                    suppress_health_check=[HealthCheck.too_slow, HealthCheck.filter_too_much])


def _built(d):
    """The design built with its device capacitances, at its operating point."""
    v = design_values([d])
    stage = build(d.topology, v)
    op, dev, _ = dc_midband(stage, v["source.rs"])
    caps = device_capacitance(float(dev.gm[0]), d.transistor.ft, d.transistor.cmu)
    return with_device_capacitance(stage, caps), op, dev


def _spectrum(d, freq, *, quiet=(), rb=None):
    stage, op, dev = _built(d)
    t = d.transistor
    ns = noise_spectrum(stage, op, np.asarray(freq, float), rs=d.source.rs, celsius=d.environment.ambient,
                        transistor=TransistorNoise(rb=t.rb if rb is None else rb, kf=t.kf, af=t.af), quiet=quiet)
    return ns, op, dev


def _grounded_emitter(**values):
    """A common emitter whose emitter and input are at signal ground at 1 kHz
    (re1 = 0, ce and cin of 1 F), ro ≫ RC (VA 1 MV): the textbook's bare
    transistor."""
    return with_values(default_design(CE), {"stage.re1": 0.0, "stage.ce": 1.0, "stage.cin": 1.0,
                                            "transistor.va": 1e6, **values})


# ------------------------------------------------------------ the transistor
@pytest.mark.parametrize("rb", [0.0, 100.0, 1e3])
def test_transistor_en_is_4kT_rb_plus_1_over_2gm(rb):
    """Gray, Hurst, Lewis & Meyer ch. 11: en² = 4kT(rb + 1/(2gm)), from the
    engine's own gm: rb's voltage in series with the base, and the collector
    shot 2qIC referred through gm (2qIC/gm² = 2kT/gm)."""
    d = _grounded_emitter()
    ns, op, dev = _spectrum(d, [1e3], rb=rb)
    own = [k for k, name in enumerate(ns.names) if name.startswith("q1")]
    en = math.sqrt(np.sum(np.abs(ns.en_k[0, own, 0]) ** 2))
    t = constants.zero_Celsius + d.environment.ambient
    gm = float(dev.gm[0])
    # The base shot's own share of en (it flows through cin's 0.16 mΩ at
    # 1 kHz) is below 1e-12 of the total: the match is to rounding.
    assert en == pytest.approx(math.sqrt(4 * K * t * (rb + 1 / (2 * gm))), rel=1e-6)


def test_transistor_in_is_2qIB():
    """Gray, Hurst, Lewis & Meyer ch. 11: in² = 2qIB + 2qIC/|β|², the second
    term 1/β of the first.  The divider takes part of an input current that
    the base does not (rπ/(R1‖R2) of it), so it is made large here: base
    bias on a split supply through rb = 1 MΩ, rb (the spreading resistance)
    0 so that its own term (2rb/rπ of the first) is absent."""
    d = with_values(default_design("common-emitter-split"), {
        "bias.rb": 1e6, "stage.re1": 0.0, "stage.ce": 1.0, "stage.cout": 1.0, "transistor.va": 1e6,
        "stage.cin": 1.0})
    ns, op, dev = _spectrum(d, [1e3], rb=0.0)
    own = [k for k, name in enumerate(ns.names) if name.startswith("q1")]
    i_n = math.sqrt(np.sum(np.abs(ns.in_k[0, own, 0]) ** 2))
    ib, beta = abs(float(op.states["q1"].ib[0])), float(dev.beta_ac[0])
    r_pi = float(dev.r_pi[0])
    shunt = 1.0 + r_pi / 1e6  # the part of an input current rb = 1 MΩ takes
    expected = math.sqrt(2 * Q * ib * (1 + 1 / beta)) * shunt
    assert i_n == pytest.approx(expected, rel=2e-3)
    assert i_n == pytest.approx(math.sqrt(2 * Q * ib), rel=1 / beta + 2 * r_pi / 1e6 + 1e-3)


def test_noise_figure_with_noiseless_bias_follows_the_textbook_formula():
    """Motchenbacher & Connelly: F = 1 + (en² + in²·Rs²)/(4kT·Rs) with the
    bias resistors made noiseless.  Their formula drops the correlation of
    en and in (one collector shot current feeds both); with it the engine's
    F has 2·c·Rs more in the numerator, and c ≤ en·in/√β here, so at the
    optimum Rs the two differ by at most 1/√β of the excess noise."""
    d = _grounded_emitter(**{"source.rs": 2e3})
    quiet = ("r1", "r2", "rc", "re1", "re2", "rl")
    ns, op, dev = _spectrum(d, [1e3], quiet=quiet)
    en, i_n = float(ns.en[0, 0]), float(ns.in_[0, 0])
    t = constants.zero_Celsius + d.environment.ambient
    rs = d.source.rs
    textbook = 1 + (en ** 2 + i_n ** 2 * rs ** 2) / (4 * K * t * rs)
    engine = 10 ** (float(ns.noise_figure_db()[0, 0]) / 10)
    beta = float(dev.beta_ac[0])
    assert engine == pytest.approx(textbook, rel=2.0 / math.sqrt(beta))
    # And the optimum is en/in, whatever the correlation (the engine's own
    # F over Rs, scanned, is least there).
    rs_opt, nf_min = (float(x[0, 0]) for x in ns.optimum())
    assert rs_opt == pytest.approx(en / i_n, rel=1e-12)
    scan = np.geomspace(rs_opt / 3, rs_opt * 3, 61)
    f_scan = [1 + float(np.sum(ns.referred(np.array([r]))[0, :, 0])) / (4 * K * t * r) for r in scan]
    assert scan[int(np.argmin(f_scan))] == pytest.approx(rs_opt, rel=0.02)
    assert 10 * math.log10(min(f_scan)) == pytest.approx(nf_min, abs=1e-3)


# ---------------------------------------------------------------- resistors
@pytest.mark.parametrize("r1, r2, celsius", [(10e3, 10e3, 25.0), (1e6, 4.7e3, -40.0), (470.0, 22e3, 85.0)])
def test_a_resistor_divider_has_the_noise_of_its_parallel_resistance(r1, r2, celsius):
    """Johnson (1928), Nyquist (1928): the divider's output (supply at signal
    ground) has the density of R1‖R2 alone, √(4kT·R1‖R2)."""
    from model.analyses.noise import _sources
    from model.circuit.dense import solve_batched
    from model.circuit.linearised import FrequencySweep

    net = Netlist((VoltageSource("vcc", "vcc", "0", np.array([9.0])), Resistor("r1", "vcc", "m", np.array([r1])),
                   Resistor("r2", "m", "0", np.array([r2]))), 1)
    op = None  # no transistor: the linearised network is the resistors alone
    sweep = FrequencySweep(net, op)
    plan = sweep.plan
    freq = np.array([10.0, 1e4])
    names, vectors, densities = _sources(net, op, plan, 2 * np.pi * freq, np.array([celsius]),
                                         TransistorNoise(), (), freq)
    z = solve_batched(np.broadcast_to(sweep.a_g[:, 0], (1, plan.n, plan.n)).copy(), np.eye(plan.n)[None])
    out = plan.index["m"]
    density = np.sum(np.abs(np.einsum("n,bfnk->bkf", z[0, out], vectors)) ** 2 * densities, axis=1)
    t = constants.zero_Celsius + celsius
    parallel = r1 * r2 / (r1 + r2)
    np.testing.assert_allclose(np.sqrt(density[0]), math.sqrt(4 * K * t * parallel), rtol=1e-12)


def test_the_source_resistance_alone_sets_the_floor():
    """With every other source silent (a stage of noiseless resistors and a
    transistor without rb, its shot noise still there), the total is never
    below the source's own √(4kT·rs), Johnson–Nyquist."""
    d = default_design(CE)
    ns, _, _ = _spectrum(d, np.geomspace(10, 1e6, 9), quiet=("r1", "r2", "rc", "re1", "re2", "rl"), rb=0.0)
    t = constants.zero_Celsius + d.environment.ambient
    assert (ns.total[0] >= math.sqrt(4 * K * t * d.source.rs)).all()


# ------------------------------------------------------------------ flicker
def test_integrated_flicker_noise_over_a_decade_is_k_ln10():
    """∫ K/f df over [f1, 10·f1] = K·ln 10 (a closed form), for the engine's
    log-grid integral of a 1/f density, and scipy.integrate.quad agrees."""
    kf, f1 = 3e-21, 10.0
    grid = band_grid(f1, 10 * f1)
    got = float(integrate_log(grid, kf / grid))
    assert got == pytest.approx(kf * math.log(10), rel=1e-12)
    quad, _ = integrate.quad(lambda f: kf / f, f1, 10 * f1)
    assert got == pytest.approx(quad, rel=1e-9)


def test_the_flicker_source_is_kf_ib_to_the_af_over_f():
    """The base's 1/f source is KF·IB^AF/f (A²/Hz): with KF set, its in at
    low frequency exceeds the shot noise alone by exactly that density
    (uncorrelated sources add in power)."""
    d = with_values(_grounded_emitter(), {"transistor.kf": 1e-15, "transistor.af": 1.2})
    ns, op, _ = _spectrum(d, [1.0, 10.0, 100.0], rb=0.0)
    ib = abs(float(op.states["q1"].ib[0]))
    k = ns.names.index("q1 1/f")
    shot = ns.names.index("q1 base shot")
    ratio = np.abs(ns.in_k[0, k]) ** 2 / np.abs(ns.in_k[0, shot]) ** 2
    expected = (1e-15 * ib ** 1.2 / np.array([1.0, 10.0, 100.0])) / (2 * Q * ib)
    np.testing.assert_allclose(ratio, expected, rtol=1e-9)


# ------------------------------------------------------------------- figures
def test_integrated_noise_and_snr_follow_their_definitions():
    """vn_in_rms = √∫ en_total² df over the band (scipy.integrate.quad on
    the engine's density, interpolated on log-log axes, as an independent
    integrator) and SNR = 20·log10((vpk/√2)/vn_in_rms)."""
    d = with_values(default_design(CE), {"source.noise_low": 20.0, "source.noise_high": 20e3})
    f = analyse(d)
    n = f.noise
    assert n.band == (20.0, 20e3)
    freq = band_grid(20.0, 20e3, points=601)
    ns, _, _ = _spectrum(d, freq)
    dens = ns.total[0] ** 2

    def at(x):
        return math.exp(np.interp(math.log(x), np.log(freq), np.log(dens)))

    quad, _ = integrate.quad(at, 20.0, 20e3, limit=200, points=[100.0, 1e3, 1e4])
    assert n.vn_in_rms == pytest.approx(math.sqrt(quad), rel=2e-3)
    assert n.snr_db == pytest.approx(20 * math.log10(d.source.vpk / math.sqrt(2) / n.vn_in_rms), rel=1e-12)


def test_a_source_without_resistance_has_no_noise_figure():
    f = analyse(with_values(default_design(CE), {"source.rs": 0.0}))
    assert math.isnan(f.noise.nf_db) and math.isfinite(f.noise.en_total)
    assert f.to_dict()["noise"]["nf_db"] is None


@pytest.mark.parametrize("topology", TOPOLOGIES)
def test_every_topology_has_noise_and_the_shares_sum_to_one(topology):
    f = analyse(default_design(topology))
    n = f.noise
    assert math.isfinite(n.en_total) and n.en_total > 0
    assert sum(share for _, share in n.contributors) == pytest.approx(1.0, rel=1e-12)
    shares = [share for _, share in n.contributors]
    assert shares == sorted(shares, reverse=True)
    if topology == "ce-follower":
        assert any(name.startswith("q2 ") for name, _ in n.contributors)


# --------------------------------------------------------------- properties
@SETTINGS
@given(designs(), st.sampled_from(["r1", "r2", "rc", "re1", "re2", "re", "rl", "rf", "rb"]))
def test_adding_a_resistors_noise_never_lowers_the_total(d, name):
    """Uncorrelated sources add in power: a resistor's noise switched on
    raises the total or leaves it (a resistor across a node held fixed)."""
    stage, _, _ = _built(d)
    assume(name in stage.resistors)  # a part this design has
    freq = [100.0, 1e4]
    quiet, _, _ = _spectrum(d, freq, quiet=(name,))
    loud, _, _ = _spectrum(d, freq)
    assert (loud.total >= quiet.total * (1 - 1e-12)).all()


@SETTINGS
@given(designs())
def test_the_total_is_the_root_sum_square_of_the_contributors(d):
    ns, _, _ = _spectrum(d, [30.0, 3e3, 3e5])
    parts = np.sum(ns.referred(), axis=1) + ns.source_thermal
    np.testing.assert_allclose(ns.total ** 2, parts, rtol=1e-12)
    # And the load's density is the input's through the signal gain.
    np.testing.assert_allclose(ns.output, ns.total * np.abs(ns.gain), rtol=1e-12)


def test_the_geophone_demos_noise_budget_is_as_its_notes_tell():
    """The notes' claims, recomputed: the seismic band 2–200 Hz, the coil a
    little over half the input noise, NF about 2.5 dB, re1 next, then rb,
    and the quietest source resistance near 2 kΩ."""
    import pathlib

    from model import read_design

    d = read_design(pathlib.Path(__file__).resolve().parents[1] / "saved_designs" / "geophone_preamp.toml")
    n = analyse(d).noise
    assert n.band == (2.0, 200.0)
    names = [name for name, _ in n.contributors]
    assert names[:3] == ["rs thermal", "re1 thermal", "q1 rb"]
    assert 0.5 < dict(n.contributors)["rs thermal"] < 0.6
    assert 2.0 < n.nf_db < 3.0 and 1.5e3 < n.rs_opt < 2.5e3
