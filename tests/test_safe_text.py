"""Text from a design file never reaches the terminal raw.

A note holding ESC [ 2 J would clear the screen (ECMA-48, section 8.3.29,
ED: Erase in Display; CSI is ESC [ in 7-bit form and U+009B in 8-bit form,
section 5.4), BEL rings and CR returns to the start of the line.  Every
command and the workbench show such characters as visible escapes instead;
Textual markup in a note is shown as typed.
"""

from __future__ import annotations

import contextlib
import io
import json
import pathlib
import re

import pytest

from model.design.stage import default_design, with_values
from model.files.session import DesignSession, create
from tui.cli import main
from tui.launch import make_app
from tui.safe_text import visible
from tui.widgets.ledger_pane import LedgerPane

#: Control characters a terminal acts on (ECMA-48 C0 and C1 sets, and DEL);
#: newline is the one the outputs use themselves.
RAW_CONTROL = re.compile("[\x00-\x09\x0b-\x1f\x7f-\x9f]")

NOTES = "first line\nclear \x1b[2J ring \x07 back \r csi \x9b2J del \x7f"
NOTE = "retitle \x1b]0;owned\x07 then [bold]x[/] and \x9b1m"
MARKUP = "[bold]x[/]"


def run(*args) -> tuple:
    """(exit status, stdout, stderr) of one in-process command."""
    out, err = io.StringIO(), io.StringIO()
    with contextlib.redirect_stdout(out), contextlib.redirect_stderr(err):
        code = main([str(a) for a in args])
    return code, out.getvalue(), err.getvalue()


@pytest.fixture
def hostile(tmp_path) -> pathlib.Path:
    """A design whose notes, and whose history's notes and changes, hold control characters."""
    path = tmp_path / "hostile.toml"
    create(str(path), default_design(), note="start \x1b[31m red")
    with DesignSession(str(path)) as session:
        session.commit({"notes": NOTES}, NOTE)
        session.commit({"stage.rc": "10k"}, "bell \x07 and tab \t")
    return path


def assert_escaped(text: str) -> None:
    assert not RAW_CONTROL.search(text), repr(RAW_CONTROL.search(text).group())


def test_visible_writes_every_control_as_an_escape():
    # The escapes are Python's own spelling of these characters.
    assert visible("a\x1b[2Jb") == "a\\x1b[2Jb"
    assert visible("\x07\x7f\x9b\x00") == "\\x07\\x7f\\x9b\\x00"
    assert visible("one\ntwo\rthree\tfour") == "one\\ntwo\\rthree\\tfour"
    assert visible("rlo \u202e sep \u2028") == "rlo \\u202e sep \\u2028"
    # Printable text, backslashes and markup-like brackets are left as they are.
    plain = "Geophone preamp — 4k7, µA, C:\\x [bold]x[/]"
    assert visible(plain) == plain


def test_history_shows_notes_and_changes_escaped(hostile):
    code, out, err = run("history", hostile)
    assert code == 0, err
    assert_escaped(out)
    assert "note: start \\x1b[31m red" in out
    assert "note: retitle \\x1b]0;owned\\x07 then [bold]x[/] and \\x9b1m" in out
    assert "notes:  → first line\\nclear \\x1b[2J ring \\x07 back \\r csi \\x9b2J del \\x7f" in out
    assert "note: bell \\x07 and tab \\t" in out


def test_history_json_keeps_the_text_exactly_and_escaped(hostile):
    # JSON escapes control characters itself (RFC 8259, section 7), and with
    # ASCII output so do C1 and DEL: reading it back gives the note exactly.
    code, out, err = run("history", hostile, "--json")
    assert code == 0, err
    assert_escaped(out)
    notes = [e.get("note") for e in json.loads(out)["entries"]]
    assert notes[1] == NOTE


def test_diff_and_dry_run_show_the_notes_change_escaped(hostile):
    code, out, err = run("diff", f"{hostile}@1", hostile)
    assert code == 0, err
    assert_escaped(out)
    assert "\\x1b[2J" in out and "\\x9b2J" in out
    code, out, err = run("set", hostile, "notes=again \x1b[H", "--dry-run")
    assert code == 0, err
    assert_escaped(out)
    assert "again \\x1b[H" in out


def test_set_echoes_a_note_given_on_the_command_line_escaped(hostile):
    code, out, err = run("set", hostile, "stage.rc=12k", "--note", "typed \x1b[2J")
    assert code == 0, err
    assert_escaped(out)
    assert "note: typed \\x1b[2J" in out


def test_report_escapes_the_path_it_names(tmp_path):
    folder = tmp_path / "odd\x1b[2Jname"
    folder.mkdir()
    path = folder / "d.toml"
    create(str(path), default_design())
    for args in (("report", path), ("response", path)):
        code, out, err = run(*args)
        assert code == 0, err
        assert_escaped(out)
        assert "odd\\x1b[2Jname" in out


def test_a_name_with_a_control_character_is_refused_in_one_escaped_line(tmp_path):
    # The name's rule refuses control characters outright, so such a file is
    # refused; the refusal itself must not carry the character either.
    path = tmp_path / "named.toml"
    path.write_text('format = 1\nname = "clear \\u001b[2J \\u009b"\n', encoding="utf-8")
    code, out, err = run("report", path)
    assert code == 2
    assert_escaped(err)
    assert len(err.splitlines()) == 1
    assert "\\x1b[2J" in err


def test_a_name_the_rule_accepts_is_shown_as_written(tmp_path):
    path = tmp_path / "named.toml"
    create(str(path), with_values(default_design(), {"name": "Hydrophone [bold]line[/] driver"}))
    code, out, _ = run("report", path)
    assert code == 0
    assert out.startswith("Hydrophone [bold]line[/] driver — common-emitter")


async def test_the_workbench_shows_notes_escaped_and_markup_as_typed(hostile):
    app = make_app(str(hostile))
    async with app.run_test(size=(160, 50)):
        pane = app.screen.query_one(LedgerPane)
        lines = [pane.render_line(y).text for y in range(pane.size.height)]
        shown = "".join(line.rstrip() for line in lines)
        assert_escaped(shown)
        assert "start \\x1b[31m red" in shown
        assert "\\x1b]0;owned\\x07" in shown
        # Shown as typed: as markup, "[bold]x[/]" would be drawn as a bold "x".
        assert MARKUP in shown
        assert "bell \\x07 and tab \\t" in shown


async def test_the_workbench_title_escapes_the_path(tmp_path):
    folder = tmp_path / "odd\x1b]0;x\x07dir"
    folder.mkdir()
    path = folder / "d.toml"
    create(str(path), default_design())
    app = make_app(str(path))
    async with app.run_test(size=(120, 40)):
        assert_escaped(app.sub_title)
        assert "odd\\x1b]0;x\\x07dir" in app.sub_title
