"""The Knobs panel through Pilot: moving the one editor between rows, and a
candidate made of several fields at once.

Expected designs and figures come from ``model`` (``with_values``,
``analyse``) or from the saved file read back, never from a previous run.
"""

from __future__ import annotations

import pytest

from model.analysis import analyse
from model.design import with_values
from model.designfile import read_document
from test_workbench import LARGE, SMALL, field, header_row, knobs, readout_row, saved, status, type_into
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
            await pilot.press("shift+tab")
            assert app.focused is not panel.editor, size


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
        # The row the editor left shows the candidate's value, in full.
        assert knobs(app).text("bias.r1") == "270 kΩ"
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


async def test_escape_drops_this_field_first_and_then_the_whole_candidate(preamp):
    before = saved(preamp)
    app = make_app(str(preamp))
    async with app.run_test(size=SMALL) as pilot:
        committed = app.design
        await type_into(pilot, "bias.r1", "270k")
        await type_into(pilot, "bias.r2", "56k")
        await pilot.press("escape")
        await pilot.pause()
        # Only r2 went: r1 is still pending, and the readout shows r1 alone.
        assert app.candidate.changes == {"bias.r1": "270k"}
        assert app.candidate.design == with_values(committed, {"bias.r1": 270e3})
        assert field(app, "bias.r2").value == field_text("bias.r2", committed.bias.r2)
        assert "still pending bias.r1 = 270k" in status(app)

        # On a field with nothing pending, Esc abandons everything left.
        await pilot.press("tab")
        await pilot.press("escape")
        await pilot.pause()
        assert app.candidate is None
        assert knobs(app).text("bias.r1") == field_text("bias.r1", committed.bias.r1)
        assert "candidate abandoned (bias.r1)" in status(app)
        assert "candidate" not in header_row(app)
        # And once more: there is nothing left to abandon, which it says.
        await pilot.press("escape")
        await pilot.pause()
        assert "nothing to abandon" in status(app)
    assert saved(preamp) == before


async def test_typing_the_committed_value_back_leaves_the_candidate(preamp):
    app = make_app(str(preamp))
    async with app.run_test(size=SMALL) as pilot:
        committed = app.design
        await type_into(pilot, "bias.r1", "270k")
        await type_into(pilot, "stage.rc", "10k")
        assert set(app.candidate.changes) == {"bias.r1", "stage.rc"}
        await type_into(pilot, "stage.rc", field_text("stage.rc", committed.stage.rc))
        assert app.candidate.changes == {"bias.r1": "270k"}
        assert not field(app, "stage.rc").has_class("-candidate")
        await type_into(pilot, "bias.r1", field_text("bias.r1", committed.bias.r1))
        assert app.candidate is None
        assert "candidate" not in header_row(app)


async def test_stepping_a_pending_field_starts_from_its_candidate_value(preamp):
    app = make_app(str(preamp))
    async with app.run_test(size=SMALL) as pilot:
        assert app.design.parts.series == "E24"
        await type_into(pilot, "stage.rc", "9.1k")
        await type_into(pilot, "bias.r1", "270k")
        field(app, "stage.rc")
        await pilot.pause()
        # Up from the pending 9.1k (not the committed value): the next E24 is 10k.
        await pilot.press("up")
        await pilot.pause()
        assert app.candidate.design.stage.rc == 10e3
        assert app.candidate.design.bias.r1 == 270e3  # the other field is untouched


async def test_a_value_the_other_fields_make_invalid_names_the_rule(preamp):
    """Each field alone is a valid number, but the candidate as a whole is
    checked: the message names the field and its limit, and the readout keeps
    the last valid candidate."""
    app = make_app(str(preamp))
    async with app.run_test(size=SMALL) as pilot:
        await type_into(pilot, "bias.r1", "270k")
        await type_into(pilot, "supply.vcc", "-3")
        assert field(app, "supply.vcc").has_class("-invalid")
        assert status(app).startswith("✗") and "supply.vcc" in status(app)
        assert app.candidate.changes == {"bias.r1": "270k"}
        await pilot.press("enter")
        await pilot.pause()
        assert status(app).startswith("✗ not committed")
        assert app.session.history == []
