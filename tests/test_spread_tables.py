"""The [tolerance] and [spec] tables: reading, writing, the rules each entry
keeps, and their changes as ledger entries like any other key."""

from __future__ import annotations

import math
import tomllib

import pytest
from hypothesis import given
from hypothesis import strategies as st

from model.design.spread_tables import SPEC_UNITS, Limit, Tolerance
from model.design.stage import default_design, get_value, with_values
from model.errors import DesignError
from model.files.designfile import dumps_design, loads_design, read_document
from model.files.ledger import changes_between
from model.files.session import DesignSession, create
from tui.cli import main

SPREAD = {
    "tolerance.resistors": "1 %", "tolerance.capacitors": 0.2, "tolerance.beta": "100..400",
    "tolerance.i_s": [0.5, 2.0], "tolerance.ambient": "-10..50", "tolerance.distribution": "normal",
    "tolerance.parts.stage.rc": 0.05, "spec.av_loaded": [-12, -8], "spec.swing_down": "1..none",
    "spec.f_high": "20k..none", "spec.tj": ["none", 100], "spec.av_source": ["18 dB", "22 dB"],
    "spec.thd": "none..1 %",
}


def test_every_entry_is_read_as_the_issue_writes_it():
    d = with_values(default_design(), SPREAD)
    t = d.tolerance
    assert (t.resistors, t.capacitors, t.beta, t.i_s, t.ambient, t.distribution) == (
        0.01, 0.2, (100.0, 400.0), (0.5, 2.0), (-10.0, 50.0), "normal")
    assert t.relative("stage.rc") == 0.05 and t.relative("bias.r1") == 0.01 and t.relative("stage.ce") == 0.2
    assert t.relative("load.rl") == 0.0  # the load is not a board part unless named
    limits = {s.key: s for s in d.spec}
    assert limits["av_loaded"] == Limit("av_loaded", -12.0, -8.0)
    assert limits["f_high"] == Limit("f_high", 20e3, None)
    assert limits["av_source"] == Limit("av_source", 18.0, 22.0, db=True)
    assert limits["thd"] == Limit("thd", None, 0.01)


def test_file_round_trip_and_hand_written_dotted_part_keys():
    d = with_values(default_design(), SPREAD)
    assert loads_design(dumps_design(d)) == d
    text = dumps_design(default_design()) + (
        "\n[tolerance]\nresistors = 0.01\nbeta = [100, 400]\n\n[tolerance.parts]\nstage.rc = 0.05\n"
        "\n[spec]\nav_loaded = [-12, -8]\ngain_at_freq = [\"20 dB\", \"none\"]\n")
    hand = loads_design(text)
    assert hand.tolerance.parts == (("stage.rc", 0.05),)
    assert get_value(hand, "spec.gain_at_freq") == Limit("gain_at_freq", 20.0, None, db=True)
    # The file it writes back is valid TOML holding the same tables.
    data = tomllib.loads(dumps_design(hand))
    assert data["tolerance"]["parts"] == {"stage": {"rc": 0.05}}
    assert data["spec"]["gain_at_freq"] == ["20 dB", "none"]


def test_a_design_without_the_tables_writes_none():
    assert "tolerance" not in dumps_design(default_design())
    assert "[spec]" not in dumps_design(default_design())


@pytest.mark.parametrize("key, value, words", [
    ("spec.av_loaded", "-8..-12", "min above max"),
    ("spec.av_loaded", [-8], "[min, max]"),
    ("spec.av_loaded", "none..none", "no limit at either end"),
    ("spec.av_loaded", "20 dB..-8", "one limit in dB"),
    ("spec.rin", "10 dB..none", "only the gains do"),
    ("spec.region", "1..2", "not a figure a spec can bound"),
    ("spec.rc", "1..2", "not a figure a spec can bound"),
    ("tolerance.resistors", 0.6, "from 0 to 0.5"),
    ("tolerance.resistors", -0.01, "from 0 to 0.5"),
    ("tolerance.resistors", "lots", "from 0 to 0.5"),
    ("tolerance.beta", "400..100", "min ≤ max"),
    ("tolerance.beta", "0..100", "above 0"),
    ("tolerance.beta", 200, "[min, max]"),
    ("tolerance.i_s", "0.5..200", "at most 100"),
    ("tolerance.ambient", "-300..20", "-273.15"),
    ("tolerance.distribution", "triangular", "'uniform' or 'normal'"),
    ("tolerance.parts.stage.re", 0.1, "names no part"),
    ("tolerance.parts.transistor.beta", 0.1, "names no part"),
    ("tolerance.colour", 0.1, "not a tolerance key"),
])
def test_bad_entries_name_key_value_and_rule(key, value, words):
    with pytest.raises(DesignError) as err:
        with_values(default_design(), {key: value})
    assert err.value.field == key and words in err.value.rule


def test_a_bad_entry_in_a_file_exits_2_naming_file_key_and_rule(tmp_path, capsys):
    path = tmp_path / "d.toml"
    path.write_text(dumps_design(default_design()) + "\n[spec]\nav_loaded = [-8, -12]\n", encoding="utf-8")
    before = path.read_bytes()
    assert main(["spread", str(path)]) == 2
    err = capsys.readouterr().err.strip()
    assert err.count("\n") == 0 and str(path) in err and "spec.av_loaded" in err and "min above max" in err
    assert main(["set", str(path), "stage.rc=10k"]) == 2
    assert path.read_bytes() == before


def test_a_table_that_is_not_a_table(tmp_path):
    with pytest.raises(DesignError) as err:
        loads_design(dumps_design(default_design()).replace("format = 1\n", "format = 1\ntolerance = 3\n"))
    assert err.value.field == "tolerance"


@given(low=st.floats(-100, 100), width=st.floats(0, 100), db=st.booleans(), key=st.sampled_from(("av_loaded", "av_open")))
def test_any_valid_limit_survives_the_file(low, width, db, key):
    shown = (lambda x: f"{x!r} dB") if db else (lambda x: x)
    d = with_values(default_design(), {f"spec.{key}": [shown(low), shown(low + width)]})
    again = loads_design(dumps_design(d))
    got = get_value(again, f"spec.{key}")
    assert got.db == db
    assert math.isclose(got.low, low, rel_tol=1e-12, abs_tol=1e-300)
    assert math.isclose(got.high, low + width, rel_tol=1e-12, abs_tol=1e-300)


def test_changes_to_the_tables_are_flat_keys_with_none_for_absent():
    a = default_design()
    b = with_values(a, {"spec.av_loaded": "-12..-8", "tolerance.parts.stage.rc": 0.05})
    assert {(c.key, str(c.old), str(c.new)) for c in changes_between(a, b)} == {
        ("spec.av_loaded", "none", "[-12.0, -8.0]"), ("tolerance.parts.stage.rc", "none", "0.05")}
    back = changes_between(b, a)
    assert {c.key for c in back} == {"spec.av_loaded", "tolerance.parts.stage.rc"}
    assert all(c.new == "none" for c in back)


def test_set_undo_and_redo_of_a_spec_are_logged_and_replay(tmp_path, capsys):
    path = tmp_path / "d.toml"
    create(str(path), default_design())
    assert main(["set", str(path), "spec.av_loaded=-12..-8", "tolerance.beta=100..400"]) == 0
    out = capsys.readouterr().out
    assert "spec.av_loaded: none → -12..-8" in out and "yield" in out
    doc = read_document(path)
    assert get_value(doc.design, "spec.av_loaded") == Limit("av_loaded", -12.0, -8.0)
    entry = doc.history[-1]
    assert "yield" in entry.after and "yield" not in entry.before
    assert main(["undo", str(path)]) == 0
    assert read_document(path).design.spec == ()
    assert main(["redo", str(path)]) == 0
    redone = read_document(path)
    assert redone.design.tolerance.beta == (100.0, 400.0)
    with DesignSession(str(path), lock=False) as s:
        assert s.hand_edits == ()


def test_a_history_change_with_a_bad_range_is_refused_naming_the_entry(tmp_path):
    path = tmp_path / "d.toml"
    create(str(path), default_design())
    with DesignSession(str(path)) as s:
        s.commit({"spec.av_loaded": "-12..-8"})
    head, found, tail = path.read_text(encoding="utf-8").rpartition("-8.0,\n")
    assert found  # the last one is the history's, after the design's own [spec]
    text = head + "-80.0,\n" + tail
    path.write_text(text, encoding="utf-8")
    with pytest.raises(DesignError) as err:
        read_document(path)
    assert "changes[1]" in err.value.field and "min above max" in err.value.rule


def test_every_spec_key_is_a_figure_the_report_has():
    from model.analyses.figures import FIGURE_KEYS
    from model.analyses.noise_figures import Noise

    # The noise figures are in the report's "noise" object; the rest at its top level.
    noise = {"en_total", "nf_db", "snr_db"}
    assert set(SPEC_UNITS) - noise <= set(FIGURE_KEYS)
    assert noise <= set(Noise.__dataclass_fields__)


def test_the_default_tables_are_empty():
    d = default_design()
    assert d.tolerance == Tolerance() and d.spec == ()
