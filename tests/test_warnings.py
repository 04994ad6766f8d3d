"""Each warning fires when the physics says it should, and not otherwise.

Every case starts from a default design whose operating point is worked out
by hand below, then changes one thing whose effect can be argued without
the engine.  The limits are the ones README "Warnings" documents.

Default common emitter (model.design.stage.default_design): VCC 9 V, R1 56 kΩ,
R2 10 kΩ, RC 6.8 kΩ, RE1 220 Ω + RE2 1 kΩ, β 200, RL 100 kΩ, Rs 1 kΩ,
vpk 10 mV.  VTH = 9·10/66 = 1.36 V, RTH = 8.5 kΩ, so with VBE ≈ 0.65 V
IE ≈ 0.71 V / (1.22 kΩ + 8.5 kΩ/201) ≈ 0.57 mA; VE ≈ 0.69 V,
VC ≈ 9 − 0.57 mA·6.8 kΩ ≈ 5.1 V, VCE ≈ 4.4 V: forward-active, with
P ≈ VCE·IC ≈ 2.5 mW, and |av_source| ≈ 20 so it asks for ≈ 0.2 V peak.

Default emitter follower: VCC 12 V, R1 = R2 = 10 kΩ, RE 2.2 kΩ, RL 10 kΩ,
vpk 1 V.  VTH = 6 V, IE ≈ 5.35 V / 2.2 kΩ ≈ 2.4 mA, VE ≈ 5.3 V,
VCE ≈ 6.7 V, P ≈ 16 mW; it asks for ≈ 0.8 V peak against ≈ 4 V of swing.
"""

import pytest

from model import analyse
from model.design.stage import TOPOLOGIES, default_design, with_values

CE, EF = "common-emitter", "emitter-follower"
POLARITIES = ("npn", "pnp")


def _design(topology=CE, polarity="npn", **values):
    values = {k.replace("__", "."): v for k, v in values.items()}
    return with_values(default_design(topology), {"transistor.polarity": polarity, **values})


def _codes(d):
    return {w.code for w in analyse(d).warnings}


def _messages(d, code):
    return [w.message for w in analyse(d).warnings if w.code == code]


# ------------------------------------------------------------ the baseline
@pytest.mark.parametrize("polarity", POLARITIES)
@pytest.mark.parametrize("topology", TOPOLOGIES)
def test_default_designs_raise_no_warning(topology, polarity):
    """By the hand figures in the module docstring, both defaults are active,
    cool, far inside every rating and asking for well under their swing; a
    PNP twin on the same supply has the same magnitudes."""
    f = analyse(_design(topology, polarity))
    assert f.region == "active"
    assert f.warnings == ()


# -------------------------------------------------------------- the region
@pytest.mark.parametrize("polarity", POLARITIES)
def test_saturated_when_rc_demands_more_than_the_supply(polarity):
    # The emitter loop fixes IC ≈ 0.57 mA; through RC = 100 kΩ that would
    # drop 57 V from a 9 V supply, so the collector must fall to the emitter
    # and the collector–base junction forward-biases: saturation.
    d = _design(polarity=polarity, stage__rc=100e3)
    codes = _codes(d)
    assert "Q-SATURATED" in codes
    assert "Q-CUTOFF" not in codes
    assert "0.4 V" in _messages(d, "Q-SATURATED")[0]


@pytest.mark.parametrize("polarity", POLARITIES)
def test_cut_off_when_the_divider_cannot_turn_it_on(polarity):
    # R1 1 MΩ over R2 1 kΩ puts VTH = 9 mV on the base, a thousandth of what
    # a silicon junction needs: IC ≈ IS·e^(9 mV/VT) ≈ 1e-14 A, far below 10 nA.
    d = _design(polarity=polarity, bias__r1=1e6, bias__r2=1e3)
    codes = _codes(d)
    assert "Q-CUTOFF" in codes
    assert "Q-SATURATED" not in codes
    assert "10 nA" in _messages(d, "Q-CUTOFF")[0]


def test_an_active_stage_has_neither_region_warning():
    for topology in TOPOLOGIES:
        codes = _codes(_design(topology))
        assert not codes & {"Q-SATURATED", "Q-CUTOFF"}


# --------------------------------------------------------------- headroom
@pytest.mark.parametrize("topology", TOPOLOGIES)
def test_headroom_short_when_the_request_exceeds_the_supply(topology):
    # The load voltage cannot swing more than the supply span.  The CE's gain
    # of ≈ 20 at 1 V asks for ≈ 20 V peak from 9 V; the follower's gain of
    # ≈ 0.8 at 20 V asks for ≈ 16 V peak from 12 V.
    vpk = 1.0 if topology == CE else 20.0
    d = _design(topology, source__vpk=vpk)
    f = analyse(d)
    assert f.vout_wanted > d.supply.vcc  # the premise, by the hand gain above
    assert "HEADROOM-SHORT" in {w.code for w in f.warnings}


@pytest.mark.parametrize("topology", TOPOLOGIES)
def test_no_headroom_warning_without_a_signal(topology):
    assert "HEADROOM-SHORT" not in _codes(_design(topology, source__vpk=0.0))


@pytest.mark.parametrize("topology", TOPOLOGIES)
def test_headroom_rule_is_the_documented_comparison(topology):
    # README: fires when vpk·|av_source| exceeds swing_up or swing_down.  Both
    # the gain and the swing are properties of the bias, not of vpk, so
    # asking for 90 % of the smaller swing must pass and 110 % must not.
    f = analyse(_design(topology))
    limit = min(f.swing_up, f.swing_down) / abs(f.av_source)
    assert limit > 0
    assert "HEADROOM-SHORT" not in _codes(_design(topology, source__vpk=0.9 * limit))
    assert "HEADROOM-SHORT" in _codes(_design(topology, source__vpk=1.1 * limit))


# ------------------------------------------------------ thermal and ratings
def test_tj_over_when_the_rating_is_below_the_air():
    # The junction is never cooler than the air around it: tj_max 20 °C at a
    # 25 °C ambient is exceeded whatever the dissipation.
    d = _design(transistor__tj_max=20.0)
    assert _codes(d) == {"TJ-OVER"}
    assert "20 °C" in _messages(d, "TJ-OVER")[0]


def test_tj_over_through_a_poor_heat_path():
    # ≈ 2.5 mW through 100 000 K/W is a 250 K rise: tj ≈ 275 °C > 150 °C.
    assert _codes(_design(transistor__theta_ja=1e5)) == {"TJ-OVER"}


def test_tj_fine_with_a_good_heat_path():
    # The same 2.5 mW through 1000 K/W is 2.5 K: tj ≈ 27.5 °C.
    assert "TJ-OVER" not in _codes(_design(transistor__theta_ja=1e3))


def test_pd_over_and_under():
    # P ≈ 4.4 V · 0.57 mA ≈ 2.5 mW: over a 1 mW rating, under a 10 mW one.
    assert _codes(_design(transistor__pd_max=1e-3)) == {"PD-OVER"}
    assert "PD-OVER" not in _codes(_design(transistor__pd_max=10e-3))


def test_vce_over_and_under():
    # VCE ≈ 4.4 V: above a 2 V vceo, below a 6 V one.
    d = _design(transistor__vceo=2.0)
    assert _codes(d) == {"VCE-OVER"}
    assert "VCE-OVER" not in _codes(_design(transistor__vceo=6.0))


@pytest.mark.parametrize("polarity", POLARITIES)
@pytest.mark.parametrize("topology", TOPOLOGIES)
def test_vce_never_over_a_vceo_above_the_supply(topology, polarity):
    # Collector and emitter both sit between the rails, so |VCE| ≤ VCC − VEE.
    d = _design(topology, polarity)
    assert "VCE-OVER" not in _codes(with_values(d, {"transistor.vceo": d.supply.vcc - d.supply.vee + 0.01}))


def test_resistor_overload_names_the_hot_parts():
    # At rest: R1 carries (9 − 1.33 V)/56 kΩ ≈ 0.14 mA → 1.05 mW; RC
    # (0.57 mA)²·6.8 kΩ ≈ 2.2 mW; R2 1.33²/10 kΩ ≈ 0.18 mW; RE2 0.32 mW;
    # RE1 0.07 mW.  Against a 0.5 mW rating R1 and RC are over by ≥ 2×, the
    # others under by ≥ 1.5×.
    d = _design(parts__resistor_power=0.5e-3)
    messages = _messages(d, "R-OVERLOAD")
    named = {m.split()[0] for m in messages}
    assert named == {"r1", "rc"}
    assert _codes(d) == {"R-OVERLOAD"}


def test_resistor_overload_on_a_stiff_low_value_divider():
    # R1 = R2 = 100 Ω across 20 V: each carries about 10 V, (10 V)²/100 Ω ≈ 1 W,
    # four times a quarter-watt rating.
    d = _design(supply__vcc=20.0, bias__r1=100.0, bias__r2=100.0)
    named = {m.split()[0] for m in _messages(d, "R-OVERLOAD")}
    assert {"r1", "r2"} <= named


# --------------------------------------------------------- β dependence
# IB = (VTH − VBE)/(RTH + (β+1)RE), IC = β·IB (hand relation, README).
@pytest.mark.parametrize("polarity", POLARITIES)
def test_beta_dependent_with_a_base_resistor_like_divider(polarity):
    # R1 1 MΩ, R2 10 MΩ: RTH = 909 kΩ against (β+1)RE = 201·100 Ω = 20 kΩ, so
    # IB hardly depends on β and IC ∝ β: halving β roughly halves IC (≈ 49 %),
    # far beyond the 10 % limit.
    d = _design(polarity=polarity, bias__r1=1e6, bias__r2=10e6, stage__re1=0.0,
                stage__re2=100.0, stage__rc=2.2e3)
    f = analyse(d)
    assert f.region == "active"
    assert abs(f.ic_beta_half / f.ic - 1) > 0.3
    assert "BETA-DEPENDENT" in {w.code for w in f.warnings}


@pytest.mark.parametrize("polarity", POLARITIES)
def test_not_beta_dependent_with_a_stiff_divider(polarity):
    # R1 10 kΩ, R2 2.2 kΩ: RTH = 1.8 kΩ against (β+1)RE = 201 kΩ.  Halving β
    # lowers IE by RTH/((β+1)RE) growing from 0.9 % to 1.8 % and IC/IE by
    # 0.5 %: about 1.5 % in all, well inside 10 %.
    d = _design(polarity=polarity, bias__r1=10e3, bias__r2=2.2e3, stage__re1=0.0,
                stage__re2=1e3, stage__rc=3.6e3)
    f = analyse(d)
    assert f.region == "active"
    assert abs(f.ic_beta_half / f.ic - 1) < 0.05
    assert abs(f.ic_beta_double / f.ic - 1) < 0.05
    assert "BETA-DEPENDENT" not in {w.code for w in f.warnings}


# ---------------------------------------------------------- supply safety
@pytest.mark.parametrize("topology", TOPOLOGIES)
def test_hazardous_voltage_above_60_v(topology):
    # 60 V DC: conservative common practice (IEC 60598-1 §8.2.3; ES1 of
    # IEC 62368-1 as commonly cited) -- see REFERENCES.md "Electrical safety".
    d = _design(topology, supply__vcc=61.0)
    messages = _messages(d, "HAZARDOUS-VOLTAGE")
    assert len(messages) == 1
    assert "local codes" in messages[0]
    assert "licensed practice" in messages[0]


@pytest.mark.parametrize("vcc", [59.0, 60.0])
@pytest.mark.parametrize("topology", TOPOLOGIES)
def test_no_hazard_warning_at_or_below_60_v(topology, vcc):
    # A split supply is judged rail to rail: vcc − vee.
    split = {"supply.vcc": vcc - 9.0, "supply.vee": -9.0} if topology.endswith("-split") else {"supply.vcc": vcc}
    assert "HAZARDOUS-VOLTAGE" not in _codes(with_values(default_design(topology), split))


@pytest.mark.parametrize("topology", ["common-emitter-split", "emitter-follower-split"])
def test_a_split_supply_is_hazardous_by_its_span(topology):
    # ±31 V: each rail below 60 V, but 62 V between them.
    d = with_values(default_design(topology), {"supply.vcc": 31.0, "supply.vee": -31.0})
    messages = _messages(d, "HAZARDOUS-VOLTAGE")
    assert len(messages) == 1 and "62.0 V rail to rail" in messages[0] and "60 V DC" in messages[0]


def test_every_message_is_one_readable_line():
    cases = [
        _design(stage__rc=100e3), _design(bias__r1=1e6, bias__r2=1e3),
        _design(source__vpk=1.0), _design(transistor__tj_max=20.0),
        _design(transistor__pd_max=1e-3), _design(transistor__vceo=2.0),
        _design(parts__resistor_power=0.5e-3), _design(supply__vcc=61.0),
        _design(bias__r1=1e6, bias__r2=10e6, stage__re1=0.0, stage__re2=100.0, stage__rc=2.2e3),
    ]
    seen = set()
    for d in cases:
        for w in analyse(d).warnings:
            seen.add(w.code)
            assert w.message and "\n" not in w.message
            assert "nan" not in w.message.lower()  # every number in it was computed
    assert seen >= {"Q-SATURATED", "Q-CUTOFF", "HEADROOM-SHORT", "TJ-OVER", "PD-OVER",
                    "VCE-OVER", "R-OVERLOAD", "BETA-DEPENDENT", "HAZARDOUS-VOLTAGE"}


# ---------------------------------------------------- the follower's warnings
def test_a_follower_cut_off_by_a_saturated_gain_stage_is_named():
    # rc far too large saturates q1 with its emitter near ground, so its
    # collector (q2's base) sits near 0.1 V: below a silicon VBE (about
    # 0.6 V, common practice), so q2 cannot conduct.
    d = with_values(default_design("ce-follower"), {"stage.rc": 1e6, "stage.re1": 0.0, "stage.re2": 10.0})
    assert "Q2-CUTOFF" in _codes(d) and "Q-SATURATED" in _codes(d)


def test_a_follower_past_its_rating_is_named():
    # re 47 Ω: q2's base current pulls q1's collector down to about 3.6 V,
    # so IE2 ≈ 3 V/47 Ω ≈ 63 mA at VCE2 ≈ 9 V: about 0.57 W, above the
    # 0.5 W rating; at 40 °C ambient tj = 40 + 0.57·200 ≈ 154 °C > 150 °C.
    d = with_values(default_design("ce-follower"), {"stage.re": 47.0, "load.rl": "open",
                                                   "environment.ambient": 40.0})
    codes = _codes(d)
    assert {"Q2-PD-OVER", "Q2-TJ-OVER"} <= set(codes) and "PD-OVER" not in codes


def test_a_follower_that_clips_first_is_named():
    # Into 600 Ω the follower can pull its output down by only about
    # IE2·(re ‖ rl) ≈ 4.9 mA·375 Ω ≈ 1.8 V before it cuts off, while the
    # gain stage could swing further: asking for 2.2 V peak clips on q2.
    d = with_values(default_design("ce-follower"), {"source.vpk": 0.1})
    messages = _messages(d, "Q2-CLIPS-FIRST")
    assert len(messages) == 1 and "going down" in messages[0] and "cutoff" in messages[0]
    assert "Q2-CLIPS-FIRST" not in _codes(default_design("ce-follower"))  # 10 mV asks for 0.22 V


def test_every_code_a_check_can_raise_is_listed_and_documented():
    """CODES is the list the history reader accepts; each one has its row in
    the README's table, and a Warning_ outside it cannot be made."""
    import pathlib

    from model.analyses.checks import CODES, Warning_

    readme = (pathlib.Path(__file__).resolve().parents[1] / "README.md").read_text(encoding="utf-8")
    table = readme.split("## Warnings", 1)[1].split("\n## ", 1)[0]
    assert all(f"`{code}`" in table for code in CODES)
    with pytest.raises(ValueError):
        Warning_("SMOKE", "not a code")
