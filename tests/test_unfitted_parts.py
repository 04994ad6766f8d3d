"""Capacitors that are not fitted: ``0`` or ``"none"`` for ce, cl, cin and cout.

Sources, each named again beside its check:
* the common emitter with an emitter resistance RE in the signal path,
  av = −β(RC ‖ RL)/(rπ + (β + 1)RE), and its input resistance
  rπ + (β + 1)RE: Sedra & Smith, *Microelectronic Circuits* (the CE
  amplifier with an emitter resistance), from the hybrid-π model;
* gm = IC/VT, rπ = β/gm, Cπ + Cμ = gm/(2π fT): Sedra & Smith; Gray, Hurst,
  Lewis & Meyer;
* VT = kT/q with the 2019 SI values of k and e (scipy.constants);
* the single-pole RC corner f = 1/(2πRC): any circuit-theory text;
* Boylestad & Nashelsky, *Electronic Devices and Circuit Theory*, 10th ed.,
  Ex. 5.5 (RE unbypassed): Av ≈ −3.24, Zi ≈ 8.47 kΩ;
* Kirchhoff's current law and Thevenin's theorem for the DC-coupled cases.

The formulas take the operating point (IC) from the DC solution: what each
check tests is the small-signal network built around it, against the book.
"""

from __future__ import annotations

import math

import pytest
import test_engine_properties as engine_properties
from hypothesis import HealthCheck, assume, given, settings
from hypothesis import strategies as st
from scipy import constants
from test_engine_properties import _decades, designs

from model import analyse
from model.analyses.figures import analyse_batch, design_values
from model.analyses.hand import hand_estimate
from model.design.stage import CB, CE, EF, WITH_BYPASS, default_design, design_to_dict, get_value, with_values
from model.design.stepping import step, step_decade
from model.errors import DesignError
from model.files.designfile import dumps_design, loads_design, read_document
from model.files.ledger import replay
from model.files.session import DesignSession, create
from tui.widgets.knobs import field_text

#: The capacitor keys that may be left off, with a topology that has each.
UNFITTED = [("stage.ce", CE), ("stage.cin", CE), ("stage.cout", EF), ("load.cl", EF),
            ("stage.cin", EF), ("stage.cout", CE), ("load.cl", CE)]
#: An Early voltage so large that ro (≈ VA/IC, about 2e9 Ω here) drops out of
#: every formula below, which all take ro = ∞.
NO_EARLY = 1e6
#: A coupling capacitor that is a short at every frequency that matters (its
#: corner lies below 1 mHz).
HUGE = 10.0
#: Relative error the ro = ∞ formulas carry against the model at NO_EARLY:
#: β_ac = β(1 − VBC/VA) and (RC + RE)/ro are each a few parts in 1e6 for the
#: volts and kilohms below; 2e-5 is five times that.
FINITE_RO = 2e-5
#: Hypothesis runs the same examples every time (no database, no random seed).
DETERMINISTIC = settings(max_examples=40, deadline=None, derandomize=True, database=None,
                         suppress_health_check=[HealthCheck.too_slow, HealthCheck.filter_too_much])

UNBYPASSED = {
    "transistor.va": NO_EARLY, "stage.rc": 6.8e3, "stage.re1": 220.0, "stage.re2": 1e3,
    "stage.ce": "none", "load.rl": 47e3,
}


def _design(topology=CE, **values):
    return with_values(default_design(topology), values)


def _vt(design) -> float:
    """kT/q at the design's ambient (V), from the 2019 SI constants (scipy)."""
    return constants.k * (constants.zero_Celsius + design.environment.ambient) / constants.e


def _par(*rs):
    return 1.0 / sum(1.0 / r for r in rs)


def _hybrid_pi(design, ic):
    """(gm, rπ) at collector current ic (A): gm = IC/VT, rπ = β/gm (Sedra & Smith)."""
    gm = ic / _vt(design)
    return gm, design.transistor.beta / gm


# ---------------------------------------------------------------- the file keys
@pytest.mark.parametrize("key, topology", UNFITTED)
@pytest.mark.parametrize("given_as", ["none", " None ", "NONE", 0, 0.0, "0", "0u"])
def test_zero_and_none_mean_not_fitted(key, topology, given_as):
    design = _design(topology, **{key: given_as})
    assert get_value(design, key) == 0.0
    table, name = key.split(".")
    # One written form, whatever was typed: the word, in the file and the Knobs.
    assert design_to_dict(design)[table][name] == "none"
    assert field_text(key, 0.0) == "none"


@pytest.mark.parametrize("key, topology", UNFITTED)
@pytest.mark.parametrize("bad, reason", [
    ("-1u", None), ("nonee", "not a number"), ("0x", "unknown prefix 'x'"), ("open", "not a number"),
])
def test_bad_capacitor_values_name_field_value_and_rule(key, topology, bad, reason):
    with pytest.raises(DesignError) as caught:
        _design(topology, **{key: bad})
    err = caught.value
    assert (err.field, err.value) == (key, bad)
    # A misspelt number names only the spelling it broke (issue 15), anything else the limits.
    assert ("greater than 0 F, or 0 or 'none' when not fitted" in err.rule) == (bad != "0x")
    if reason:
        assert reason in err.rule
    assert str(err).startswith(f"{key} = {bad!r}: ")


def test_bad_capacitor_value_in_a_file_names_the_file():
    text = 'format = 1\ntopology = "common-emitter"\n[stage]\nce = "nonee"\n'
    with pytest.raises(DesignError) as caught:
        loads_design(text, "bench.toml")
    assert (caught.value.path, caught.value.field, caught.value.value) == ("bench.toml", "stage.ce", "nonee")


@pytest.mark.parametrize("key", ["stage.rc", "stage.re1", "bias.r1", "source.rs", "load.rl",
                                 "transistor.cmu", "supply.vcc"])
def test_none_is_only_for_capacitors_that_can_be_left_off(key):
    with pytest.raises(DesignError) as caught:
        _design(**{key: "none"})
    assert caught.value.field == key
    assert "'none'" not in caught.value.rule


# ------------------------------------------------------------ the textbook gain
def test_unbypassed_gain_is_the_textbook_degenerated_gain():
    """Sedra & Smith, CE with emitter resistance: av = −β(RC‖RL)/(rπ + (β+1)RE)
    with RE = re1 + re2 when ce is not fitted, and rin_base = rπ + (β+1)RE;
    to FINITE_RO, the only difference being ro ≈ 1e9 Ω against ∞."""
    d = _design(**UNBYPASSED)
    fig = analyse(d)
    assert fig.region == "active"
    gm, r_pi = _hybrid_pi(d, fig.ic)
    beta, re_total = d.transistor.beta, d.stage.re1 + d.stage.re2
    expected = -beta * _par(d.stage.rc, d.load.rl) / (r_pi + (beta + 1.0) * re_total)
    assert fig.av_loaded == pytest.approx(expected, rel=FINITE_RO)
    assert fig.rin_base == pytest.approx(r_pi + (beta + 1.0) * re_total, rel=FINITE_RO)


@pytest.mark.parametrize("re2", [2.2e3, 10e3])
def test_removing_ce_lowers_the_gain_by_the_textbook_ratio(re2):
    """The same formula, with and without the bypass: ce carries no DC, so IC
    is the same, and |av| falls by (rπ + (β+1)re1)/(rπ + (β+1)(re1 + re2))
    (Sedra & Smith, as above)."""
    values = {**UNBYPASSED, "stage.re1": 100.0, "stage.re2": re2, "bias.r1": 47e3, "bias.r2": 10e3}
    bypassed = analyse(_design(**{**values, "stage.ce": "100u"}))
    unbypassed = analyse(_design(**values))
    assert unbypassed.ic == pytest.approx(bypassed.ic, rel=1e-12)  # the capacitor carries no DC
    d = _design(**values)
    _, r_pi = _hybrid_pi(d, bypassed.ic)
    beta = d.transistor.beta
    ratio = (r_pi + (beta + 1.0) * 100.0) / (r_pi + (beta + 1.0) * (100.0 + re2))
    assert unbypassed.av_loaded / bypassed.av_loaded == pytest.approx(ratio, rel=FINITE_RO)
    assert abs(unbypassed.av_loaded) < abs(bypassed.av_loaded) * 0.2


def test_hand_estimate_of_an_unbypassed_re2_is_boylestad_5_5():
    """Boylestad & Nashelsky 10th ed., Ex. 5.5 (RE 680 Ω unbypassed), with the
    680 Ω as re2 and ce not fitted: the book's Av ≈ −3.24 with re restored,
    −RC/(re + RE) (the same budget as tests/test_worked_examples.py), and
    Zi ≈ 8.47 kΩ to 0.5 %."""
    d = _design(**{"supply.vcc": 16.0, "bias.r1": 90e3, "bias.r2": 10e3, "stage.rc": 2.2e3,
                   "stage.re1": 0.0, "stage.re2": 680.0, "stage.ce": "none", "transistor.beta": 210.0,
                   "load.rl": "open", "estimate.vbe": 0.7})
    h = hand_estimate(d, vt=0.026, stiff=True)
    assert h.re == pytest.approx(19.64, abs=0.005)  # the book's re to its 0.01 Ω
    assert h.av_open == pytest.approx(-3.24 * 680.0 / (680.0 + 19.64), rel=0.005)
    assert h.rin == pytest.approx(8.47e3, rel=0.005)
    # With ce fitted the same resistor is bypassed: B&N Ex. 5.6, Av ≈ −112.0.
    h_bypassed = hand_estimate(with_values(d, {"stage.ce": "100u"}), vt=0.026, stiff=True)
    assert h_bypassed.av_open == pytest.approx(-112.0, rel=0.005)


# ----------------------------------------------------------- frequency response
def test_unbypassed_f_low_is_set_by_the_coupling_capacitors_alone():
    """With ce not fitted only cin and cout have corners; cout huge leaves the
    single-pole RC corner of cin, f = 1/(2π(rs + rin)cin), with rin =
    r1 ‖ r2 ‖ (rπ + (β+1)RE) (Sedra & Smith), to 1e-4 (the corner search
    resolves ~1e-5; cout's corner, ~1e-7 of it, moves it by ~1e-14)."""
    d = _design(**{**UNBYPASSED, "stage.cin": 1e-6, "stage.cout": HUGE, "source.rs": 2.2e3})
    fig = analyse(d)
    assert {p.part for p in fig.response.low_parts} == {"cin", "cout"}
    _, r_pi = _hybrid_pi(d, fig.ic)
    beta = d.transistor.beta
    rin = _par(d.bias.r1, d.bias.r2, r_pi + (beta + 1.0) * (d.stage.re1 + d.stage.re2))
    assert fig.f_low == pytest.approx(1.0 / (2.0 * math.pi * (2.2e3 + rin) * 1e-6), rel=1e-4)
    assert fig.response.low_by.part == "cin"


def test_dc_coupled_input_leaves_cout_alone_at_the_low_end():
    """cin not fitted: the low corner is cout's single pole, 1/(2π(RC + RL)cout),
    to 1e-4: the output resistance is RC in parallel with the collector's own,
    which is at least ro ≈ VA/IC ≈ 2e9 Ω (a 3e-6 effect)."""
    d = _design(**{**UNBYPASSED, "stage.cin": "none", "source.rs": 220e3, "stage.cout": 100e-9})
    fig = analyse(d)
    assert fig.region == "active"
    assert [p.part for p in fig.response.low_parts] == ["cout"]
    assert fig.f_low == pytest.approx(1.0 / (2.0 * math.pi * (6.8e3 + 47e3) * 100e-9), rel=1e-4)


@pytest.mark.parametrize("topology, values", [
    (CE, {**UNBYPASSED, "stage.cin": "none", "stage.cout": "none", "source.rs": 220e3}),
    (EF, {"stage.cin": "none", "stage.cout": "none", "source.rs": 10e3}),
])
def test_no_coupling_or_bypass_capacitor_is_flat_to_dc(topology, values):
    """Nothing to block DC: f_low is 0 and there are no short-circuit
    estimates; the lowest point swept is the midband gain (the device
    capacitances are ~1e-12 of the way to their corner there)."""
    fig = analyse(_design(topology, **values))
    r = fig.response
    assert fig.region == "active"
    assert (fig.f_low, r.low_parts, r.low_by, r.f_low_estimate) == (0.0, (), None, 0.0)
    assert r.freq[0] <= fig.response.signal_freq / 10.0  # the flat part is on show
    assert abs(r.gain[0]) == pytest.approx(abs(fig.av_source), rel=1e-9)
    codes = {w.code for w in fig.warnings}
    assert not codes & {"NO-PASSBAND", "OUT-OF-BAND"}


def test_cl_none_leaves_only_the_device_to_set_f_high():
    """No load capacitance, Cμ = 0, rs = 0 and an open load: the upper corner
    is the pole Cπ makes with the degenerated emitter.  From the hybrid-π,
    vbe = vb/(1 + RE(gm + 1/rπ) + jωCπRE), so f_high = (1 + RE(gm + 1/rπ)) /
    (2πCπRE) with Cπ = gm/(2π fT) (Sedra & Smith; Gray, Hurst, Lewis &
    Meyer); to 5e-5 (FINITE_RO and the search's ~1e-5)."""
    d = _design(**{**UNBYPASSED, "load.cl": "none", "load.rl": "open", "transistor.cmu": 0.0,
                   "transistor.ft": 100e6, "source.rs": 0.0, "stage.cin": HUGE, "stage.cout": HUGE})
    fig = analyse(d)
    assert {p.part for p in fig.response.high_parts} == {"cpi", "cmu"}
    gm, r_pi = _hybrid_pi(d, fig.ic)
    re_total = d.stage.re1 + d.stage.re2
    c_pi = gm / (2.0 * math.pi * d.transistor.ft)
    expected = (1.0 + re_total * (gm + 1.0 / r_pi)) / (2.0 * math.pi * c_pi * re_total)
    assert fig.f_high == pytest.approx(expected, rel=5e-5)
    # Fitting any load capacitance can only lower it (one more pole).
    assert analyse(with_values(d, {"load.cl": 1e-12})).f_high < fig.f_high


@st.composite
def _unbypassed(draw):
    return _design(**{
        "transistor.polarity": draw(st.sampled_from(["npn", "pnp"])),
        "stage.rc": draw(_decades(1e3, 22e3)),
        "stage.re1": draw(st.one_of(st.just(0.0), _decades(10.0, 1e3))),
        "stage.re2": draw(_decades(100.0, 10e3)),
        "source.rs": draw(st.one_of(st.just(0.0), _decades(10.0, 10e3))),
        "load.rl": draw(st.one_of(st.just("open"), _decades(1e3, 100e3))),
        "stage.cin": draw(_decades(100e-9, 100e-6)),
        "stage.cout": draw(_decades(100e-9, 100e-6)),
        "source.freq": draw(_decades(10.0, 10e3)),
        "stage.ce": "none",
    })


@DETERMINISTIC
@given(_unbypassed())
def test_ce_none_is_the_limit_of_a_vanishing_ce(d):
    """ce = 1 fF against none, at the signal frequency f (in the band).

    The engine's midband figures short every bypass capacitor, whatever its
    size, so what must agree is the response itself.  1 fF across re2 turns
    it into Z = re2/(1 + jx), x = f/f_ce with f_ce = 1/(2π·re2·1 fF) ~ 1e11
    Hz, a relative change |ΔZ/Z| ≤ x.  The gain's sensitivity to the emitter
    impedance is below 1 through the stage (the formula above) and below 1
    again through the input divider, where rin enters once: so |Δav/av| < 2x.
    1e-12 covers the round-off of the complex solves."""
    fig = analyse(d)
    assume(fig.region == "active")
    tiny = analyse(with_values(d, {"stage.ce": 1e-15}))
    x = 2.0 * math.pi * d.source.freq * d.stage.re2 * 1e-15
    g_none, g_tiny = fig.response.gain_at_freq, tiny.response.gain_at_freq
    assert abs(g_tiny - g_none) <= (2.0 * x + 1e-12) * abs(g_none)


# ------------------------------------------------------------- the DC-coupled bias
@pytest.mark.parametrize("polarity", ["npn", "pnp"])
def test_dc_coupled_source_is_part_of_the_divider(polarity):
    """Thevenin: the source's rs to its 0 V DC level is, at DC, a resistor to
    ground beside the divider.  For the NPN it parallels r2; for the PNP
    (rails mirrored, source still at ground) r1.  The same stage with cin
    fitted and that resistor merged into the divider has the same IC."""
    rs = 100e3
    d = _design(**{"stage.cin": "none", "source.rs": rs, "transistor.polarity": polarity})
    merged = ({"bias.r2": _par(d.bias.r2, rs)} if polarity == "npn" else {"bias.r1": _par(d.bias.r1, rs)})
    twin = _design(**{"stage.cin": "10u", "source.rs": rs, "transistor.polarity": polarity, **merged})
    fig, ref = analyse(d), analyse(twin)
    assert fig.region == ref.region == "active"
    assert fig.ic == pytest.approx(ref.ic, rel=1e-9)
    assert fig.vce == pytest.approx(ref.vce, rel=1e-9)
    # The hand estimate takes rs into its Thevenin divider the same way.
    assert hand_estimate(d).ic == pytest.approx(hand_estimate(twin).ic, rel=1e-12)


@pytest.mark.parametrize("topology, node", [(CE, "vc"), (EF, "ve")])
@pytest.mark.parametrize("polarity", ["npn", "pnp"])
def test_dc_coupled_load_carries_dc(topology, node, polarity):
    """cout not fitted: rl carries DC to ground from the output node.
    Kirchhoff's current law at that node balances the transistor's current,
    the stage resistor and rl, to 1e-9 of the transistor's current."""
    d = _design(topology, **{"stage.cout": "none", "load.rl": 10e3, "transistor.polarity": polarity})
    fig = analyse(d)
    assert fig.region == "active"
    v, vcc, s = getattr(fig, node), d.supply.vcc, (1.0 if polarity == "npn" else -1.0)
    if topology == CE:
        # The stage resistor runs to the supply (NPN) or to ground (PNP mirror).
        i_stage = (vcc - v) / d.stage.rc if polarity == "npn" else -v / d.stage.rc
        into_node = i_stage - s * fig.ic
    else:
        i_stage = v / d.stage.re if polarity == "npn" else (v - vcc) / d.stage.re
        into_node = s * (fig.ic + fig.ib) - i_stage
    assert into_node == pytest.approx(v / d.load.rl, rel=1e-9, abs=1e-9 * fig.ic)
    # Against the same stage with cout fitted: the DC load moves the node.
    fitted = analyse(with_values(d, {"stage.cout": "10u"}))
    assert abs(getattr(fitted, node) - v) > 0.01


def test_a_cut_off_dc_coupled_stage_says_why():
    """rs = 0 and cin not fitted hold an NPN base at the source's 0 V: cut off
    (no current can flow with VBE = 0, Ebers–Moll), and the warning names the
    wire that does it."""
    fig = analyse(_design(**{"stage.cin": "none", "source.rs": 0.0}))
    assert fig.region == "cutoff"
    assert abs(fig.vb) < 1e-9
    (warning,) = [w for w in fig.warnings if w.code == "Q-CUTOFF"]
    assert "cin none" in warning.message


@pytest.mark.parametrize("polarity", ["npn", "pnp"])
def test_a_source_across_the_junction_is_refused(polarity):
    """cin not fitted, rs = 0 and no emitter resistance: the ideal source
    would fix VBE at the emitter rail's voltage (vcc across a PNP's
    junction; Ebers–Moll has no finite current there), so the rule refuses
    it, naming the keys; any one resistance makes it a circuit again."""
    wired = {"stage.cin": "none", "source.rs": 0.0, "stage.re1": 0.0, "stage.re2": 0.0,
             "transistor.polarity": polarity}
    with pytest.raises(DesignError) as caught:
        _design(**wired)
    assert (caught.value.field, caught.value.value) == ("stage.cin", "none")
    assert "source.rs, stage.re1 and stage.re2 all 0" in caught.value.rule
    for key in ("source.rs", "stage.re1", "stage.re2"):
        analyse(_design(**{**wired, key: 100.0}))  # solves


def test_a_source_holding_a_common_base_emitter_is_refused():
    """A common-base stage with cin not fitted and rs = 0: the source holds
    the emitter at 0 V while the divider holds the base, so VBE is fixed and
    nothing limits the current; any source resistance makes it a circuit."""
    wired = {"stage.cin": "none", "source.rs": 0.0}
    with pytest.raises(DesignError) as caught:
        with_values(default_design(CB), wired)
    assert (caught.value.field, caught.value.value) == ("stage.cin", "none")
    assert "common-base" in caught.value.rule
    analyse(with_values(default_design(CB), {**wired, "source.rs": 1e3}))  # solves


def test_batches_with_and_without_each_part_group_by_shape():
    """analyse_batch groups rows by their shape: every mix of fitted and
    not-fitted capacitors gives the same figures as each design alone."""
    mixes = [{}, {"stage.ce": "none"}, {"stage.cin": "none", "source.rs": 220e3},
             {"stage.cout": "none"}, {"load.cl": "none"}, {"stage.ce": "none", "stage.cout": "none"}]
    designs = [_design(**{**m, "transistor.polarity": p}) for m in mixes for p in ("npn", "pnp")]
    batch = analyse_batch(CE, design_values(designs))
    for k, d in enumerate(designs):
        alone = analyse(d, large_signal=False)
        for name in ("ic", "vce", "av_loaded", "av_source", "rin", "rout"):
            assert getattr(batch, name)[k] == pytest.approx(getattr(alone, name), rel=1e-9), (k, name)


@st.composite
def _parts_left_off(draw, topology=None):
    """A random valid design (tests/test_engine_properties.py) with any of
    its capacitors not fitted."""
    d = draw(designs(topology))
    keys = ["stage.cin", "stage.cout", "load.cl"] + (["stage.ce"] if d.topology in WITH_BYPASS else []) + (
        ["stage.cb"] if d.topology == CB else [])
    if (d.topology in WITH_BYPASS and d.source.rs == d.stage.re1 == d.stage.re2 == 0) or (
            d.topology == CB and d.source.rs == 0):
        keys.remove("stage.cin")  # refused (see test_a_source_across_the_junction_is_refused)
    return with_values(d, {k: "none" for k in draw(st.lists(st.sampled_from(keys), unique=True))})


#: The engine's physical properties, run again on designs with parts left off.
PROPERTIES = ("test_every_valid_design_solves", "test_kcl_recomputed_independently",
              "test_figures_agree_with_node_voltages", "test_region_follows_documented_criteria",
              "test_energy_balance", "test_load_never_raises_the_gain")


@DETERMINISTIC
@given(_parts_left_off(), st.sampled_from(PROPERTIES))
def test_engine_properties_hold_with_parts_left_off(d, name):
    """Kirchhoff, Tellegen, the device equations, the region criteria and
    the load's division (each documented where it is defined) hold on the
    new shapes too: a direct connection joins nodes, an absent part is gone.
    The hand estimate and the warnings are formed without an exception."""
    if d.stage.cin == 0 and d.source.rs == 0:
        # The source holds the base: it is no free node for Kirchhoff's sum
        # (that check asks for a floating base), but all the others apply.
        assume(name != "test_kcl_recomputed_independently")
    getattr(engine_properties, name).hypothesis.inner_test(d)
    hand_estimate(d)


@DETERMINISTIC
@given(st.sampled_from((CE, EF)).flatmap(
    lambda top: st.lists(_parts_left_off(top), min_size=2, max_size=6).map(lambda ds: (top, ds))))
def test_batch_equals_one_at_a_time_with_parts_left_off(case):
    """The batched path groups rows by shape, and with parts left off the
    shapes multiply: still the same figures as one design at a time."""
    engine_properties.test_batch_equals_one_at_a_time.hypothesis.inner_test(case)


# ----------------------------------------------------------- files and the ledger
@pytest.mark.parametrize("topology, values", [
    (CE, {"stage.ce": "none", "load.cl": 0}),
    (EF, {"stage.cin": "none", "stage.cout": 0.0, "source.rs": 47e3}),
])
def test_file_round_trip(topology, values):
    d = _design(topology, **values)
    text = dumps_design(d)
    for key in values:
        if key != "source.rs":
            assert f'{key.split(".")[1]} = "none"' in text
    assert loads_design(text) == d


def test_ce_to_none_and_back_is_an_ordinary_ledger_entry(tmp_path):
    path = tmp_path / "bench.toml"
    start = default_design()
    create(str(path), start)
    with DesignSession(str(path)) as s:
        unbypassed = s.commit({"stage.ce": "none"}, note="no bypass")
        refitted = s.commit({"stage.ce": "100u"})
        undone = s.undo()
    assert [(c.key, c.old, c.new) for c in unbypassed.changes] == [("stage.ce", 100e-6, "none")]
    assert [(c.key, c.old, c.new) for c in refitted.changes] == [("stage.ce", "none", 100e-6)]
    assert [(c.key, c.old, c.new) for c in undone.changes] == [("stage.ce", 100e-6, "none")]
    # Recorded figures: without the bypass |av_source| is smaller, as above.
    assert abs(unbypassed.after["av_source"]) < abs(unbypassed.before["av_source"])
    doc = read_document(path)
    assert doc.design == with_values(start, {"stage.ce": 0.0})
    assert [get_value(replay(doc.history, n), "stage.ce") for n in (1, 2, 3, 4)] == [100e-6, 0.0, 100e-6, 0.0]
    assert 'ce = "none"' in path.read_text(encoding="utf-8")


# ------------------------------------------------------------------- stepping
@pytest.mark.parametrize("key, first", [("stage.ce", 1e-6), ("load.cl", 1e-12)])
def test_stepping_up_from_none_fits_a_first_value(key, first):
    assert step(key, 0.0, 1, "E24") == first
    assert step_decade(key, 0.0, 1) == first
    for down in (lambda: step(key, 0.0, -1, "E24"), lambda: step_decade(key, 0.0, -1)):
        with pytest.raises(DesignError, match="nothing below none") as caught:
            down()
        assert (caught.value.field, caught.value.value) == (key, "none")


@pytest.mark.parametrize("key", ["stage.cin", "stage.cout"])
@pytest.mark.parametrize("n", [1, -1])
def test_a_coupling_capacitor_that_is_a_wire_has_no_neighbour(key, n):
    for move in (lambda: step(key, 0.0, n, "E24"), lambda: step_decade(key, 0.0, n)):
        with pytest.raises(DesignError, match="direct connection") as caught:
            move()
        assert caught.value.field == key


def test_zero_ohm_links_and_zero_cmu_still_step_as_before():
    assert step("stage.re1", 0.0, 1, "E24") == 10.0
    assert step("stage.re1", 0.0, -1, "E24") == 0.0
    assert step("transistor.cmu", 0.0, -1, "E24") == 0.0


async def test_the_knobs_show_and_step_a_capacitor_not_fitted(tmp_path):
    """The workbench: the row reads "none"; up fits 1 µF; down is refused with
    a message and leaves no candidate."""
    from test_workbench import SMALL, knobs, status, type_into
    from test_workbench_knobs import _drain

    from tui.launch import make_app

    path = tmp_path / "bench.toml"
    create(str(path), _design(**{"stage.ce": "none"}))
    app = make_app(str(path))
    async with app.run_test(size=SMALL) as pilot:
        assert knobs(app).text("stage.ce") == "none"
        knobs(app).select("stage.ce")
        await _drain(pilot)
        await pilot.press("down")
        await _drain(pilot)
        assert app.candidate is None
        assert "nothing below none" in status(app)
        await pilot.press("up")
        await _drain(pilot)
        assert app.candidate.design.stage.ce == 1e-6
        await type_into(pilot, "stage.ce", "none")
        await _drain(pilot)
        assert app.candidate is None
    assert read_document(path).design.stage.ce == 0.0  # the one stored form of "none"


def test_report_says_flat_to_dc_when_no_coupling_or_bypass_capacitor_is_fitted(tmp_path, capsys):
    # A stage with cin, cout and ce all left off has no lower corner: the
    # report says why in words rather than "below 1 µHz" and an empty estimate.
    from tui.cli import main

    path = tmp_path / "flat.toml"
    assert main(["new", str(path)]) == 0
    assert main(["set", str(path), "stage.cin=none", "stage.cout=none", "stage.ce=none"]) == 0
    capsys.readouterr()
    assert main(["report", str(path)]) == 0
    out = capsys.readouterr().out
    assert "flat to DC, no coupling or bypass capacitor fitted" in out
    assert "below 1 µHz" not in out


def test_hand_estimate_in_cut_off_keeps_the_dc_coupled_load_divider():
    """cin and cout not fitted: rs joins r2 (VTH ≈ 0.14 V, below the assumed
    VBE), so nothing conducts.  With no current no resistor drops a volt, and
    VCE is Ohm's-law arithmetic: rc and the DC-coupled rl divide the supply at
    the collector, VCE = VCC·RL/(RC + RL) = 8.43 V for the defaults, not VCC."""
    d = _design(**{"stage.cin": "none", "stage.cout": "none"})
    h = hand_estimate(d)
    vcc, rc, rl = d.supply.vcc, d.stage.rc, d.load.rl
    expected = vcc * rl / (rc + rl)
    assert h.ic == 0.0
    assert h.vce == pytest.approx(expected, rel=1e-12)
    # The exact stage is in cut-off too, and its leakage (pA) moves VCE by far
    # less than 0.1 %, so the two agree as a hand method should.
    fig = analyse(d)
    assert fig.region == "cutoff"
    assert fig.vce == pytest.approx(expected, rel=1e-3)
