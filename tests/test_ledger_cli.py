"""The ledger commands on the command line: set, --dry-run, history, diff and
the one-line errors.

Figures shown are read back from the printed text and compared with a fresh
analyse() of the designs before and after, never with copied output.
"""

from __future__ import annotations

import datetime as dt
import json
import math
import pathlib
import re
import subprocess
import sys
import tomllib

import pytest

from model import analyse, read_design
from model.design.stage import TOPOLOGIES, default_design, rule_for, with_values
from model.design.units import parse_value
from model.files.designfile import dumps_design, read_document
from model.files.ledger import HEADLINE
from model.files.session import create
from tui.cli import main

ROOT = pathlib.Path(__file__).resolve().parents[1]
CE, EF = TOPOLOGIES[:2]

# How each headline figure is labelled and in what unit it is printed.
LABEL = {"ic": ("IC", "A"), "vce": ("VCE", "V"), "region": ("region", None),
         "av_loaded": ("av_loaded", "V/V"), "av_source": ("av_source", "V/V"), "rin": ("rin", "Ω"),
         "rout": ("rout", "Ω"), "swing_up": ("swing_up", "V"), "swing_down": ("swing_down", "V"),
         "thd": ("thd", "%"), "p_transistor": ("p_transistor", "W"), "p_supply": ("p_supply", "W"),
         "tj": ("tj", "°C"), "f_low": ("f_low", "Hz"), "f_high": ("f_high", "Hz"),
         "nf_db": ("NF", "dB"), "snr_db": ("SNR", "dB")}

#: The headline figures of a one-transistor stage without specs.
FIGURES = tuple(k for k in HEADLINE if k not in ("yield", "ic2", "vce2", "p_transistor2"))


def plain_file(tmp_path, name="d.toml", topology=CE) -> pathlib.Path:
    path = tmp_path / name
    path.write_text(dumps_design(default_design(topology)), encoding="utf-8")
    return path


def run(*args):
    return subprocess.run([sys.executable, "-m", "tui", *args], capture_output=True, text=True,
                          cwd=ROOT, timeout=120)


def figure_rows(out: str) -> dict:
    """{figure key: [before, after, change]} as printed (columns are 2+ spaces apart)."""
    rows = {}
    by_label = {label: key for key, (label, _) in LABEL.items()}
    for line in out.splitlines():
        cells = re.split(r"\s{2,}", line.strip())
        if cells and cells[0] in by_label and len(cells) >= 3:
            rows[by_label[cells[0]]] = cells[1:]
    return rows


def read_back(key: str, text: str):
    unit = LABEL[key][1]
    if unit is None:
        return text
    number = text.split()[0]
    if unit in ("V/V", "°C", "dB"):
        return float(number)
    if unit == "%":
        return float(number) / 100.0
    return parse_value(text, unit)


def assert_shown(key, text, value):
    got = read_back(key, text)
    if isinstance(value, str):
        assert got == value, key
    elif key == "tj":
        assert abs(got - value) <= 0.051, key  # one decimal
    elif key in ("nf_db", "snr_db"):
        assert abs(got - value) <= 0.0051, key  # two decimals
    else:
        assert math.isclose(got, value, rel_tol=5.1e-3, abs_tol=1e-15), (key, text, value)  # 3 figures


def codes(fig):
    return list(dict.fromkeys(w.code for w in fig.warnings))


def one_error_line(capsys, *needles):
    cap = capsys.readouterr()
    lines = cap.err.strip().splitlines()
    assert cap.out == "" and len(lines) == 1 and "Traceback" not in cap.err, cap.err
    for needle in needles:
        assert needle in lines[0], (needle, lines[0])
    return lines[0]


# -- set -----------------------------------------------------------------------

def test_set_prints_every_figure_before_and_after_with_the_change(tmp_path, capsys):
    path = plain_file(tmp_path)
    before_design = read_design(path)
    assert main(["set", str(path), "stage.rc=10k", "--note", "more gain"]) == 0
    out = capsys.readouterr().out
    before, after = analyse(before_design), analyse(read_design(path))

    assert re.search(r"^  stage\.rc: 6\.8\d* kΩ → 10\.0* kΩ$", out, flags=re.M)
    assert "more gain" in out
    rows = figure_rows(out)
    assert set(rows) == set(FIGURES)
    for key in FIGURES:
        b, a = getattr(before, key), getattr(after, key)
        assert_shown(key, rows[key][0], b)
        assert_shown(key, rows[key][1], a)
        if key.startswith("av_"):
            # Gains change in dB, by magnitude, so a bigger inverting gain reads as more gain.
            shown = rows[key][2]
            assert shown.endswith(" dB")
            assert abs(float(shown.split()[0]) - 20 * math.log10(abs(a) / abs(b))) <= 0.006, key
        elif key == "tj":
            # A temperature moves in kelvin: a per cent of a Celsius reading means nothing.
            shown = rows[key][2]
            assert shown.endswith(" K")
            assert abs(float(shown.split()[0]) - (a - b)) <= 0.051  # to the 0.1 °C tj is shown to
        elif key in ("nf_db", "snr_db"):
            # Already in dB: the change is the difference, to the shown 0.01 dB.
            shown = rows[key][2]
            assert shown.endswith(" dB") and abs(float(shown.split()[0]) - (a - b)) <= 0.0051, key
        elif key != "region":
            shown = rows[key][2]
            assert shown.endswith("%"), key
            if key == "ic":
                # To the resolution of IC as shown (three figures): half a step of its last place.
                places = len(shown.split()[0].partition(".")[2])
                assert abs(float(shown.split()[0]) - 100 * (a - b) / abs(b)) <= 0.51 * 10.0 ** -places
    assert f"saved {path} (entry 2)" in out


def test_set_names_the_warnings_it_raises_and_then_clears(tmp_path, capsys):
    path = plain_file(tmp_path)
    quiet = analyse(read_design(path))
    assert main(["set", str(path), "source.vpk=0.5"]) == 0
    loud = analyse(read_design(path))
    raised = [c for c in codes(loud) if c not in codes(quiet)]
    assert "HEADROOM-SHORT" in raised
    out = capsys.readouterr().out
    assert f"warnings raised: {', '.join(raised)}" in out
    assert "warnings cleared: none" in out
    assert main(["set", str(path), "source.vpk=10m"]) == 0
    out = capsys.readouterr().out
    assert f"warnings cleared: {', '.join(raised)}" in out and "warnings raised: none" in out


def test_dry_run_previews_and_leaves_the_file_byte_identical(tmp_path, capsys):
    for path in (plain_file(tmp_path), tmp_path / "c.toml"):
        if not path.exists():
            create(str(path), default_design(EF))
        before = path.read_bytes()
        key = "bias.r1=47k" if read_design(path).topology == CE else "stage.re=3k3"
        assert main(["set", str(path), key, "--dry-run"]) == 0
        out = capsys.readouterr().out
        assert "preview (not saved)" in out and "saved " + str(path) not in out
        assert key.split("=")[0] + ":" in out and set(figure_rows(out)) == set(FIGURES)
        assert path.read_bytes() == before


def test_several_assignments_in_one_set_are_one_entry(tmp_path, capsys):
    path = plain_file(tmp_path)
    assert main(["set", str(path), "stage.rc=10k", "bias.r1=47k", "load.rl=open"]) == 0
    out = capsys.readouterr().out
    assert "(entry 2)" in out
    h = read_document(path).history
    assert [e.action for e in h] == ["start", "set"]
    assert {c.key for c in h[1].changes} == {"stage.rc", "bias.r1", "load.rl"}
    d = read_design(path)
    assert (d.stage.rc, d.bias.r1, d.load.rl) == (10e3, 47e3, math.inf)


def test_undo_and_redo_print_the_entry_and_save(tmp_path, capsys):
    path = plain_file(tmp_path)
    original = read_design(path)
    assert main(["set", str(path), "stage.rc=10k"]) == 0
    changed = read_design(path)
    capsys.readouterr()
    assert main(["undo", str(path), "--note", "too hot"]) == 0
    out = capsys.readouterr().out
    assert "undo of #2" in out and "too hot" in out and f"saved {path} (entry 3)" in out
    assert read_design(path) == original
    assert main(["redo", str(path)]) == 0
    assert "redo of #3" in capsys.readouterr().out
    assert read_design(path) == changed


# -- history -------------------------------------------------------------------

def _story(tmp_path, capsys) -> pathlib.Path:
    path = plain_file(tmp_path)
    for argv in (["set", str(path), "stage.rc=10k", "--note", "first"],
                 ["set", str(path), "load.rl=open"],
                 ["undo", str(path)], ["redo", str(path)]):
        assert main(argv) == 0
    capsys.readouterr()
    return path


def test_history_prints_every_entry_in_order(tmp_path, capsys):
    path = _story(tmp_path, capsys)
    assert main(["history", str(path)]) == 0
    out = capsys.readouterr().out
    heads = re.findall(r"^#(\d+)  (\d{4}-\d\d-\d\d \d\d:\d\d:\d\d)Z  (\S+)", out, flags=re.M)
    assert [(int(n), a) for n, _, a in heads] == [(1, "start"), (2, "set"), (3, "set"), (4, "undo"), (5, "redo")]
    assert "note: first" in out and "undo of #3" in out and "redo of #4" in out


def test_history_json_is_strict_json_in_order_with_utc_times(tmp_path, capsys):
    path = _story(tmp_path, capsys)
    assert main(["history", str(path), "--json"]) == 0

    def refuse(constant):
        raise AssertionError(f"{constant} is not JSON")

    data = json.loads(capsys.readouterr().out, parse_constant=refuse)
    entries = data["entries"]
    assert [e["entry"] for e in entries] == [1, 2, 3, 4, 5]
    assert data["unlogged_hand_edits"] == []
    raw = tomllib.loads(path.read_text(encoding="utf-8"))["history"]
    for e, r in zip(entries, raw):
        assert e["time"].endswith("Z")
        assert dt.datetime.fromisoformat(e["time"]) == r["time"]
        assert {k: v for k, v in e.items() if k != "time"} == {k: v for k, v in r.items() if k != "time"}
    assert entries[3]["reverses"] == 3 and entries[4]["reverses"] == 4


def test_history_json_lists_unlogged_hand_edits(tmp_path, capsys):
    path = _story(tmp_path, capsys)
    text = path.read_text(encoding="utf-8")
    top, sep, rest = text.partition("\n[[history]]")
    path.write_text(top.replace("vcc = 9.0", "vcc = 10.0") + sep + rest, encoding="utf-8")
    assert main(["history", str(path), "--json"]) == 0
    data = json.loads(capsys.readouterr().out)
    assert data["unlogged_hand_edits"] == [{"key": "supply.vcc", "old": 9.0, "new": 10.0}]


def test_history_of_a_file_without_one(tmp_path, capsys):
    path = plain_file(tmp_path)
    assert main(["history", str(path), "--json"]) == 0
    assert json.loads(capsys.readouterr().out) == {"entries": [], "unlogged_hand_edits": []}


# -- diff ----------------------------------------------------------------------

def test_diff_of_a_file_and_an_earlier_entry(tmp_path, capsys):
    path = _story(tmp_path, capsys)
    assert main(["diff", f"{path}@1", str(path)]) == 0
    out = capsys.readouterr().out
    assert out.splitlines()[0] == f"{path}@1 → {path}"
    assert set(re.findall(r"^  (\S+): .* → ", out, flags=re.M)) == {"stage.rc", "load.rl"}
    assert set(figure_rows(out)) == set(FIGURES)


def test_diff_of_two_files(tmp_path, capsys):
    a, b = plain_file(tmp_path, "a.toml"), plain_file(tmp_path, "b.toml")
    assert main(["diff", str(a), str(b)]) == 0
    assert "parameters: identical" in capsys.readouterr().out
    ef = plain_file(tmp_path, "ef.toml", EF)
    assert main(["diff", str(a), str(ef)]) == 0
    out = capsys.readouterr().out
    assert "topology: common-emitter → emitter-follower" in out and "different topologies" in out


# -- bad input -----------------------------------------------------------------

@pytest.fixture
def logged(tmp_path):
    path = tmp_path / "l.toml"
    create(str(path), default_design(CE))
    return path


def test_unknown_key(logged, capsys):
    before = logged.read_bytes()
    assert main(["set", str(logged), "stage.rcc=10k"]) == 2
    one_error_line(capsys, "stage.rcc", "not a design key")
    assert logged.read_bytes() == before


@pytest.mark.parametrize("key, value", [("supply.vcc", "lots"), ("stage.rc", "-5"), ("supply.vcc", "2000"),
                                        ("parts.series", "E7")])
def test_bad_value_names_key_value_and_rule(logged, capsys, key, value):
    before = logged.read_bytes()
    assert main(["set", str(logged), f"{key}={value}"]) == 2
    one_error_line(capsys, key, value, rule_for(key, CE).text)
    assert logged.read_bytes() == before


def test_a_change_at_noise_level_reads_0_in_the_table(logged, capsys):
    """An ambient 0.001 K warmer moves tj by about 0.001 K and the other
    figures by far less than their last shown figure: each change reads 0
    (issue 15: not "-0.000706 K"), each column apart from the next."""
    assert main(["set", str(logged), "environment.ambient=25.001", "--dry-run"]) == 0
    out = capsys.readouterr().out
    rows = figure_rows(out)
    assert rows["tj"][2] == "0 K"
    assert all(rows[k][2] in ("0 %", "0 dB") for k in rows if k not in ("tj", "region")), rows
    for line in out.splitlines():
        if line.strip().split(" ")[0] in ("IC", "tj", "av_loaded", "rin"):
            assert re.search(r"\S  +\S+ \S+$", line), line


def test_a_typo_suggests_a_key_the_design_accepts(logged, capsys):
    assert main(["set", str(logged), "stage.rx=10k"]) == 2
    line = one_error_line(capsys, "stage.rx", "did you mean stage.rc?")
    assert "stage.re?" not in line


def test_a_misspelt_prefix_names_only_its_own_rule(logged, capsys):
    assert main(["set", str(logged), "stage.rc=10meg"]) == 2
    line = one_error_line(capsys, "stage.rc", "'meg' is not accepted; write M")
    assert "greater than" not in line


def test_assignment_without_equals(logged, capsys):
    assert main(["set", str(logged), "stage.rc"]) == 2
    one_error_line(capsys, "stage.rc", "KEY=VALUE")


def test_key_of_the_other_topology(logged, capsys):
    assert main(["set", str(logged), "stage.re=1k"]) == 2
    one_error_line(capsys, "stage.re", "common-emitter")


def test_a_topology_change_is_logged_and_undone(logged, capsys):
    """The keys the follower lacks are logged as changes to "none" (kept in
    the history, not lost), and undo brings them back with the topology."""
    before = read_design(logged)
    assert main(["set", str(logged), "topology=emitter-follower", "--note", "try a follower"]) == 0
    out = capsys.readouterr().out
    assert "topology: common-emitter → emitter-follower" in out
    assert "stage.re1: 220 Ω → none" in out and "stage.re: none → 2.20 kΩ" in out
    after = read_design(logged)
    assert after.topology == EF and after.supply.vcc == before.supply.vcc
    assert main(["undo", str(logged)]) == 0
    assert read_design(logged) == before
    assert main(["report", str(logged)]) == 0  # the file with both entries reads back


def test_a_topology_change_must_come_first_in_its_entry(logged, capsys):
    main(["set", str(logged), "topology=emitter-follower"])
    text = logged.read_text()
    first = '{ key = "topology", old = "common-emitter", new = "emitter-follower" },\n'
    assert first in text
    # Moved after a key the common emitter lacks: refused, naming the entry.
    edited = text.replace(first, "").replace("changes = [\n", "changes = [\n", 1)
    edited = edited.replace('{ key = "stage.re", old = "none", new = 2200.0 },\n',
                            '{ key = "stage.re", old = "none", new = 2200.0 },\n    ' + first)
    logged.write_text(edited)
    capsys.readouterr()
    assert main(["report", str(logged)]) == 2
    one_error_line(capsys, "history[2]")


def test_setting_a_value_already_held(logged, capsys):
    before = logged.read_bytes()
    assert main(["set", str(logged), "stage.rc=6k8"]) == 2
    one_error_line(capsys, "nothing to commit")
    assert logged.read_bytes() == before


@pytest.mark.parametrize("n", ["0", "2", "99"])
def test_entry_out_of_range(logged, capsys, n):
    assert main(["diff", f"{logged}@{n}", str(logged)]) == 2
    one_error_line(capsys, f"no history entry {n}")
    assert main(["new", str(logged.with_name("x.toml")), "--from", f"{logged}@{n}"]) == 2
    one_error_line(capsys, f"no history entry {n}")
    assert not logged.with_name("x.toml").exists()


def test_entry_of_a_file_without_history(tmp_path, capsys):
    path = plain_file(tmp_path)
    assert main(["diff", f"{path}@1", str(path)]) == 2
    one_error_line(capsys, str(path), "no history")


@pytest.mark.parametrize("argv", [["set", "{m}", "stage.rc=1k"], ["set", "{m}", "stage.rc=1k", "--dry-run"],
                                  ["undo", "{m}"], ["history", "{m}"], ["diff", "{m}", "{m}"],
                                  ["diff", "{m}@1", "{m}"], ["new", "{o}", "--from", "{m}"]])
def test_missing_file(tmp_path, capsys, argv):
    missing, out = tmp_path / "missing.toml", tmp_path / "out.toml"
    assert main([a.format(m=missing, o=out) for a in argv]) == 2
    one_error_line(capsys, str(missing), "no such file")
    # Nothing is left behind, not even a lock file for the mistyped name.
    assert sorted(p.name for p in tmp_path.iterdir()) == []


def test_missing_folder_says_no_such_file(tmp_path, capsys):
    missing = tmp_path / "nowhere" / "d.toml"
    assert main(["set", str(missing), "stage.rc=1k"]) == 2
    one_error_line(capsys, str(missing), "no such file")


def test_undo_with_nothing_to_undo(logged, capsys):
    assert main(["undo", str(logged)]) == 2
    one_error_line(capsys, "nothing to undo")
    assert main(["redo", str(logged)]) == 2
    one_error_line(capsys, "nothing to redo")


def test_tampered_history_is_one_line_naming_the_entry(logged, capsys):
    text = logged.read_text(encoding="utf-8")
    logged.write_text(text.replace('action = "start"', 'action = "begin"'), encoding="utf-8")
    for argv in (["history", str(logged)], ["set", str(logged), "stage.rc=1k"], ["report", str(logged)]):
        assert main(argv) == 2
        one_error_line(capsys, str(logged), "history[1].action", "begin")


def test_exit_codes_in_a_real_process(tmp_path):
    path = plain_file(tmp_path)
    ok = run("set", str(path), "stage.rc=10k")
    assert ok.returncode == 0 and "saved" in ok.stdout and ok.stderr == ""
    for args in (("set", str(path), "stage.rcc=1k"), ("set", str(path)),
                 ("diff", f"{path}@7", str(path)), ("undo", str(tmp_path / "missing.toml"))):
        proc = run(*args)
        assert proc.returncode == 2, args
        assert proc.stdout == "" and len(proc.stderr.strip().splitlines()) == 1, args
        assert "Traceback" not in proc.stderr
    assert [e.action for e in read_document(path).history] == ["start", "set"]


# -- wording and agreement -----------------------------------------------------

def test_new_and_key_errors_use_the_spoken_article(tmp_path, capsys):
    """English grammar: "an" before a vowel sound, "a" before a consonant."""
    follower, stage = tmp_path / "f.toml", tmp_path / "c.toml"
    assert main(["new", str(follower), "--topology", EF]) == 0
    assert "an emitter-follower design from defaults" in capsys.readouterr().out
    assert main(["new", str(stage)]) == 0
    assert "a common-emitter design from defaults" in capsys.readouterr().out
    assert main(["new", str(tmp_path / "x.toml"), "--topology", CE, "--from", str(follower)]) == 2
    one_error_line(capsys, f"conflicts with {follower}, an emitter-follower design")
    assert main(["set", str(follower), "stage.re1=100"]) == 2
    one_error_line(capsys, "stage.re1", "is not used by an emitter-follower design")


# -- new with starting values ---------------------------------------------------

def test_new_takes_starting_values_and_logs_them_in_the_first_entry(tmp_path, capsys):
    path = tmp_path / "n.toml"
    assert main(["new", str(path), "--topology", EF, "supply.vcc=15", "stage.re=1k", "load.rl=4k7"]) == 0
    out = capsys.readouterr().out
    assert "an emitter-follower design from defaults" in out
    doc = read_document(path)
    expected = with_values(default_design(EF), {"supply.vcc": 15.0, "stage.re": 1e3, "load.rl": 4.7e3})
    assert doc.design == expected
    (start,) = doc.history
    assert start.action == "start"
    default = default_design(EF)
    assert [(c.key, c.old, c.new) for c in start.changes] == [
        ("supply.vcc", default.supply.vcc, 15.0), ("stage.re", default.stage.re, 1e3),
        ("load.rl", default.load.rl, 4.7e3)]
    assert analyse(doc.design).ic == pytest.approx(start.after["ic"], rel=1e-5)  # the figures are the new design's
    assert "supply.vcc: 12.0 V → 15.0 V" in out
    assert main(["history", str(path)]) == 0
    assert "stage.re: 2.20 kΩ → 1.00 kΩ" in capsys.readouterr().out


def test_new_takes_starting_values_before_and_after_its_options(tmp_path, capsys):
    path = tmp_path / "n.toml"
    assert main(["new", str(path), "supply.vcc=9", "--topology", CE, "stage.rc=4k7"]) == 0
    design = read_document(path).design
    assert (design.topology, design.supply.vcc, design.stage.rc) == (CE, 9.0, 4.7e3)


def test_new_from_another_design_with_starting_values(logged, tmp_path, capsys):
    path = tmp_path / "copy.toml"
    assert main(["new", str(path), "--from", str(logged), "stage.rc=10k"]) == 0
    (start,) = read_document(path).history
    assert start.origin == str(logged)
    assert [(c.key, c.new) for c in start.changes] == [("stage.rc", 1e4)]


@pytest.mark.parametrize("items, needles", [
    (["stage.rc=10meg"], ("stage.rc", "'meg' is not accepted")),
    (["supply.vcc=2000"], ("supply.vcc", "at most 1000 V")),
    (["stage.re=1k"], ("stage.re", "common-emitter design")),
    (["stage.rx=1k"], ("stage.rx", "did you mean stage.rc?")),
    (["supply.vcc"], ("supply.vcc", "KEY=VALUE")),
    (["topology=common-base"], ("topology", "--topology")),
])
def test_new_refuses_a_bad_starting_value_and_writes_nothing(tmp_path, capsys, items, needles):
    path = tmp_path / "n.toml"
    assert main(["new", str(path), "--topology", CE, *items]) == 2
    one_error_line(capsys, *needles)
    assert list(tmp_path.iterdir()) == []


@pytest.mark.parametrize("items, needle", [(["stage.rc=-5"], "stage.rc"), (["supply.vcc=12", "--bogus"], "--bogus")])
def test_new_with_a_bad_value_exits_2_in_a_real_process(tmp_path, items, needle):
    proc = run("new", str(tmp_path / "n.toml"), "--topology", CE, *items)
    assert proc.returncode == 2 and proc.stdout == "" and needle in proc.stderr
    assert len(proc.stderr.strip().splitlines()) == 1
    assert list(tmp_path.iterdir()) == []


def test_propose_uses_the_spoken_article(tmp_path, capsys):
    follower = tmp_path / "f.toml"
    assert main(["new", str(follower), "--topology", EF]) == 0
    capsys.readouterr()
    assert main(["propose", str(tmp_path / "p.toml"), "--topology", CE, "--spec", "av_loaded=10..20",
                 "--from", str(follower)]) == 2
    one_error_line(capsys, "an emitter-follower design")
    assert main(["propose", str(tmp_path / "q.toml"), "--topology", "emitter-follower-split",
                 "--spec", "av_loaded=0.5..1"]) == 2
    one_error_line(capsys, "start an emitter-follower-split with")


def test_a_history_entry_without_changes_names_its_action_with_an_article(logged, capsys):
    assert main(["set", str(logged), "stage.rc=10k"]) == 0
    assert main(["undo", str(logged)]) == 0
    capsys.readouterr()
    text = logged.read_text(encoding="utf-8")
    head, sep, undo = text.rpartition("[[history]]")
    undo = re.sub(r"changes = \[.*?\n\]\n", "changes = []\n", undo, flags=re.S)  # the undo loses its changes
    logged.write_text(head + sep + undo, encoding="utf-8")
    assert main(["history", str(logged)]) == 2
    one_error_line(capsys, "an undo entry records what it changed")


def test_no_message_puts_a_fixed_article_before_a_substituted_word():
    """"a {topology}" reads "a emitter-follower"; fields.with_article picks the article."""
    sources = [p for folder in ("model", "tui") for p in (ROOT / folder).rglob("*.py")]
    found = [f"{p.relative_to(ROOT)}:{n}" for p in sources
             for n, line in enumerate(p.read_text(encoding="utf-8").splitlines(), 1)
             if re.search(r"\b[Aa]n? \{", line)]
    assert found == []


@pytest.mark.parametrize("assignment", ["stage.rc=6k8", "stage.cin=0"])
def test_a_dry_run_of_no_change_is_refused_as_the_commit_is(logged, capsys, assignment):
    """A dry run previews the commit it stands for; a commit of no change is
    refused (exit 2), so its dry run is too, with the same words."""
    if assignment == "stage.cin=0":
        assert main(["set", str(logged), "stage.cin=none"]) == 0
        capsys.readouterr()
    before = logged.read_bytes()
    assert main(["set", str(logged), assignment]) == 2
    committed = one_error_line(capsys, "nothing to commit")
    assert main(["set", str(logged), assignment, "--dry-run"]) == 2
    assert one_error_line(capsys, "nothing to commit") == committed
    assert logged.read_bytes() == before


def test_a_gain_that_changes_sign_says_so_in_words(tmp_path, capsys):
    """Unbypassed CE driven into saturation by a larger r2: the gain goes from
    inverting to non-inverting, which a dB change (a magnitude) cannot show."""
    path = plain_file(tmp_path)
    assert main(["set", str(path), "stage.ce=none"]) == 0
    capsys.readouterr()
    before = analyse(read_design(path))
    after = analyse(with_values(read_design(path), {"bias.r2": 47e3}))
    assert before.av_loaded < 0 < after.av_loaded and before.av_source < 0 < after.av_source
    assert main(["set", str(path), "bias.r2=47k", "--dry-run"]) == 0
    lines = capsys.readouterr().out.splitlines()
    for label in ("av_loaded", "av_source"):
        row = next(i for i, line in enumerate(lines) if line.split()[:1] == [label])
        assert lines[row + 1].strip() == "inverting → non-inverting", lines[row:row + 2]
        assert max(map(len, lines)) <= 80
    # A gain that keeps its sign gets no such line.
    assert main(["set", str(path), "stage.rc=10k", "--dry-run"]) == 0
    assert "inverting" not in capsys.readouterr().out


def test_a_figure_that_stays_none_is_unchanged_not_zero_per_cent(tmp_path, capsys):
    """A cut-off stage has no f_high below 10 THz before or after a bypass
    change: "none → none" is no change, which "0 %" would misstate."""
    path = plain_file(tmp_path)
    assert main(["set", str(path), "stage.cin=none", "stage.cout=none"]) == 0
    capsys.readouterr()
    before = analyse(read_design(path))
    after = analyse(with_values(read_design(path), {"stage.ce": 22e-6}))
    assert not math.isfinite(before.f_high) and not math.isfinite(after.f_high)
    assert main(["set", str(path), "stage.ce=22u", "--dry-run"]) == 0
    rows = figure_rows(capsys.readouterr().out)
    assert rows["f_high"] == ["none", "none", "unchanged"]


def test_output_cut_short_by_its_reader_is_no_error(tmp_path):
    """`history F | head -1`: the reader closes the pipe before the command
    writes; the command stops quietly with status 0 (README, Exit status)."""
    path = plain_file(tmp_path)
    for value in ("10k", "12k", "15k"):
        assert run("set", str(path), f"stage.rc={value}").returncode == 0
    proc = subprocess.Popen([sys.executable, "-m", "tui", "history", str(path)], cwd=ROOT,
                            stdout=subprocess.PIPE, stderr=subprocess.PIPE)
    proc.stdout.close()  # before the child has started: its first write meets a closed pipe
    err = proc.stderr.read().decode()
    proc.stderr.close()
    assert proc.wait(timeout=120) == 0, err
    assert err == ""
