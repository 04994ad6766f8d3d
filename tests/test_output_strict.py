"""Machine-readable output is strict for every valid design: `report --json`
is JSON with no NaN or Infinity (RFC 8259, section 6: "Numeric values that
cannot be represented ... such as Infinity and NaN are not permitted"), and
`response --csv` holds finite numbers only.

The designs are drawn from the rules in model/design/fields.py, so a key added
there, or a value it starts to accept (0 or "none" for a capacitor that is
not fitted, "open" for a load), is drawn here without editing this file.
"""

from __future__ import annotations

import contextlib
import dataclasses
import io
import json
import math
import pathlib
import re
import tempfile

import pytest
from hypothesis import HealthCheck, example, given, reject, settings
from hypothesis import strategies as st

from model.analyses.figures import analyse
from model.design.fields import check_value, keys_for, rule_for
from model.design.stage import TOPOLOGIES, default_design, with_values
from model.errors import DesignError
from model.files.designfile import dumps_design
from tui.cli import main
from tui.report import render_response

ROOT = pathlib.Path(__file__).resolve().parents[1]
README = (ROOT / "README.md").read_text(encoding="utf-8")

#: Where each number key is drawn, log-uniform from low to high (or linear
#: where the key is a temperature or exponent), inside its rule's limits.
#: The spans reach past every everyday stage; the rule's own special values
#: (0, "none", "open") are added from the rule itself.
LOG_SPANS = {
    "supply.vcc": (0.5, 200.0), "bias.r1": (100.0, 10e6), "bias.r2": (100.0, 10e6),
    "stage.rc": (10.0, 1e6), "stage.re1": (1.0, 1e5), "stage.re2": (1.0, 1e5), "stage.re": (10.0, 1e6),
    # Down to 1e-24 F: a valid but absurdly small coupling capacitor once put
    # the response's search grid past its highest decade (exit 3).
    "stage.ce": (1e-24, 1.0), "stage.cin": (1e-24, 1.0), "stage.cout": (1e-24, 1.0),
    "source.rs": (1.0, 1e6), "source.vpk": (1e-6, 2.0), "source.freq": (0.1, 1e8),
    "load.rl": (10.0, 1e7), "load.cl": (1e-15, 1e-6),
    "transistor.beta": (5.0, 1000.0), "transistor.beta_r": (0.1, 20.0), "transistor.va": (5.0, 1000.0),
    "transistor.i_s": (1e-16, 1e-12), "transistor.ft": (1e6, 1e10), "transistor.cmu": (1e-13, 1e-10),
    "transistor.vceo": (5.0, 300.0), "transistor.pd_max": (0.05, 50.0), "transistor.theta_ja": (1.0, 500.0),
    "parts.resistor_power": (0.05, 5.0),
    "bias.rf": (100.0, 10e6), "bias.rb": (100.0, 10e6), "stage.cb": (1e-24, 1.0),
    "transistor2.beta": (5.0, 1000.0),
    "transistor.rb": (1.0, 1e4), "transistor.kf": (1e-20, 1e-12),
    "source.noise_low": (0.1, 1e3), "source.noise_high": (1.5e3, 1e7),
}
LINEAR_SPANS = {
    "transistor.tj_max": (100.0, 200.0), "transistor.xti": (2.0, 4.0), "transistor.eg": (1.0, 1.2),
    "transistor.xtb": (0.0, 2.0), "environment.ambient": (-40.0, 85.0), "estimate.vbe": (0.5, 0.8),
    "supply.vee": (-200.0, -0.5), "transistor.af": (0.5, 2.0),
}
#: Keys that are not numbers: drawn from their choices, or left as they are.
NOT_NUMBERS = {"name", "topology", "notes", "transistor.polarity", "parts.series"}


def _accepts(key: str, topology: str, value) -> bool:
    try:
        check_value(key, topology, value)
    except DesignError:
        return False
    return True


def _number(key: str, topology: str):
    if key in LOG_SPANS:
        low, high = LOG_SPANS[key]
        drawn = st.floats(math.log10(low), math.log10(high)).map(lambda x: 10.0 ** x)
    else:
        low, high = LINEAR_SPANS[key]
        drawn = st.floats(low, high)
    specials = [v for v in (0.0, "none", "open") if _accepts(key, topology, v)]
    return st.one_of(drawn, *map(st.just, specials)) if specials else drawn


def _values(topology: str):
    keys = [k for k in keys_for(topology) if k not in NOT_NUMBERS]
    unknown = [k for k in keys if k not in LOG_SPANS and k not in LINEAR_SPANS]
    assert not unknown, f"give these new keys a span here: {unknown}"
    rule = rule_for("transistor.polarity", topology)
    return st.fixed_dictionaries({"transistor.polarity": st.sampled_from(rule.choices),
                                  **{k: _number(k, topology) for k in keys}})


designs = st.sampled_from(TOPOLOGIES).flatmap(lambda t: st.tuples(st.just(t), _values(t)))


def run(*args) -> tuple:
    """(exit status, stdout, stderr) of one in-process command."""
    out, err = io.StringIO(), io.StringIO()
    with contextlib.redirect_stdout(out), contextlib.redirect_stderr(err):
        code = main([str(a) for a in args])
    return code, out.getvalue(), err.getvalue()


def _refuse(token: str):
    raise ValueError(f"{token} in JSON output")


def strict_json(text: str) -> dict:
    return json.loads(text, parse_constant=_refuse)


def csv_rows(text: str) -> list:
    """The sweep's rows as floats (None for an empty cell); every cell written is finite."""
    lines = text.splitlines()
    assert lines[0] == "freq_hz,gain_db,phase_deg,noise_in_v_rthz"
    rows = []
    for line in lines[1:]:
        cells = line.split(",")
        assert len(cells) == 4, line
        row = [float(c) if c else None for c in cells]
        assert row[0] is not None, line  # the frequency is always there
        assert all(math.isfinite(x) for x in row if x is not None), line
        rows.append(row)
    assert rows, "the sweep is empty"
    return rows


def documented_nullable() -> set:
    """The keys the README's table of null figures lists (dotted for nested ones)."""
    table = README.split("### Figures that can be null", 1)[1].split("\n#", 1)[0]
    keys = set()
    for cell in re.findall(r"^\| (.+?) \|", table, flags=re.M):
        keys.update(re.findall(r"`([a-z_.*]+)`", cell))
    return keys


def nulls(data: dict) -> set:
    """Keys whose value is null, dotted for a nested one (hand.re); any
    part's corner alone as f_low_parts.* or f_high_parts.*."""
    found = {k for k, v in data.items() if v is None}
    for key, value in data.items():
        if isinstance(value, dict):
            found |= {f"{key}.{'*' if key.endswith('_parts') else k}" for k, v in value.items() if v is None}
    return found


#: A figure that is not finite is written in words ("unbounded", "none"), never so.
NOT_IN_WORDS = re.compile(r"\b(inf|nan)\b|∞")


def write(folder: str, topology: str, values: dict) -> pathlib.Path:
    path = pathlib.Path(folder) / "design.toml"
    path.write_text(dumps_design(with_values(default_design(topology), values)), encoding="utf-8")
    return path


def check_outputs(path: pathlib.Path) -> dict:
    code, out, err = run("report", path, "--json")
    assert code == 0, err
    data = strict_json(out)
    undocumented = nulls(data) - documented_nullable()
    assert not undocumented, f"null but not in the README's table: {sorted(undocumented)}"
    code, out, err = run("response", path, "--csv")
    assert code == 0, err
    csv_rows(out)
    code, out, err = run("report", path)
    assert code == 0, err
    assert not NOT_IN_WORDS.search(out), NOT_IN_WORDS.search(out).group()
    return data


# A cut-off and a saturated stage of each topology, and a PNP, always tried
# (the region each one really has is checked in the example tests below).
CUT_OFF_CE = ("common-emitter", {"bias.r2": 1000.0})
SATURATED_CE = ("common-emitter", {"bias.r1": 10e3, "bias.r2": 100e3, "stage.rc": 100e3})
CUT_OFF_EF_PNP = ("emitter-follower", {"bias.r2": 100.0, "transistor.polarity": "pnp", "load.rl": "open"})
SATURATED_EF = ("emitter-follower", {"stage.rc": 100e3, "bias.r1": 1e3, "bias.r2": 100e3})


# About 10 s for 120 examples; a fixed sequence (derandomize), so it cannot pass or fail by chance.
@settings(max_examples=120, derandomize=True, database=None, deadline=None,
          suppress_health_check=[HealthCheck.too_slow])
@given(designs)
@example(CUT_OFF_CE)
@example(SATURATED_CE)
@example(CUT_OFF_EF_PNP)
@example(SATURATED_EF)
def test_machine_readable_output_is_strict_for_any_valid_design(drawn):
    topology, values = drawn
    try:
        design = with_values(default_design(topology), values)
    except DesignError:
        # Each value is valid alone, but a rule across keys refuses the
        # combination (cin none with no resistance between the source and
        # the emitter): not a valid design, so nothing to output.
        reject()
    with tempfile.TemporaryDirectory() as folder:
        path = pathlib.Path(folder) / "design.toml"
        path.write_text(dumps_design(design), encoding="utf-8")
        check_outputs(path)


@pytest.mark.parametrize("drawn, region", [
    (CUT_OFF_CE, "cutoff"), (SATURATED_CE, "saturation"),
    (CUT_OFF_EF_PNP, "cutoff"), (SATURATED_EF, "saturation"),
])
def test_cut_off_and_saturated_stages_give_strict_json(tmp_path, drawn, region):
    data = check_outputs(write(str(tmp_path), *drawn))
    assert data["region"] == region


def test_the_reported_cut_off_stage_writes_null_for_its_unbounded_figures(tmp_path):
    # As reported: `stageledger new` and then bias.r2 = 1 kΩ, so VTH = 9 V·1k/57k
    # = 0.16 V, far below a silicon VBE (about 0.6 V, common practice), and no
    # current flows. The hand estimate's re = VT/IE is then unbounded, and
    # Cπ = gm/(2π·ft) − Cμ is floored at 0, so Cπ sets no corner of its own.
    path = tmp_path / "cut.toml"
    assert run("new", path)[0] == 0
    assert run("set", path, "bias.r2=1000")[0] == 0
    code, out, err = run("report", path, "--json")
    assert code == 0 and err == ""
    data = strict_json(out)
    assert data["region"] == "cutoff"
    assert data["hand"]["re"] is None
    assert data["f_high_parts"]["cpi"] is None
    code, text, err = run("report", path)
    assert code == 0
    assert "re (hand) unbounded" in text
    assert "Cπ none" in text
    assert not NOT_IN_WORDS.search(text)


@pytest.mark.parametrize("topology", TOPOLOGIES)
def test_an_open_load_gives_strict_output_and_words(tmp_path, topology):
    # With the load open, nothing is in parallel with rc (or re), so the
    # loaded gain equals the open-circuit one (the definitions in the README).
    path = tmp_path / "open.toml"
    assert run("new", path, "--topology", topology)[0] == 0
    assert run("set", path, "load.rl=open")[0] == 0
    data = check_outputs(path)
    assert data["av_loaded"] == pytest.approx(data["av_open"], rel=1e-9)
    assert data["rout"] is not None  # measured with the load removed anyway


def test_a_zero_gain_point_leaves_its_csv_cell_empty(tmp_path):
    # A real sweep with its gain at one frequency set to exactly 0: its dB
    # (20·log10 0) does not exist, so the cell is empty and the table says so.
    design = with_values(default_design("common-emitter"), {})
    fig = analyse(design)
    gain = fig.response.gain.copy()
    gain[3] = 0.0
    fig = dataclasses.replace(fig, response=dataclasses.replace(fig.response, gain=gain))
    rows = csv_rows(render_response(design, fig, "x.toml", as_csv=True))
    assert len(rows) == len(gain)
    assert rows[3][1] is None
    assert rows[3][0] == pytest.approx(fig.response.freq[3], rel=1e-5)  # written to 6 figures
    assert all(r[1] is not None for i, r in enumerate(rows) if i != 3)
    table = render_response(design, fig, "x.toml", as_csv=False)
    assert not NOT_IN_WORDS.search(table)


@pytest.mark.parametrize("key", ["stage.ce", "stage.cin", "stage.cout"])
def test_a_valid_tiny_coupling_capacitor_is_reported_not_an_internal_error(tmp_path, key):
    # 1e-20 F is valid (any capacitance above 0 is) and its short-circuit
    # corner lies far above 10 THz, the top of the search grid.
    path = tmp_path / "tiny.toml"
    path.write_text(dumps_design(with_values(default_design("common-emitter"), {key: 1e-20})), encoding="utf-8")
    check_outputs(path)


def test_a_base_held_by_a_near_zero_resistance_reports_without_overflow(tmp_path):
    # bias.r2 = 1e-300 Ω is valid: the base sits at ground through it, the
    # stage is cut off, and the Miller input pole's 1/(2π·R·C) overflows to an
    # unbounded corner (null), never a RuntimeWarning (an error under pytest).
    path = tmp_path / "held.toml"
    path.write_text(dumps_design(with_values(default_design("common-emitter"), {"bias.r2": 1e-300})),
                    encoding="utf-8")
    data = check_outputs(path)
    assert data["f_high_miller"] is None
