"""The one-editor Knobs under stress: keys in bursts, app keys over a
candidate of several fields, stepping an open load, and a long value's row.

The burst tests run the same keys twice, once all posted at once (as the
terminal driver does with a burst over a slow link) and once waiting for
each to be handled, and ask for the same outcome: how fast keys arrive must
not change what they do.  Expected values come from ``model`` or from the
file read back, never from a previous run.
"""

from __future__ import annotations

import shutil

import pytest
from test_workbench import SMALL, knobs, region_text, saved, status, type_into
from test_workbench_knobs import _drain, _typed

from model.design.stage import get_value, with_values
from model.design.stepping import step
from model.files.designfile import read_document
from tui.launch import make_app
from tui.widgets.knobs import field_text


async def _outcome(path, start: str, keys: tuple, burst: bool) -> tuple:
    """What ``keys``, typed from ``start``'s row, leave behind: the ledger,
    the candidate, the editor's row, text and marks, the note and the focus."""
    app = make_app(str(path))
    async with app.run_test(size=SMALL) as pilot:
        knobs(app).select(start)
        await _drain(pilot)
        if burst:
            _typed(app, *keys)
            await _drain(pilot)
        else:
            for key in keys:
                _typed(app, key)
                await _drain(pilot)
        await _drain(pilot)
        editor = knobs(app).editor
        return (
            [(e.action, sorted((c.key, c.new) for c in e.changes)) for e in app.session.history],
            dict(app.candidate.changes) if app.candidate else None,
            knobs(app).key, editor.value,
            editor.has_class("-candidate"), editor.has_class("-invalid"),
            app.note, type(app.screen).__name__,
            app.focused.id if app.focused else None,
            read_document(path).design,
        )


BURSTS = {
    # Backspace is one of Input's bindings, which Textual runs only once the
    # key has bubbled up to the app: after the characters typed behind it,
    # and on the row a Tab behind it moved to (wiping its value), unless the
    # editor runs it itself.
    "backspace-then-tab": ("stage.rc", (*"10kk", "backspace", "tab")),
    "backspace-then-more-typing": ("stage.rc", (*"10", "backspace", "k")),
    # After Enter or Esc the row's text is selected again, so the next digits
    # replace it; in a burst they arrive before the app has answered, and
    # were once appended ("10k47").
    "enter-then-a-new-value": ("stage.rc", (*"10k", "enter", *"47", "enter")),
    "escape-then-a-new-value": ("stage.rc", (*"10k", "escape", *"47")),
    # Tab, then Up on the new row: the app brings the editor up to date on
    # KnobMoved, which must not count as a new visit, or the step's put() is
    # refused and the editor keeps the old text while the candidate moved.
    "tab-then-up": ("stage.rc", ("tab", "up")),
    # An app key must not overtake the editor's own messages: F7 once ran
    # before the commit typed before it (the messages took one more hop).
    "enter-then-undo": ("stage.rc", (*"10k", "enter", "f7")),
    # The note typed after F2 must reach the prompt, not supply.vcc, even
    # before the prompt's input has the focus.
    "note-typed-after-f2": ("supply.vcc", ("f2", *"more gain", "enter")),
    # Keys typed after a Tab that leaves the panel must not reach the
    # editor (by then on the first row, where they would rename the design).
    "typing-after-tab-out-of-the-panel": ("estimate.vbe", ("tab", *"47")),
}


@pytest.mark.parametrize("case", list(BURSTS))
async def test_a_burst_of_keys_does_what_the_same_keys_typed_slowly_do(preamp, tmp_path, case):
    """Keys typed ahead must keep their order, whatever kind of key they are."""
    start, keys = BURSTS[case]
    slow_copy = tmp_path / "slow" / "preamp.toml"
    slow_copy.parent.mkdir()
    shutil.copyfile(preamp, slow_copy)
    slow = await _outcome(slow_copy, start, keys, burst=False)
    fast = await _outcome(preamp, start, keys, burst=True)
    assert fast == slow


async def test_the_slow_outcomes_above_are_the_intended_ones(preamp):
    """A check on the reference the burst test compares with: one key at a
    time, Enter commits each value and the next digits replace the text."""
    original = read_document(preamp).design
    outcome = await _outcome(preamp, "stage.rc", BURSTS["enter-then-a-new-value"][1], burst=False)
    history, candidate, key, value = outcome[:4]
    assert [changes for _, changes in history[1:]] == [[("stage.rc", 10e3)], [("stage.rc", 47.0)]]
    assert candidate is None and key == "stage.rc"
    assert outcome[-1] == with_values(original, {"stage.rc": 47.0})
    assert value == field_text("stage.rc", 47.0)


async def test_tab_then_up_shows_the_stepped_value_in_the_editor(preamp):
    """The same race as "tab-then-up", stated directly: the row the editor
    is on must show the candidate's value, marked as a candidate."""
    app = make_app(str(preamp))
    async with app.run_test(size=SMALL) as pilot:
        knobs(app).select("stage.rc")
        await _drain(pilot)
        committed = app.design
        _typed(app, "tab", "up")
        await _drain(pilot)
        expected = step("stage.re1", committed.stage.re1, 1, committed.parts.series)
        assert app.candidate.design == with_values(committed, {"stage.re1": expected})
        editor = knobs(app).editor
        assert knobs(app).key == "stage.re1"
        assert editor.value == field_text("stage.re1", expected)
        assert editor.has_class("-candidate")


@pytest.mark.parametrize("key", ["up", "down", "pageup", "pagedown"])
async def test_stepping_an_open_load_does_not_raise(preamp, key):
    """An open load (rl = "open", infinite) has no series neighbour: the
    step must be refused with a message, not end the app with a traceback."""
    before = saved(preamp)
    app = make_app(str(preamp))
    async with app.run_test(size=SMALL) as pilot:
        await type_into(pilot, "load.rl", "open")
        assert get_value(app.candidate.design, "load.rl") == float("inf")
        await pilot.press(key)
        await _drain(pilot)
        assert app.candidate.changes == {"load.rl": "open"}
        assert "load.rl" in status(app)
    assert saved(preamp) == before


async def _two_field_candidate(pilot) -> dict:
    await type_into(pilot, "bias.r1", "270k")
    await pilot.press("tab", *"56k")
    await pilot.pause()
    return dict(pilot.app.candidate.changes)


@pytest.mark.parametrize("key", ["f5", "f7", "ctrl+z"])
async def test_an_app_key_does_not_drop_a_candidate_of_several_fields_unsaid(preamp, key):
    """F5 (series) and undo commit through the session, which replaces the
    committed design: values typed on rows now out of sight must not vanish
    while the status speaks only of the saved entry.  Either they are kept
    (on the new committed design) or the status names them as dropped; and
    the rows must agree."""
    app = make_app(str(preamp))
    async with app.run_test(size=SMALL) as pilot:
        if key != "f5":  # something to undo
            await type_into(pilot, "stage.rc", "10k")
            await pilot.press("enter")
            await pilot.pause()
        pending = await _two_field_candidate(pilot)
        assert pending == {"bias.r1": "270k", "bias.r2": "56k"}
        await pilot.press(key)
        await _drain(pilot)
        assert app.session.history[-1].action == ("set" if key == "f5" else "undo")
        panel = knobs(app)
        if app.candidate is not None:
            assert dict(app.candidate.changes) == pending
            assert app.candidate.design == with_values(app.design, pending)
            shown = {k: field_text(k, get_value(app.candidate.design, k)) for k in pending}
        else:
            assert all(k in status(app) for k in pending), status(app)
            shown = {k: field_text(k, get_value(app.design, k)) for k in pending}
        # The editor is on r2; r1 is drawn as text.
        assert panel.text("bias.r1") == shown["bias.r1"]
        assert panel.editor.value == shown["bias.r2"]


async def test_a_long_value_shows_its_start_when_the_editor_arrives(preamp):
    """The whole name is selected with the cursor at its start, so its
    beginning is in view (not its end), and the terminal's cursor is inside
    the editor."""
    app = make_app(str(preamp))
    async with app.run_test(size=SMALL) as pilot:
        name = app.design.name
        assert len(name) > 20, "the test needs a name wider than the editor"
        await pilot.press("shift+tab")  # from supply.vcc up to the name
        await _drain(pilot)
        assert knobs(app).key == "name" and knobs(app).editor.selected_text == name
        row = region_text(app, "#knob-row")
        assert name[:8] in row, row
        assert knobs(app).editor.region.contains_point(app.cursor_position)
