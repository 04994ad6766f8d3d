"""The writer never produces a file the reader refuses (issue 16 item 1).

Every save is checked, byte for byte, against the reader's own limits
(model.files.designfile: MAX_LINE_CHARS, MAX_FILE_BYTES, UTF-8) before
anything is written.  A change that would break one is refused with exit 2
and one line naming the field, the size and the limit; the file keeps its
bytes and the session (or the workbench's candidate and note) its state.
Whatever is saved reads back with exactly the texts that were given.
"""

from __future__ import annotations

import pathlib
import shutil
import tempfile

import pytest
from hypothesis import HealthCheck, event, example, given, settings
from hypothesis import strategies as st
from test_reliability import assert_one_line_refusal, cli
from test_workbench import SMALL, status, type_into

from model.design.stage import default_design
from model.files.designfile import (
    MAX_FILE_BYTES,
    MAX_LINE_CHARS,
    dumps_design,
    encode_for_save,
    overlong_line,
    read_document,
)
from model.files.savefile import SaveError
from model.files.session import DesignSession
from tui.launch import make_app

ROOT = pathlib.Path(__file__).resolve().parents[1]
GEOPHONE = ROOT / "saved_designs" / "geophone_preamp.toml"


def copy_demo(folder: pathlib.Path) -> pathlib.Path:
    path = folder / "design.toml"
    shutil.copyfile(GEOPHONE, path)
    return path


@pytest.mark.parametrize("args, field", [
    (("stage.rc=10k", "--note", "x" * MAX_LINE_CHARS), "history[2].note"),
    (("notes=" + "n" * MAX_LINE_CHARS,), "notes"),
    # The case: a huge notes, which the start entry would copy as well.
    (("notes=" + "n" * 1_000_000,), "notes"),
])
def test_a_text_too_long_for_a_line_is_refused_and_the_file_still_opens(tmp_path, capsys, args, field):
    path = copy_demo(tmp_path)
    before = path.read_bytes()
    code, out, err = cli(capsys, "set", path, *args)
    assert_one_line_refusal(code, err)
    assert f"not saved: {field} would be written as a line of" in err
    assert f"at most {MAX_LINE_CHARS:,}" in err
    assert path.read_bytes() == before
    for command in ("report", "history"):
        assert cli(capsys, command, path)[0] == 0


def test_a_text_just_inside_the_line_limit_is_saved_and_reads_back(tmp_path, capsys):
    path = copy_demo(tmp_path)
    note = "x" * (MAX_LINE_CHARS - len('note = ""'))  # the line exactly at the limit
    code, _, err = cli(capsys, "set", path, "stage.rc=10k", "--note", note)
    assert code == 0, err
    assert read_document(path).history[-1].note == note


def test_a_note_that_is_not_unicode_text_is_refused_in_one_line(tmp_path, capsys):
    """An undecodable byte on the command line reaches Python as a lone
    surrogate (U+DC80–U+DCFF), which UTF-8 cannot hold: once exit 3."""
    path = copy_demo(tmp_path)
    before = path.read_bytes()
    code, _, err = cli(capsys, "set", path, "stage.rc=10k", "--note", "bad \udcff byte")
    assert_one_line_refusal(code, err)
    assert "history[2].note holds U+DCFF" in err
    assert path.read_bytes() == before


_lengths = st.one_of(st.sampled_from([0, 1, MAX_LINE_CHARS - 1, MAX_LINE_CHARS, MAX_LINE_CHARS + 1,
                                        2 * MAX_LINE_CHARS + 1]), st.integers(0, 3 * MAX_LINE_CHARS))


@given(st.lists(_lengths, max_size=8), st.booleans())
def test_the_line_rule_finds_the_first_long_line_as_a_plain_scan_does(lengths, final_newline):
    """overlong_line crosses the text in strides; a plain split is the definition."""
    text = "\n".join("é" * n for n in lengths) + ("\n" if final_newline else "")
    plain = next(((n, len(line)) for n, line in enumerate(text.split("\n"), start=1)
                  if len(line) > MAX_LINE_CHARS), None)
    assert overlong_line(text) == plain


def test_a_file_over_the_size_limit_is_refused_naming_size_and_limit():
    text = "x = 1\n" * (MAX_FILE_BYTES // 6 + 1)
    with pytest.raises(SaveError) as info:
        encode_for_save(text, "big.toml")
    message = str(info.value)
    assert f"{len(text):,} bytes" in message and f"at most {MAX_FILE_BYTES:,}" in message
    assert "\n" not in message


def test_a_refused_save_leaves_the_session_as_it_was_and_the_next_one_saves(tmp_path):
    path = copy_demo(tmp_path)
    with DesignSession(path) as s:
        design, history = s.design, list(s.history)
        with pytest.raises(SaveError, match="history"):
            s.commit({"stage.rc": "10k"}, note="y" * 20_000)
        assert s.design == design and s.history == history
        s.commit({"stage.rc": "10k"}, note="short")
    assert read_document(path).history[-1].note == "short"


async def test_the_workbench_keeps_the_candidate_and_the_note_when_a_save_is_refused(preamp):
    before = preamp.read_bytes()
    app = make_app(str(preamp))
    async with app.run_test(size=SMALL) as pilot:
        app.note = "z" * 12_000
        await type_into(pilot, "stage.rc", "10k")
        await pilot.press("enter")
        await pilot.pause()
        said = status(app)
        assert said.startswith("✗ not saved:") and "history[2].note" in said and "\n" not in said
        assert preamp.read_bytes() == before
        assert app.candidate is not None and app.candidate.changes == {"stage.rc": "10k"}
        assert app.note == "z" * 12_000
        app.note = "shorter"
        await pilot.press("enter")
        await pilot.pause()
        assert app.candidate is None and app.design.stage.rc == 10e3
    assert read_document(preamp).history[-1].note == "shorter"


# -- the round trip: whatever is saved reads back exactly ---------------------------------------

#: Characters a writer must escape or keep apart: controls, line ends of three
#: kinds, quotes and backslashes (alone and as TOML's triple quotes and
#: escapes), the characters the terminal escaping cares about, non-BMP ones.
_AWKWARD = ["\x00", "\x01", "\x1b[2J", "\x7f", "\x85", "\x9b", "\t", "\r\n", "\r", "\n", "\n\n", '"', '"""',
            "'''", "\\", "\\n", "\\u0041", "\u2028", "\u202e", "\ufeff", "é", "Ω", "µ", "😀", "\U0010fffd", " ", "#"]
_pieces = st.one_of(st.sampled_from(_AWKWARD), st.text(max_size=40))


@st.composite
def long_texts(draw) -> str:
    """Texts from empty to well past the line limit: a few awkward pieces,
    some repeated hundreds of times (drawing 10,000 characters one by one
    would be slow and rarely cross the limit)."""
    parts = draw(st.lists(st.tuples(_pieces, st.integers(1, 3000)), max_size=4))
    return "".join(piece * (count if len(piece) * count < 30_000 else 1) for piece, count in parts)


@settings(max_examples=60, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(notes=long_texts(), note=long_texts())
@example(notes="a\r\nb\rc\n\"\"\"\\", note="\x1b]0;title\x07")
@example(notes="", note="😀" * 9_990)       # 4 bytes a character: the line counts characters
@example(notes="\x01" * 1_700, note="")   # each written as \u0001: 10,200 characters
def test_saved_texts_read_back_exactly_or_the_save_is_refused(notes, note):
    with tempfile.TemporaryDirectory() as folder:
        path = pathlib.Path(folder) / "design.toml"
        design = default_design("common-emitter")
        path.write_text(dumps_design(design), encoding="utf-8")
        before = path.read_bytes()
        values = {"notes": notes, "stage.rc": "10k"}
        with DesignSession(path) as s:
            try:
                s.commit(values, note=note)
            except SaveError as err:
                event("refused")
                message = str(err)
                assert "not saved" in message and "\n" not in message
                assert f"{MAX_LINE_CHARS:,}" in message or f"{MAX_FILE_BYTES:,}" in message
                assert path.read_bytes() == before
                return
        event("saved")
        doc = read_document(path)
        assert doc.design.notes == notes
        assert doc.history[-1].note == note
        assert [c.new for c in doc.history[-1].changes if c.key == "notes"] == ([notes] if notes else [])
