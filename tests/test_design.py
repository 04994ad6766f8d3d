"""The design model: defaults, every rule's boundary, keys, types and dicts."""

import dataclasses
import datetime
import math

import pytest

from model.design import stage as dm
from model.design.stage import CB, CE, CE_SPLIT, CEF, CF, EF, EF_SPLIT, FIELDS, TOPOLOGIES, default_design, keys_for
from model.errors import DesignError

# (key, topology, rejected, accepted, words the rule must contain). The
# rejected value sits on or just past the limit, the accepted one just inside.
BOUNDARIES = [
    ("supply.vcc", CE, 0.0, 1e-3, "greater than 0 V"),
    ("supply.vcc", EF, 1000.001, 1000.0, "at most 1000 V"),
    ("bias.r1", CE, 0.0, 1e-3, "greater than 0 Ω"),
    ("bias.r2", EF, 0.0, 1e-3, "greater than 0 Ω"),
    ("stage.rc", CE, 0.0, 1e-3, "greater than 0 Ω"),
    ("stage.rc", EF, -1e-3, 0.0, "at least 0 Ω"),
    ("stage.re1", CE, -1e-3, 0.0, "at least 0 Ω"),
    ("stage.re2", CE, -1e-3, 0.0, "at least 0 Ω"),
    # A capacitor may be 0 ("none"): not fitted (tests/test_unfitted_parts.py).
    ("stage.ce", CE, -1e-15, 0.0, "greater than 0 F, or 0 or 'none'"),
    ("stage.re", EF, 0.0, 1e-3, "greater than 0 Ω"),
    ("stage.cin", CE, -1e-15, 0.0, "greater than 0 F, or 0 or 'none'"),
    ("stage.cout", EF, -1e-15, 0.0, "greater than 0 F, or 0 or 'none'"),
    ("source.rs", CE, -1e-3, 0.0, "at least 0 Ω"),
    ("source.vpk", EF, -1e-6, 0.0, "at least 0 V"),
    ("source.freq", CE, 0.0, 1e-3, "greater than 0 Hz"),
    ("load.rl", CE, 0.0, 1e-3, "greater than 0 Ω"),
    ("load.cl", EF, -1e-15, 0.0, "greater than 0 F, or 0 or 'none'"),
    ("transistor.beta", CE, 0.0, 1e-3, "greater than 0"),
    ("transistor.beta_r", CE, 0.0, 1e-3, "greater than 0"),
    ("transistor.va", CE, 0.0, 1e-3, "greater than 0 V"),
    ("transistor.i_s", CE, 0.0, 1e-30, "greater than 0 A"),
    ("transistor.i_s", EF, 1e-6, 0.99e-6, "less than 1 µA"),
    ("transistor.ft", CE, 0.0, 1.0, "greater than 0 Hz"),
    ("transistor.cmu", CE, -1e-15, 0.0, "at least 0 F"),
    ("transistor.vceo", CE, 0.0, 1e-3, "greater than 0 V"),
    ("transistor.pd_max", CE, 0.0, 1e-6, "greater than 0 W"),
    ("transistor.theta_ja", CE, 0.0, 1e-3, "greater than 0 K/W"),
    ("transistor.tj_max", CE, -273.15, -273.0, "greater than -273.15 °C"),
    ("transistor.xti", CE, math.inf, -50.0, "finite"),
    ("transistor.eg", CE, 0.0, 1e-3, "greater than 0 eV"),
    ("transistor.eg", EF, 5.0, 4.99, "less than 5 eV"),
    ("transistor.xtb", CE, math.nan, -3.0, "finite"),
    ("environment.ambient", CE, -273.15, -273.0, "greater than -273.15 °C"),
    ("environment.ambient", EF, 300.5, 300.0, "at most 300 °C"),
    ("parts.resistor_power", CE, 0.0, 1e-3, "greater than 0 W"),
    ("estimate.vbe", CE, 0.0, 1e-3, "greater than 0 V"),
    ("estimate.vbe", EF, 2.0, 1.999, "less than 2 V"),
    ("supply.vee", CE_SPLIT, 0.0, -1e-3, "less than 0 V"),
    ("supply.vee", EF_SPLIT, -1000.001, -1000.0, "at least -1000 V"),
    ("bias.rb", CE_SPLIT, 0.0, 1e-3, "greater than 0 Ω"),
    ("bias.rf", CF, 0.0, 1e-3, "greater than 0 Ω"),
    ("bias.r2", CF, 0.0, 1e-3, "greater than 0 Ω"),
    ("stage.rc", CB, 0.0, 1e-3, "greater than 0 Ω"),
    ("stage.cb", CB, -1e-15, 0.0, "greater than 0 F, or 0 or 'none'"),
    ("transistor2.beta", CEF, 0.0, 1e-3, "greater than 0"),
    ("source.noise_low", CE, -1e-3, 0.0, "greater than 0 Hz, or 'none'"),
    ("source.noise_high", EF, -1e-3, 1e-3, "greater than 0 Hz, or 'none'"),
    ("transistor.rb", CE, -1e-3, 0.0, "at least 0 Ω"),
    ("transistor.rb", EF, 1.000001e6, 1e6, "at most 1e+06 Ω"),
    ("transistor.kf", CE, -1e-30, 0.0, "at least 0"),
    ("transistor.af", CE, 0.0, 1e-3, "greater than 0"),
    ("transistor.af", EF, 4.001, 4.0, "at most 4"),
]
CHOICES = [
    ("transistor.polarity", "nnp", ("npn", "pnp"), "'npn' or 'pnp'"),
    ("parts.series", "E192", ("E6", "E12", "E24", "E48", "E96"), "'E24'"),
]
NUMBER_KEYS = [(k, t) for t in TOPOLOGIES for k in keys_for(t) if FIELDS[k].rules[t].kind == "number"]
WRONG_TYPES = [True, [1.0], {"value": 1.0}, None, datetime.date(2024, 1, 1), "4q7", "", "-inf"]


@pytest.mark.parametrize("topology", TOPOLOGIES)
def test_defaults_validate_and_use_only_their_topology_keys(topology):
    design = default_design(topology)
    assert dm.validate(design) == design
    assert design.topology == topology
    assert set(dm.design_to_dict(design)["stage"]) == {
        k.split(".")[1] for k in keys_for(topology) if k.startswith("stage.")
    }


def test_unknown_default_topology_is_refused():
    with pytest.raises(DesignError, match="topology.*'common-emitter'.*'emitter-follower-split'"):
        default_design("common-collector")


def test_every_number_rule_has_a_boundary_case():
    # A (key, topology) is covered when the same key is tested under a topology with the same rule.
    covered = {(k, t) for k, t, *_ in BOUNDARIES}
    uncovered = [
        (k, t) for k, t in NUMBER_KEYS
        if not any(ck == k and FIELDS[k].rules[ct] == FIELDS[k].rules[t] for ck, ct in covered)
    ]
    assert uncovered == []


@pytest.mark.parametrize("key, topology, rejected, accepted, words", BOUNDARIES)
def test_rule_boundary(key, topology, rejected, accepted, words):
    design = default_design(topology)
    with pytest.raises(DesignError) as caught:
        dm.with_value(design, key, rejected)
    assert caught.value.field == key
    assert words in caught.value.rule
    assert key in str(caught.value)
    changed = dm.with_value(design, key, accepted)
    assert dm.get_value(changed, key) == pytest.approx(accepted, rel=1e-12, abs=0.0)


@pytest.mark.parametrize("key, topology", NUMBER_KEYS)
@pytest.mark.parametrize("bad", WRONG_TYPES, ids=repr)
def test_number_keys_refuse_wrong_types(key, topology, bad):
    with pytest.raises(DesignError) as caught:
        dm.with_value(default_design(topology), key, bad)
    assert caught.value.field == key
    if bad == "4q7":  # a misspelt number: only the spelling rule it broke (issue 15)
        assert caught.value.rule == "unknown prefix 'q'"
    else:
        assert FIELDS[key].rules[topology].text in caught.value.rule


@pytest.mark.parametrize("key, topology", NUMBER_KEYS)
def test_number_keys_refuse_nan_and_huge_integers(key, topology):
    for bad in (math.nan, -math.inf, 10**400):
        with pytest.raises(DesignError):
            dm.with_value(default_design(topology), key, bad)


@pytest.mark.parametrize("key, bad, good, words", CHOICES)
def test_choice_keys(key, bad, good, words):
    design = default_design()
    with pytest.raises(DesignError, match=words):
        dm.with_value(design, key, bad)
    with pytest.raises(DesignError):
        dm.with_value(design, key, 1)
    for choice in good:
        assert dm.get_value(dm.with_value(design, key, choice), key) == choice
        # Hand-typed case is forgiven, and stored the canonical way.
        assert dm.get_value(dm.with_value(design, key, choice.swapcase()), key) == choice


@pytest.mark.parametrize("text, value", [
    ("4k7", 4.7e3), ("2.2k", 2.2e3), ("4.7kΩ", 4.7e3), ("2M2", 2.2e6), ("R47", 0.47), ("56000", 56e3),
])
def test_resistances_take_si_and_rkm_strings(text, value):
    design = dm.with_value(default_design(), "bias.r1", text)
    assert design.bias.r1 == pytest.approx(value, rel=1e-12)


@pytest.mark.parametrize("key, text, value", [
    ("stage.ce", "100n", 100e-9), ("stage.cin", "10µ", 10e-6), ("stage.cout", "4.7uF", 4.7e-6),
    ("source.freq", "1kHz", 1e3), ("transistor.eg", "1.12", 1.12), ("environment.ambient", "-10", -10.0),
])
def test_other_units_take_strings(key, text, value):
    assert dm.get_value(dm.with_value(default_design(), key, text), key) == pytest.approx(value, rel=1e-12)


def test_string_in_the_wrong_unit_is_refused():
    with pytest.raises(DesignError, match="bias.r1") as caught:
        dm.with_value(default_design(), "bias.r1", "4.7kV")
    # A number in another unit breaks only the unit rule (issue 15: no limit that does not apply).
    assert caught.value.rule == "unit 'V' does not match the expected 'Ω'"


@pytest.mark.parametrize("value", ["open", " Open ", math.inf, "inf"])
def test_load_can_be_open(value):
    assert dm.with_value(default_design(), "load.rl", value).load.rl == math.inf


def test_open_is_only_for_the_load():
    with pytest.raises(DesignError, match="stage.rc"):
        dm.with_value(default_design(), "stage.rc", "open")
    with pytest.raises(DesignError, match="load.rl"):
        dm.with_value(default_design(), "load.rl", "-inf")


def test_integers_are_stored_as_floats():
    design = dm.with_value(default_design(), "supply.vcc", 12)
    assert type(design.supply.vcc) is float
    assert design.supply.vcc == pytest.approx(12.0, rel=1e-15)


def test_typo_key_suggests_the_right_one():
    with pytest.raises(DesignError, match="did you mean stage.rc") as caught:
        dm.with_value(default_design(), "stage.rcc", 1e3)
    assert caught.value.field == "stage.rcc"


@pytest.mark.parametrize("topology, typo, meant", [
    (CE, "stage.rx", "stage.rc"),  # not stage.re, which a common-emitter design refuses
    (EF, "stage.rx", "stage.re"),
    (CF, "bias.rff", "bias.rf"),
])
def test_a_typo_is_matched_only_to_keys_the_topology_has(topology, typo, meant):
    with pytest.raises(DesignError) as caught:
        dm.with_value(default_design(topology), typo, "10k")
    assert caught.value.rule.endswith(f"did you mean {meant}?")
    dm.with_value(default_design(topology), meant, "10k")  # the suggestion is accepted


@pytest.mark.parametrize("topology", TOPOLOGIES)
@pytest.mark.parametrize("typo", ["stage.rx", "stage.ree", "bias.rff", "supply.vea", "transistor2.betta",
                                  "stage.cbb", "bias.rbb"])
def test_every_suggestion_is_a_key_of_the_design(topology, typo):
    with pytest.raises(DesignError) as caught:
        dm.with_value(default_design(topology), typo, "10k")
    suggested = caught.value.rule.partition("did you mean ")[2].removesuffix("?")
    assert not suggested or suggested in keys_for(topology), caught.value.rule


def test_a_typo_of_a_table_is_matched_only_to_tables_the_topology_has():
    with pytest.raises(DesignError) as caught:
        dm.design_from_dict({"format": 1, "transistor3": {"beta": 100}})
    assert "did you mean transistor?" in caught.value.rule
    assert "transistor2" not in caught.value.rule


@pytest.mark.parametrize("text, reason", [
    ("10meg", "'meg' is not accepted; write M for mega (m is milli)"),
    ("4q7", "unknown prefix 'q'"),
    ("1.2.3", "two decimal points"),
    ("1e3k", "both an exponent and a prefix; use one of them"),
    ("10nF", "unit 'F' does not match the expected 'Ω'"),
])
def test_a_misspelt_number_reports_only_the_spelling_rule(text, reason):
    """The value's limits are not broken by a misspelling, so they are not named."""
    with pytest.raises(DesignError) as caught:
        dm.with_value(default_design(), "stage.rc", text)
    assert caught.value.rule == reason


@pytest.mark.parametrize("text, reason", [
    ("abc", "not a number with an SI prefix or RKM code"), ("inf", "an infinite value is not allowed here"),
    ("1e999", "too large to represent"), ("nan", "nan is not a value"),
])
def test_no_number_at_all_reports_what_is_wrong_then_the_limits(text, reason):
    with pytest.raises(DesignError) as caught:
        dm.with_value(default_design(), "stage.rc", text)
    limits = dm.rule_for("stage.rc", CE).text
    assert caught.value.rule.startswith(reason) and caught.value.rule.endswith("; " + limits)


@pytest.mark.parametrize("topology, key, own", [
    (CE, "stage.re", "rc, re1, re2, ce, cin, cout"),
    (EF, "stage.re1", "rc, re, cin, cout"),
    (EF, "stage.ce", "rc, re, cin, cout"),
])
def test_key_of_the_other_topology_is_refused(topology, key, own):
    with pytest.raises(DesignError, match=topology) as caught:
        dm.with_value(default_design(topology), key, 1e3)
    assert own in caught.value.rule
    with pytest.raises(DesignError):
        dm.get_value(default_design(topology), key)


def test_text_keys():
    design = dm.with_values(default_design(), {"name": "Bench test", "notes": "two\nlines"})
    assert (design.name, design.notes) == ("Bench test", "two\nlines")
    for bad in ("two\nlines", "tab\there", 5):
        with pytest.raises(DesignError, match="name"):
            dm.with_value(design, "name", bad)
    with pytest.raises(DesignError, match="notes"):
        dm.with_value(design, "notes", ["a"])


def test_a_new_topology_keeps_the_shared_keys_and_starts_the_rest():
    design = dm.with_values(default_design(CE), {"supply.vcc": 15.0, "bias.r1": 68e3})
    follower = dm.with_value(design, "topology", EF)
    assert follower.topology == EF
    assert (follower.supply.vcc, follower.bias.r1) == (15.0, 68e3)
    assert follower.stage.re == default_design(EF).stage.re
    # Back again: the keys only a common-emitter stage has start from its
    # defaults (the ledger, not the model, remembers what they were).
    back = dm.with_value(follower, "topology", CE)
    assert back.stage.re1 == default_design(CE).stage.re1 and back.supply.vcc == 15.0


def test_a_new_topology_refuses_a_key_it_lacks_set_alongside():
    with pytest.raises(DesignError, match="stage.re1"):
        dm.with_values(default_design(CE), {"topology": EF, "stage.re1": 100.0})


def test_with_values_sets_several_at_once():
    design = dm.with_values(default_design(), {"bias.r1": "47k", "bias.r2": 8.2e3, "supply.vcc": "12"})
    assert (design.bias.r1, design.bias.r2) == pytest.approx((47e3, 8.2e3), rel=1e-12)
    assert design.supply.vcc == pytest.approx(12.0, rel=1e-12)


def test_with_values_is_all_or_nothing():
    design = default_design()
    with pytest.raises(DesignError, match="bias.r2"):
        dm.with_values(design, {"bias.r1": 47e3, "bias.r2": -1.0})
    assert design == default_design()


@pytest.mark.parametrize("topology, attr", [(EF, "re1"), (EF, "ce"), (CE, "re")])
def test_validate_refuses_values_in_unused_stage_fields(topology, attr):
    design = default_design(topology)
    odd = dataclasses.replace(design, stage=dataclasses.replace(design.stage, **{attr: 1.0}))
    article = "an" if topology == EF else "a"  # English: "an" before a vowel sound
    with pytest.raises(DesignError, match=f"stage.{attr}.*not used by {article} {topology} design"):
        dm.validate(odd)


def test_validate_refuses_a_wrong_table_type():
    with pytest.raises(DesignError, match="must be a Supply"):
        dm.validate(dataclasses.replace(default_design(), supply=9.0))


def test_validate_refuses_a_bad_topology():
    with pytest.raises(DesignError, match="topology"):
        dm.validate(dataclasses.replace(default_design(), topology="cascode"))


def test_long_values_are_cut_in_messages():
    with pytest.raises(DesignError) as caught:
        dm.with_value(default_design(), "bias.r1", "x" * 5000)
    assert len(str(caught.value)) < 300


def test_design_to_dict_layout():
    data = dm.design_to_dict(dm.with_value(default_design(EF), "load.rl", "open"))
    assert list(data)[:4] == ["format", "name", "topology", "notes"]
    assert data["format"] == 1
    # A table no key of the topology uses (transistor2 here) is left out.
    assert list(data)[4:] == [t for t in dm.TABLES if t != "transistor2"]
    assert data["load"]["rl"] == "open"
    assert list(data["stage"]) == ["rc", "re", "cin", "cout"]
    numbers = [v for t in dm.TABLES if t in data for v in data[t].values() if not isinstance(v, str)]
    assert numbers and all(type(v) is float for v in numbers)


@pytest.mark.parametrize("topology", TOPOLOGIES)
def test_dict_round_trip(topology):
    design = dm.with_value(default_design(topology), "load.rl", math.inf)
    assert dm.design_from_dict(dm.design_to_dict(design)) == design


def test_missing_keys_and_tables_take_the_defaults():
    assert dm.design_from_dict({"format": 1, "topology": EF}) == default_design(EF)
    partial = dm.design_from_dict({"format": 1, "bias": {"r1": "47k"}})
    assert partial == dm.with_value(default_design(CE), "bias.r1", 47e3)


@pytest.mark.parametrize("data, field, words", [
    ({}, "format", "missing"),
    ({"format": 2}, "format", "must be 1"),
    ({"format": True}, "format", "must be 1"),
    ({"format": 1.0}, "format", "must be 1"),
    ({"format": "1"}, "format", "must be 1"),
    ({"format": 1, "topology": "cascode"}, "topology", "'common-emitter' or"),
    ({"format": 1, "topology": 3}, "topology", "'common-emitter' or"),
    ({"format": 1, "titel": "x"}, "titel", "did you mean"),
    ({"format": 1, "supplies": {"vcc": 9}}, "supplies", "not a design key or table"),
    ({"format": 1, "supply": 9}, "supply", "must be a table"),
    ({"format": 1, "stage": {"rcc": 1e3}}, "stage.rcc", "did you mean stage.rc"),
    ({"format": 1, "stage": {"re": 1e3}}, "stage.re", "common-emitter design"),
    ({"format": 1, "topology": EF, "stage": {"re2": 1e3}}, "stage.re2", "emitter-follower design"),
    ({"format": 1, "bias": {"r1": 0}}, "bias.r1", "greater than 0 Ω"),
    ({"format": 1, "bias": {"r1": [1]}}, "bias.r1", "must be a number"),
    ({"format": 1, "bias": {"r1": {"a": 1}}}, "bias.r1", "must be a number"),
    ({"format": 1, "bias": {"r1": False}}, "bias.r1", "must be a number"),
    ({"format": 1, "supply": {"vcc": math.inf}}, "supply.vcc", "at most 1000 V"),
    ({"format": 1, "name": 7}, "name", "text"),
    ({"format": 1, "notes": ["a"]}, "notes", "text"),
])
def test_dict_errors_name_file_key_value_and_rule(data, field, words):
    with pytest.raises(DesignError) as caught:
        dm.design_from_dict(data, path="bench/amp.toml")
    err = caught.value
    assert (err.field, err.path) == (field, "bench/amp.toml")
    assert words in err.rule
    assert str(err).startswith(f"bench/amp.toml: {field} = ")


def test_dict_errors_without_a_path_still_name_the_key():
    with pytest.raises(DesignError, match=r"^bias.r2 = -5: must be greater than 0 Ω$"):
        dm.design_from_dict({"format": 1, "bias": {"r2": -5}})
