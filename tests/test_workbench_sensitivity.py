"""The knob effects picture driven through Pilot: it shows the knob under
the cursor, follows Tab, and reads at 80×24 and 120×40 without colour.

The numbers expected come from :func:`model.advisor.sensitivity.sensitivity_matrix`
on the design on show (the picture's own source), and the words beside
them from their sign; the closed-form checks of the matrix itself are in
tests/test_sensitivity.py.
"""

from __future__ import annotations

import pytest
from test_workbench import LARGE, SMALL, knobs, settle
from test_workbench_pictures import picture

from model.advisor.sensitivity import sensitivity_matrix
from tui.launch import make_app
from tui.minus_sign import minus_signs
from tui.pictures import KNOB_EFFECTS, PICTURES
from tui.sensitivity_text import cell as text_cell


async def _show_knob_effects(pilot) -> None:
    for _ in range(PICTURES.index(KNOB_EFFECTS) + (1 if pilot.app.size.width < 120 else 0)):
        await pilot.press("f6")
        await settle(pilot)
    assert pilot.app.picture_kind == KNOB_EFFECTS


def cell(value: float) -> str:
    """A change as the picture writes it: the table's text, with the pictures' minus sign."""
    return minus_signs(text_cell(value))


def _row_line(shown: str, figure: str) -> str:
    return next(line for line in shown.splitlines() if line.strip().startswith(figure + " "))


@pytest.mark.parametrize("size", [SMALL, LARGE])
async def test_the_picture_shows_the_knob_under_the_cursor_and_follows_tab(preamp, size, monkeypatch):
    monkeypatch.setenv("NO_COLOR", "1")
    app = make_app(str(preamp))
    async with app.run_test(size=size) as pilot:
        await settle(pilot)
        await _show_knob_effects(pilot)
        sens = sensitivity_matrix(app.design)
        shown = picture(app)
        assert "knob effects" in shown and "▶ supply.vcc: a 1 % rise moves" in shown
        vcc = sens.rows["supply.vcc"]
        # The row in numbers and words: ic rises with the supply (divider bias).
        assert vcc["ic"] > 0 and f"{cell(vcc['ic'])} %" in _row_line(shown, "ic")
        assert "rises" in _row_line(shown, "ic")
        assert f"{cell(vcc['av_loaded'])} dB" in _row_line(shown, "av_loaded")
        # Below: the knobs that move the gain most, in order.
        top = [k.split(".")[1] for k, _ in sens.movers("av_loaded", 3)]
        below = shown.split("most on av_loaded")[1]
        assert [w for w in below.split() if w in top][:3] == top
        await pilot.press("tab")  # vcc → r1
        await settle(pilot)
        assert knobs(app).key == "bias.r1"
        shown = picture(app)
        assert "▶ bias.r1: a 1 % rise moves" in shown and "supply.vcc" not in shown
        r1 = sens.rows["bias.r1"]
        assert r1["ic"] < 0 and "falls" in _row_line(shown, "ic")
        assert f"{cell(r1['vce'])} %" in _row_line(shown, "vce")


async def test_a_knob_that_is_no_row_says_why(preamp):
    app = make_app(str(preamp))
    async with app.run_test(size=LARGE) as pilot:
        await settle(pilot)
        await _show_knob_effects(pilot)
        knobs(app).select("transistor.vceo")
        app._knob_changed()  # as a Tab would (select() alone posts no KnobMoved)
        await settle(pilot)
        shown = picture(app)
        assert "▶ transistor.vceo: not a row" in shown and "most on av_loaded" in shown


async def test_the_picture_follows_the_candidate(preamp):
    """A larger rc shifts its own row; the picture shows the candidate's."""
    from test_workbench import type_into

    from model.design.stage import with_values

    app = make_app(str(preamp))
    async with app.run_test(size=LARGE) as pilot:
        await settle(pilot)
        await _show_knob_effects(pilot)
        await type_into(pilot, "stage.rc", "22k")
        await settle(pilot)
        sens = sensitivity_matrix(with_values(app.design, {"stage.rc": 22e3}))
        shown = picture(app)
        assert "▶ stage.rc: a 1 % rise moves" in shown
        assert f"{cell(sens.rows['stage.rc']['vce'])} %" in _row_line(shown, "vce")
