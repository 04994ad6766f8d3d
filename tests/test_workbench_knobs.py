"""The Knobs panel through Pilot: moving the one editor between rows, and a
candidate made of several fields at once.

Expected designs and figures come from ``model`` (``with_values``,
``analyse``) or from the saved file read back, never from a previous run.
"""

from __future__ import annotations

import pytest
from test_workbench import LARGE, SMALL, field, header_row, knobs, readout_row, saved, status, type_into
from textual import events

from model.analyses.figures import analyse
from model.design.stage import get_value, with_values
from model.files.designfile import read_document
from tui.launch import make_app
from tui.widgets.knobs import field_text


async def test_tab_walks_the_rows_in_screen_order_and_shift_tab_walks_back(preamp):
    app = make_app(str(preamp))
    async with app.run_test(size=SMALL) as pilot:
        panel = knobs(app)
        assert panel.key == "supply.vcc" and app.focused is panel.editor
        walked = []
        for _ in range(4):
            await pilot.press("tab")
            walked.append(panel.key)
        assert walked == ["bias.r1", "bias.r2", "stage.rc", "stage.re1"]
        # Each arrival selects the row's text, so typing replaces it.
        assert panel.editor.selected_text == panel.editor.value == field_text("stage.re1", app.design.stage.re1)
        # The label beside the editor names its row.
        assert str(app.query_one("#knob-label").content) == "re1"
        await pilot.press("shift+tab", "shift+tab")
        assert panel.key == "bias.r2"
        # The row the editor is on stays in view as it moves down the panel.
        for _ in range(len(panel.keys)):
            await pilot.press("tab")
            await pilot.pause()
            row = app.query_one("#knob-row").region
            box = panel.region
            assert box.y <= row.y < box.bottom, panel.key


async def test_tab_past_the_last_row_leaves_the_panel_and_the_next_tab_comes_back_to_the_first(preamp):
    # The next stops are the readout (which scrolls with the arrows) and,
    # where it is on show, the ledger, whose entries can be pinned.
    for size, others in ((SMALL, ["#readout-box"]), (LARGE, ["#readout-box", "#ledger"])):
        app = make_app(str(preamp))
        async with app.run_test(size=size) as pilot:
            panel = knobs(app)
            panel.select(panel.keys[-1])
            for other in others:
                await pilot.press("tab")
                assert app.focused is app.query_one(other), size
            await pilot.press("tab")
            assert app.focused is panel.editor and panel.key == panel.keys[0], size
            # And back: Shift+Tab leaves from the first row and comes back
            # through the same stops to the last row.
            for other in reversed(others):
                await pilot.press("shift+tab")
                assert app.focused is app.query_one(other), size
                assert panel.key == panel.keys[0], size  # the editor waits where it was
            await pilot.press("shift+tab")
            assert app.focused is panel.editor and panel.key == panel.keys[-1], size


async def test_a_candidate_spans_several_fields_and_commits_as_one_entry(preamp):
    before = saved(preamp)
    app = make_app(str(preamp))
    async with app.run_test(size=SMALL) as pilot:
        committed, old = app.design, app.figures
        # Retune the bias pair together: r1, then Tab, then r2.
        await type_into(pilot, "bias.r1", "270k")
        await pilot.press("tab", "home", "shift+end", *"56k")
        await pilot.pause()
        expected = with_values(committed, {"bias.r1": 270e3, "bias.r2": 56e3})
        assert app.candidate.changes == {"bias.r1": "270k", "bias.r2": "56k"}
        assert app.candidate.design == expected
        # The row the editor left shows the candidate's value, in full, and
        # underlined (bold too): a mark that needs no colour.
        assert knobs(app).text("bias.r1") == "270 kΩ"
        rows = app.query_one("#knobs-above").content
        marked = [rows.plain[span.start:span.end] for span in rows.spans
                  if "underline" in str(span.style)]
        assert marked == ["270 kΩ"], marked
        assert "bias.r1 = 270k, bias.r2 = 56k" in status(app)
        new = analyse(expected, large_signal=False)
        assert f"{new.ic * 1e6:.3g} µA" in readout_row(app, "IC")
        assert "candidate" in header_row(app)
        assert saved(preamp) == before  # nothing is saved before Enter

        await pilot.press("enter")
        await pilot.pause()
        entry = app.session.history[-1]
        assert sorted((c.key, c.new) for c in entry.changes) == [("bias.r1", 270e3), ("bias.r2", 56e3)]
        assert read_document(preamp).design == expected
        assert app.candidate is None and app.design == expected
        assert knobs(app).text("bias.r1") == "270 kΩ" and knobs(app).text("bias.r2") == "56 kΩ"
        assert app.figures.ic == pytest.approx(analyse(expected).ic, rel=1e-12)
        assert app.figures.ic != pytest.approx(old.ic, rel=1e-3)


async def test_f9_abandons_this_row_as_escape_does(preamp):
    """F9 is Esc's twin: a terminal joins a lone Esc to a key typed soon
    after it (as an Alt key), so abandoning has a function key too.  (The
    abandoning rules are tested on the plain state, tests/test_workstate.py;
    Esc's wiring in tests/test_workbench.py.)"""
    before = saved(preamp)
    app = make_app(str(preamp))
    async with app.run_test(size=SMALL) as pilot:
        rc = field(app, "stage.rc")
        shown = rc.value
        await type_into(pilot, "stage.rc", "10k")
        await pilot.press("f9")
        await pilot.pause()
        assert app.candidate is None and rc.value == shown
        assert not rc.has_class("-candidate")
        assert "candidate abandoned (stage.rc)" in status(app)
        assert "candidate" not in header_row(app)
    assert saved(preamp) == before


async def test_invalid_text_on_the_first_row_after_start_or_a_tab_in_gives_back_its_value(preamp):
    """The editor's arrival is a checkpoint (tests/test_workstate.py) also
    where no KnobMoved comes: on the row it starts on, and on the row a Tab
    from outside the panel brings it to.  "5x" passes through a valid "5",
    which must not stay pending."""
    app = make_app(str(preamp))
    async with app.run_test(size=SMALL) as pilot:
        committed = app.design
        panel = knobs(app)
        assert panel.key == "supply.vcc"
        await pilot.press("5", "x", "tab")
        await pilot.pause()
        assert app.candidate is None, app.candidate
        assert "(committed)" in status(app)
        assert panel.text("supply.vcc") == field_text("supply.vcc", committed.supply.vcc)

        # Shift+Tab from the first row leaves the panel; the next comes back
        # to the last row, a number (the estimate's vbe).
        panel.select(panel.keys[0])
        await pilot.press("shift+tab", "shift+tab")
        await pilot.pause()
        last = panel.keys[-1]
        assert app.focused is panel.editor and panel.key == last
        await pilot.press("1", "x", "shift+tab")
        await pilot.pause()
        assert app.candidate is None, app.candidate
        assert panel.text(last) == field_text(last, get_value(committed, last))


def _typed(app, *keys: str) -> None:
    """Post keys to the app all at once, as the terminal driver does with a
    burst (over a slow link, say): nothing waits for one to be handled before
    the next arrives, unlike Pilot's press()."""
    names = {"tab": "\t", "enter": "\r", "escape": "\x1b", "backspace": "\x7f"}
    for key in keys:
        app.post_message(events.Key(key, names.get(key, key if len(key) == 1 else None)))


async def _drain(pilot) -> None:
    for _ in range(5):
        await pilot.pause()


async def test_keys_typed_ahead_keep_their_order_across_rows_and_commits(preamp):
    """Enter, Tab and the value for the next row arrive in one burst: each key
    must act on the row it was typed on, and each commit on what was typed
    before it (a binding-driven Enter or Tab would run after the characters)."""
    app = make_app(str(preamp))
    async with app.run_test(size=SMALL) as pilot:
        original = app.design
        _typed(app, "tab", "tab", "tab", *"10k", "enter", "tab", *"47", "enter")
        await _drain(pilot)
        history = app.session.history
        assert [[(c.key, c.new) for c in e.changes] for e in history[1:]] == [
            [("stage.rc", 10e3)], [("stage.re1", 47.0)]]
        assert read_document(preamp).design == with_values(original, {"stage.rc": 10e3, "stage.re1": 47.0})
        assert app.candidate is None

        # A burst over two rows and back: both values make one candidate, and
        # the editor, back on rc, shows rc's candidate value, not the old one.
        assert knobs(app).key == "stage.re1"
        _typed(app, "shift+tab", *"12k", "tab", *"68", "shift+tab")
        await _drain(pilot)
        assert app.candidate.changes == {"stage.rc": "12k", "stage.re1": "68"}
        assert knobs(app).key == "stage.rc" and knobs(app).editor.value == "12 kΩ"
        assert knobs(app).text("stage.re1") == "68 Ω"
        assert knobs(app).editor.has_class("-candidate")

        # Broken text, then Tab at once: not kept, and said so; the next row's
        # typing is unaffected.
        _typed(app, "escape", "escape", *"zz", "tab", *"56")
        await _drain(pilot)
        assert app.candidate.changes == {"stage.re1": "56"}
        assert knobs(app).text("stage.rc") == field_text("stage.rc", 10e3)
        # The status speaks of the latest key: the new candidate.
        assert "candidate stage.re1 = 56" in status(app)


async def test_editing_keys_and_the_apps_keys_in_a_burst_keep_their_order(preamp):
    """Backspace and the cursor keys are Input bindings, F7 an app binding: in
    a burst each must act where it was typed, between the characters around
    it, not after them."""
    app = make_app(str(preamp))
    async with app.run_test(size=SMALL) as pilot:
        original = app.design
        field(app, "stage.rc")
        # "12", Backspace, "3", Left, "4": 1 → 12 → 1 → 13 → 1|3 → 143.
        _typed(app, *"12", "backspace", "3", "left", "4")
        await _drain(pilot)
        assert knobs(app).editor.value == "143"
        assert app.candidate.design == with_values(original, {"stage.rc": 143.0})

        # Commit, then undo it at once: the undo must reverse this commit.
        _typed(app, "home", "shift+end", *"10k", "enter", "f7")
        await _drain(pilot)
        assert [e.action for e in app.session.history] == ["start", "set", "undo"]
        assert app.session.history[1].changes[0].new == 10e3
        assert read_document(preamp).design == original
        assert app.candidate is None


async def test_a_commit_after_the_sweep_logs_the_sweeps_figures_without_analysing_again(preamp, monkeypatch):
    """Enter after the background sweep is in: the commit takes its figures
    (a second full analysis is most of a commit's time) and logs them."""
    from test_workbench import settle

    import model.files.session

    calls = []
    real = model.files.session.analyse
    monkeypatch.setattr(model.files.session, "analyse", lambda d: calls.append(d) or real(d))
    app = make_app(str(preamp))
    async with app.run_test(size=SMALL) as pilot:
        await type_into(pilot, "stage.rc", "10k")
        await settle(pilot)
        assert app.candidate.figures.large_signal
        calls.clear()
        await pilot.press("enter")
        await pilot.pause()
        assert calls == []
        # What was logged is the full analysis of the design that was saved.
        saved_design = read_document(preamp).design
        assert saved_design.stage.rc == 10e3
        expected = analyse(saved_design)
        after = app.session.history[-1].after
        assert after["swing_up"] == pytest.approx(expected.swing_up, rel=1e-5)
        assert after["f_low"] == pytest.approx(expected.f_low, rel=1e-5)
