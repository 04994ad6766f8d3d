"""The ledger's one-line entries (issue 15): one shared text for the
workbench's Ledger and `history --oneline`, wrapped only at its separators,
never between a number and its unit or inside an arrow pair."""

from __future__ import annotations

import pathlib
import re
import subprocess
import sys

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from rich.cells import cell_len

from model.design.stage import default_design
from model.files.designfile import read_document
from model.files.session import DesignSession, create
from tui import minus_sign
from tui.cli import main
from tui.consequences import compact_parts
from tui.launch import make_app
from tui.ledger_text import ledger_lines, wrap_line
from tui.minus_sign import SCREEN_MINUS, minus_signs
from tui.widgets.ledger_pane import LedgerPane
from tui.wrapping import plain

ROOT = pathlib.Path(__file__).resolve().parents[1]

#: A value with its unit, as the ledger writes it ("220 Ω", "+1.56 dB",
#: "-41.7 %", "26 °C"); the unit is what a bad wrap would strand.
VALUE_UNIT = re.compile(r"[-+−]?\d[\d.]* (?:[kMGmµnp]?(?:Ω|V|A|W|F|Hz)|dB|%|K|°C|pts)(?![\w])")
#: An arrow pair, "220 Ω→330 Ω".
ARROW_PAIR = re.compile(r"\S+ ?\S*→\S+(?: (?:[kMGmµnp]?(?:Ω|V|A|W|F|Hz)|°C))?")


@pytest.fixture
def story(tmp_path):
    """A design with the changes of a first session: a change with two keys,
    one of a temperature, an undo and a note long enough to wrap."""
    path = tmp_path / "s.toml"
    create(str(path), default_design())
    with DesignSession(str(path)) as s:
        s.commit({"stage.re1": "330"}, "less gain, more headroom for the geophone's largest shocks")
        s.commit({"stage.rc": "8k2", "bias.r2": "12k"}, "")
        s.commit({"environment.ambient": "26"}, "")
        s.undo("")
    return path


def _pieces(line: str) -> list:
    text = plain(line)
    return VALUE_UNIT.findall(text) + ARROW_PAIR.findall(text)


@pytest.mark.parametrize("width", range(24, 101, 4))
def test_a_wrapped_line_keeps_every_value_and_pair_whole(story, width):
    for line in ledger_lines(read_document(story).history)[1:]:  # the start entry has no values
        rows = wrap_line(line, width).split("\n")
        pieces = _pieces(line)
        assert pieces, line  # the check below checks something
        for piece in pieces:
            assert any(piece in row for row in rows), (piece, rows)


def test_a_wrapped_line_fits_its_width_and_says_the_same(story):
    for line in ledger_lines(read_document(story).history):
        rows = wrap_line(line, 40).split("\n")
        assert all(len(r) <= 40 for r in rows if " " in r.strip()), rows
        assert " ".join(r.strip() for r in rows) == plain(line)
        assert all(r.startswith("  ") for r in rows[1:])


def test_a_change_too_small_to_show_is_no_consequence(story):
    lines = [plain(x) for x in ledger_lines(read_document(story).history)]
    ambient = next(line for line in lines if "ambient" in line)
    assert "ambient 25 °C→26 °C" in ambient
    assert "tj +1.0 K" in ambient
    assert " 0 %" not in ambient and " 0 dB" not in ambient


def test_oneline_prints_the_ledgers_lines_one_per_entry(story, capsys):
    assert main(["history", str(story), "--oneline"]) == 0
    out = capsys.readouterr().out.splitlines()
    history = read_document(story).history
    assert out == [plain(x) for x in ledger_lines(history, minus="-")]
    assert len(out) == len(history) == 5
    assert out[0].startswith("#1 ") and re.match(r"#1 \d{4}-\d\d-\d\d \d\d:\d\d start$", out[0])
    assert re.match(r"#2 \d\d:\d\d set re1 220 Ω→330 Ω · gain -\d", out[1])
    assert out[1].endswith('· "less gain, more headroom for the geophone\'s largest shocks"')
    assert re.match(r"#5 \d\d:\d\d undo #4: ambient 26 °C→25 °C · (gain \S+ dB, )?tj -1.0 K", out[4])
    assert "\u2212" not in "".join(out)  # the command line's minus is ASCII (see README)


def test_the_workbench_ledger_uses_the_screens_minus(story):
    line = plain(ledger_lines(read_document(story).history)[1])
    assert "gain \u2212" in line and "gain -" not in line


def test_oneline_escapes_the_files_text(tmp_path, capsys):
    path = tmp_path / "n.toml"
    create(str(path), default_design(), note="")
    with DesignSession(str(path)) as s:
        s.commit({"stage.rc": "10k"}, "bell \x07 and \x1b[31mred")
    assert main(["history", str(path), "--oneline"]) == 0
    out = capsys.readouterr().out
    assert "\x1b" not in out and "\x07" not in out
    assert "bell \\x07 and \\x1b[31mred" in out


def test_oneline_of_a_file_without_history_or_with_hand_edits(tmp_path, capsys):
    path = tmp_path / "n.toml"
    create(str(path), default_design())
    text = path.read_text(encoding="utf-8").replace("rc = 6800.0", "rc = 4700.0", 1)
    path.write_text(text, encoding="utf-8")
    assert main(["history", str(path), "--oneline"]) == 0
    out = capsys.readouterr().out.splitlines()
    assert len(out) == 2 and out[1] == "(changed by hand since entry 1: stage.rc)"


def test_oneline_and_json_are_refused_together(story, capsys):
    with pytest.raises(SystemExit) as caught:
        main(["history", str(story), "--oneline", "--json"])
    assert caught.value.code == 2
    assert "not allowed with" in capsys.readouterr().err


def test_oneline_cut_short_by_head_is_no_error(story):
    proc = subprocess.run(f'"{sys.executable}" -m tui history "{story}" --oneline | head -1', shell=True,
                          capture_output=True, text=True, cwd=ROOT, timeout=120)
    assert proc.returncode == 0 and proc.stderr == ""
    assert proc.stdout.startswith("#1 ") and proc.stdout.count("\n") == 1


def _stranded(rows: list) -> list:
    """Rows whose first word is a unit left behind by the row before (a
    number at its end): "re1 220" / "Ω→330 Ω"."""
    unit = re.compile(r"^\s*(?:[kMGmµnp]?(?:Ω|V|A|W|F|Hz)|dB|%|K|°C|pts)(?![\w])")
    return [(a, b) for a, b in zip(rows, rows[1:]) if re.search(r"\d$", a.rstrip()) and unit.match(b)]


def _pane_rows(pane) -> list:
    return [pane.render_line(y).text.rstrip() for y in range(pane.size.height)]


async def test_the_ledger_pane_at_80_columns_breaks_only_at_separators(story):
    """At 80×24 the Ledger (F3) is narrower than its entries: they wrap, and
    every value and arrow pair of the newest is whole on one row."""
    app = make_app(str(story))
    async with app.run_test(size=(80, 24)) as pilot:
        await pilot.press("f3")
        await pilot.pause()
        pane = app.screen.query_one(LedgerPane)
        assert pane.option_count == 5
        last = plain(ledger_lines(read_document(story).history)[-1])
        for size in ((80, 24), (100, 30)):  # and again once the pane has a new width
            await pilot.resize_terminal(*size)
            await pilot.pause()
            rows = _pane_rows(pane)
            assert len(last) > pane.size.width  # the entry has to wrap
            assert _stranded(rows) == []
            for piece in _pieces(last):
                assert any(piece in r for r in rows), (size, piece, rows)
            assert all(cell_len(r) <= pane.size.width for r in rows)


def test_a_spread_change_is_a_line_too(tmp_path, capsys):
    """A tolerance or spec entry holds a number or a range: shown as set takes it."""
    path = tmp_path / "t.toml"
    create(str(path), default_design())
    assert main(["set", str(path), "tolerance.ambient=0..40", "tolerance.resistors=0.01"]) == 0
    capsys.readouterr()
    assert main(["history", str(path), "--oneline"]) == 0
    out = capsys.readouterr().out.splitlines()
    assert re.match(r"#2 \d\d:\d\d set tolerance\.", out[1]), out
    assert "tolerance.ambient none→0..40" in out[1] and "tolerance.resistors none→0.01" in out[1]


@settings(max_examples=300, deadline=None)
@given(text=st.text("-−0123456789.a éΩ", max_size=20))
def test_the_ascii_minus_skips_the_pass_only_where_it_changes_nothing(text):
    """With ASCII "-" asked for, a text with no U+2212 in it is left as it is."""
    assert minus_signs(text, "-") == minus_sign._SIGN.sub("-", text)
    assert minus_signs(text, SCREEN_MINUS) == minus_sign._SIGN.sub(SCREEN_MINUS, text)


def test_equal_moves_are_named_in_the_tables_order():
    """Ties in size keep the order of the figures a line may mention, gain first."""
    before = {"av_source": -10.0, "thd": 0.01, "rout": 100.0, "rin": 2000.0, "ic": 1e-3}
    after = {"av_source": -20.0, "thd": 0.02, "rout": 200.0, "rin": 4000.0, "ic": 1.5e-3}
    names = [part.split()[0] for part in compact_parts(before, after)]
    assert names == ["gain", "rin", "rout", "thd"]  # ic moved least, and the line has room for three
