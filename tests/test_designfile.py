"""Reading design files: round trips, every way a file can be bad, the demos."""

import math
import os
import pathlib
import time
import tomllib

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from model import analyse
from model.design.stage import CB, FIELDS, TABLES, TOPOLOGIES, WITH_BYPASS, default_design, keys_for, with_values
from model.errors import DesignError, DesignFileError, StageledgerError
from model.files import designfile as df
from model.files.designfile import dumps_design, loads_design, read_design

ROOT = pathlib.Path(__file__).resolve().parents[1]
DEMOS = sorted((ROOT / "saved_designs").glob("*.toml"))


def _values_for(rule):
    """Values that satisfy a number, choice or text rule, drawn from the rule itself."""
    if rule.kind == "choice":
        return st.sampled_from(rule.choices)
    if rule.kind == "text":
        banned = ("Cc", "Zl", "Zp", "Cs") if rule.one_line else ("Cs",)
        return st.text(st.characters(blacklist_categories=banned), max_size=40)
    numbers = st.floats(
        min_value=None if math.isinf(rule.low) else rule.low,
        max_value=None if math.isinf(rule.high) else rule.high,
        exclude_min=rule.low_strict and not math.isinf(rule.low),
        exclude_max=rule.high_strict and not math.isinf(rule.high),
        allow_nan=False, allow_infinity=False,
    )
    return st.one_of(numbers, st.just(math.inf)) if rule.open_ok else numbers


@st.composite
def designs(draw, topology, open_load):
    values = {
        key: draw(_values_for(FIELDS[key].rules[topology]))
        for key in keys_for(topology) if key not in ("topology", "load.rl")
    }
    rl = _values_for(FIELDS["load.rl"].rules[topology]).filter(lambda r: math.isinf(r) == open_load)
    values["load.rl"] = draw(rl)
    low, high = values["source.noise_low"], values["source.noise_high"]
    if low > 0 and high > 0 and not low < high:
        values["source.noise_high"] = "none"  # the band runs from low to high (a rule across keys)
    if (topology in WITH_BYPASS and values["source.rs"] == values["stage.re1"] == values["stage.re2"] == 0) or (
            topology == CB and values["source.rs"] == 0):
        # The rules across keys: with no resistance anywhere, a cin not
        # fitted would wire the source across the junction (model.design.stage).
        values["stage.cin"] = draw(_values_for(FIELDS["stage.cin"].rules[topology]).filter(lambda c: c > 0))
    return with_values(default_design(topology), values)


def _write(tmp_path, content, name="amp.toml"):
    path = tmp_path / name
    path.write_bytes(content if isinstance(content, bytes) else content.encode("utf-8"))
    return path


@pytest.mark.parametrize("open_load", [False, True], ids=["finite-load", "open-load"])
@pytest.mark.parametrize("topology", TOPOLOGIES)
@settings(max_examples=150)
@given(data=st.data())
def test_text_round_trip(topology, open_load, data):
    design = data.draw(designs(topology, open_load))
    assert math.isinf(design.load.rl) == open_load
    assert loads_design(dumps_design(design)) == design


@pytest.mark.parametrize("topology", TOPOLOGIES)
def test_file_round_trip(tmp_path, topology):
    design = default_design(topology)
    path = _write(tmp_path, dumps_design(design))
    assert read_design(path) == design
    assert read_design(str(path)) == design


def test_dumps_starts_with_the_format():
    assert dumps_design(default_design()).startswith("format = 1\n")


@pytest.mark.parametrize("content, line, words", [
    ("format = 1\nname = \n", 2, "not valid TOML"),
    ("format = 1\n\n[bias\nr1 = 1\n", 3, "not valid TOML"),
    ("format = 1\nname = 'a'\nname = 'b'\n", 3, "cannot overwrite"),
    ("\ufeffformat = 1\n", 1, "byte order mark"),
    ("format = 1\nnotes = '" + "x" * 20_000 + "'\n", 2, "longer than 10000"),
    ("format = 1\na = " + "[" * 5000 + "\n", None, "nested too deeply"),
    ("format = 1\nb = " + "{a = " * 1500 + "\n", None, "nested too deeply"),
    ("format = 1\n\nx = 1" + "0" * 5000 + "\n", 3, "too many digits"),
], ids=["no-value", "open-header", "key-twice", "bom", "long-line", "deep-arrays", "deep-tables", "huge-int"])
def test_unparseable_text(tmp_path, content, line, words):
    path = _write(tmp_path, content)
    with pytest.raises(DesignFileError) as caught:
        read_design(path)
    err = caught.value
    assert (err.path, err.line) == (str(path), line)
    assert words in err.reason
    assert str(err).startswith(f"{path}:{line}: " if line else f"{path}: ")


def test_malformed_toml_reports_line_and_column(tmp_path):
    path = _write(tmp_path, "format = 1\n[supply]\nvcc = = 9\n")
    with pytest.raises(DesignFileError, match=r"amp.toml:3: not valid TOML: .*\(column \d+\)"):
        read_design(path)


def test_invalid_utf8_names_the_line(tmp_path):
    path = _write(tmp_path, b"format = 1\nname = 'caf\xe9'\n")
    with pytest.raises(DesignFileError, match=r"amp.toml:2: is not valid UTF-8 text \(byte 0xe9\)"):
        read_design(path)


def test_oversized_file_is_refused_before_parsing(tmp_path):
    line = "# " + "x" * 98 + "\n"
    path = _write(tmp_path, "format = 1\n" + line * (df.MAX_FILE_BYTES // len(line) + 1))
    with pytest.raises(DesignFileError, match="larger than"):
        read_design(path)


def test_oversized_text_is_refused():
    with pytest.raises(DesignFileError, match="larger than"):
        loads_design("#" * (df.MAX_FILE_BYTES + 1))


def test_file_just_under_the_cap_loads(tmp_path):
    text = dumps_design(default_design())
    line = "# " + "x" * 98 + "\n"
    padding = line * ((df.MAX_FILE_BYTES - len(text)) // len(line))
    path = _write(tmp_path, text + padding)
    assert path.stat().st_size <= df.MAX_FILE_BYTES
    assert read_design(path) == default_design()


def test_missing_file(tmp_path):
    with pytest.raises(DesignFileError, match=r"nothere.toml: no such file$"):
        read_design(tmp_path / "nothere.toml")


def test_missing_folder(tmp_path):
    _write(tmp_path, "x", name="plain")
    with pytest.raises(DesignFileError, match="not a directory"):
        read_design(tmp_path / "plain" / "amp.toml")


def test_directory(tmp_path):
    with pytest.raises(DesignFileError, match="is a directory"):
        read_design(tmp_path)


def test_fifo_is_refused_without_blocking(tmp_path):
    fifo = tmp_path / "pipe.toml"
    os.mkfifo(fifo)
    with pytest.raises(DesignFileError, match="not a regular file"):
        read_design(fifo)


def test_nul_in_the_name():
    with pytest.raises(DesignFileError, match="NUL"):
        read_design("amp\0.toml")


@pytest.mark.skipif(os.geteuid() == 0, reason="root reads a mode-000 file anyway")
def test_unreadable_file(tmp_path):
    path = _write(tmp_path, dumps_design(default_design()))
    path.chmod(0)
    try:
        with pytest.raises(DesignFileError, match="permission denied"):
            read_design(path)
    finally:
        path.chmod(0o600)


def test_permission_denied_is_put_in_words(tmp_path, monkeypatch):
    # Stands in for a mode-000 file when the tests run as root.
    path = _write(tmp_path, dumps_design(default_design()))

    def refuse(*args, **kwargs):
        raise PermissionError(13, "Permission denied", str(path))

    monkeypatch.setattr(df, "open", refuse, raising=False)
    with pytest.raises(DesignFileError, match=r"amp.toml: permission denied$"):
        read_design(path)


@pytest.mark.parametrize("content, field, words", [
    ("format = 2\n", "format", "must be 1"),
    ("name = 'x'\n", "format", "missing"),
    ("format = 1\n[stage]\nrcc = 6800.0\n", "stage.rcc", "did you mean stage.rc"),
    ("format = 1\n[stage]\nre = 2200.0\n", "stage.re", "rc, re1, re2, ce, cin, cout"),
    ("format = 1\ntopology = 'emitter-follower'\n[stage]\nce = 1e-6\n", "stage.ce", "rc, re, cin, cout"),
    ("format = 1\n[bias]\nr1 = 0\n", "bias.r1", "greater than 0 Ω"),
    ("format = 1\n[bias]\nr1 = '4q7'\n", "bias.r1", "unknown prefix"),
    ("format = 1\n[bias]\nr1 = true\n", "bias.r1", "must be a number"),
    ("format = 1\n[bias]\nr1 = [1, 2]\n", "bias.r1", "must be a number"),
    ("format = 1\n[bias]\nr1 = 1979-05-27\n", "bias.r1", "must be a number"),
    ("format = 1\n[bias.r1]\nx = 1\n", "bias.r1", "must be a number"),
    ("format = 1\n[supply]\nvcc = nan\n", "supply.vcc", "nan"),
    ("format = 1\n[supply]\nvcc = 1e400\n", "supply.vcc", "at most 1000 V"),
    ("format = 1\n[supply]\nvcc = 1" + "0" * 400 + "\n", "supply.vcc", "too large"),
    ("format = 1\n[load]\nrl = 'closed'\n", "load.rl", "'open'"),
    ("format = 1\n[transistor]\npolarity = 'pnp '\nbeta = -1\n", "transistor.beta", "greater than 0"),
    ("format = 1\n[extra]\n", "extra", "not a design key or table"),
    ("format = 1\nsupply = 9\n", "supply", "must be a table"),
])
def test_rule_errors_name_file_key_value_and_limit(tmp_path, content, field, words):
    path = _write(tmp_path, content)
    with pytest.raises(DesignError) as caught:
        read_design(path)
    err = caught.value
    assert (err.path, err.field) == (str(path), field)
    assert words in err.rule
    assert str(err).startswith(f"{path}: {field} = ")


def test_loads_design_names_the_string():
    with pytest.raises(DesignError, match=r"^<string>: format = 2: "):
        loads_design("format = 2\n")


def test_strings_with_units_load(tmp_path):
    path = _write(tmp_path, "format = 1\n[bias]\nr1 = '4k7'\nr2 = '1.2 kΩ'\n[load]\nrl = 'open'\n")
    design = read_design(path)
    assert (design.bias.r1, design.bias.r2) == pytest.approx((4.7e3, 1.2e3), rel=1e-12)
    assert design.load.rl == math.inf


@given(
    st.lists(st.tuples(st.sampled_from(["replace", "insert", "delete"]),
                       st.integers(min_value=0), st.binary(min_size=1, max_size=8)),
             min_size=1, max_size=6)
)
@settings(max_examples=400, deadline=None, suppress_health_check=[HealthCheck.too_slow])
def test_mutated_files_load_or_fail_cleanly(tmp_path_factory, edits):
    data = bytearray(dumps_design(default_design()).encode("utf-8"))
    for kind, where, chunk in edits:
        at = where % (len(data) + 1)
        if kind == "replace":
            data[at:at + len(chunk)] = chunk
        elif kind == "insert":
            data[at:at] = chunk
        else:
            del data[at:at + len(chunk)]
    path = tmp_path_factory.mktemp("fuzz") / "amp.toml"
    path.write_bytes(bytes(data))
    # CPU time, not wall time: a runaway parse fails, a busy machine does not.
    start = time.process_time()
    try:
        read_design(path)
    except StageledgerError as err:
        assert isinstance(err, (DesignError, DesignFileError))
        assert str(path) in str(err)
    assert time.process_time() - start < 1.0


def test_there_are_demo_designs():
    assert {p.name for p in DEMOS} >= {"geophone_preamp.toml", "cable_driver.toml", "hydrophone_buoy.toml"}


def test_the_hydrophone_demo_is_the_split_supply_stage_its_notes_describe():
    """The notes' claims, recomputed: DC-coupled on ±6 V, base within a few
    millivolts of ground, about 1.1 mA, gain near −23 V/V, rin near 15 kΩ,
    about 3 V of swing each way, the low corner below the 10 Hz band edge."""
    d = read_design(ROOT / "saved_designs" / "hydrophone_buoy.toml")
    f = analyse(d)
    assert (d.topology, d.supply.vcc, d.supply.vee, d.stage.cin) == ("common-emitter-split", 6.0, -6.0, 0.0)
    assert f.region == "active" and not f.warnings
    assert abs(f.vb) < 0.01 and 1.0e-3 < f.ic < 1.2e-3
    assert -25 < f.av_loaded < -21 and 13e3 < f.rin < 17e3
    assert min(f.swing_up, f.swing_down) > 2.5 and f.f_low < 10.0 and f.f_high > 50e3


@pytest.mark.parametrize("path", DEMOS, ids=lambda p: p.name)
def test_demo_loads_and_writes_every_table(path):
    design = read_design(path)
    raw = tomllib.loads(path.read_text(encoding="utf-8"))
    assert raw["format"] == 1
    assert raw["name"] and raw["notes"].strip()
    # Every design table the topology has keys in, in order, then the
    # optional spread tables if any.
    tables = [t for t in TABLES if any(k.startswith(t + ".") for k in keys_for(design.topology))]
    assert list(raw)[4:4 + len(tables)] == tables
    assert set(list(raw)[4 + len(tables):]) <= {"tolerance", "spec"}
    written = {f"{t}.{k}" for t in tables for k in raw[t]} | {"name", "topology", "notes"}
    assert written == set(keys_for(design.topology))


@pytest.mark.parametrize("path", DEMOS, ids=lambda p: p.name)
def test_demo_is_forward_active_by_hand_estimate(path):
    # Divider Thevenin equivalent and the design's own VBE: the demo must sit
    # well inside forward-active, not near cutoff or saturation.
    # A split-supply demo: the base returns to 0 V through rb, the emitter to vee.
    d = read_design(path)
    vcc, vee, beta = d.supply.vcc, d.supply.vee, d.transistor.beta
    if d.topology.endswith("-split"):
        vth, rth = 0.0, d.bias.rb
    else:
        vth, rth = vcc * d.bias.r2 / (d.bias.r1 + d.bias.r2), d.bias.r1 * d.bias.r2 / (d.bias.r1 + d.bias.r2)
    re = d.stage.re1 + d.stage.re2 if d.topology.startswith("common-emitter") else d.stage.re
    ie = (vth - d.estimate.vbe - vee) / (re + rth / (beta + 1))
    vce = vcc - ie * beta / (beta + 1) * d.stage.rc - (vee + ie * re)
    assert ie > 0
    assert 1.0 < vce < vcc - vee - 1.0
