"""The workbench's advisor keys through Pilot: Ctrl+T aims the knob under the
cursor, Ctrl+O lists the ways; either result is a candidate until Enter."""

from __future__ import annotations

import math

from model.advisor.aim import aim
from model.advisor.options import options
from model.analyses.figures import analyse
from model.design import eseries
from model.design.stage import with_values
from tests.test_workbench import SMALL, knobs, saved, settle, status
from tui.advisor_screens import OptionsDialog, TargetPrompt
from tui.launch import make_app


def db(gain: float) -> float:
    return 20 * math.log10(abs(gain))


async def test_ctrl_t_aims_the_knob_under_the_cursor_as_a_candidate(preamp):
    before = saved(preamp)
    app = make_app(str(preamp))
    async with app.run_test(size=SMALL) as pilot:
        committed = app.design
        knobs(app).select("stage.rc")
        await pilot.pause()
        await pilot.press("ctrl+t")
        await pilot.pause()
        assert isinstance(app.screen, TargetPrompt)
        await pilot.press(*"av_loaded=33dB", "enter")
        await pilot.pause()
        assert not isinstance(app.screen, TargetPrompt)
        expected = aim(committed, "av_loaded", "33dB", ("stage.rc",)).chosen.values["stage.rc"]
        assert app.candidate is not None and app.design == committed
        assert app.candidate.design == with_values(committed, {"stage.rc": expected})
        assert eseries.nearest(expected, "E24") == expected
        assert "aimed av_loaded" in status(app)
        assert knobs(app).editor.value == knobs(app).text("stage.rc")
        assert saved(preamp) == before  # a candidate is not saved
        await pilot.press("enter")  # now it is committed, as one entry
        await pilot.pause()
        assert app.session.history[-1].changes[0].key == "stage.rc"
        assert abs(db(analyse(app.design).av_loaded) - 33) < 0.5


async def test_an_unreachable_aim_says_so_on_the_status_line(preamp):
    app = make_app(str(preamp))
    async with app.run_test(size=SMALL) as pilot:
        knobs(app).select("stage.rc")
        await pilot.press("ctrl+t", *"av_loaded=-200", "enter")
        await pilot.pause()
        assert app.candidate is None
        assert "cannot reach" in status(app) and "closest" in status(app)


async def test_a_bad_target_says_so(preamp):
    app = make_app(str(preamp))
    async with app.run_test(size=SMALL) as pilot:
        await pilot.press("ctrl+o", *"gain=3", "enter")
        await pilot.pause()
        assert "not a figure" in status(app)


async def test_ctrl_o_lists_the_ways_and_enter_takes_one(preamp):
    app = make_app(str(preamp))
    async with app.run_test(size=SMALL) as pilot:
        committed = app.design
        await pilot.press("ctrl+o")
        await pilot.pause()
        assert isinstance(app.screen, TargetPrompt)
        await pilot.press(*"av_loaded=-40", "enter")
        await settle(pilot)
        assert isinstance(app.screen, OptionsDialog)
        best = [o for o in options(committed, "av_loaded", "-40") if o.reached]
        await pilot.press("down", "enter")  # the second way, without a mouse
        await pilot.pause()
        assert not isinstance(app.screen, OptionsDialog)
        assert app.candidate is not None
        assert app.candidate.design == best[1].design
        assert app.design == committed


async def test_esc_in_the_options_dialog_changes_nothing(preamp):
    app = make_app(str(preamp))
    async with app.run_test(size=SMALL) as pilot:
        await pilot.press("ctrl+o", *"av_loaded=-40", "enter")
        await settle(pilot)
        assert isinstance(app.screen, OptionsDialog)
        await pilot.press("f9")
        await pilot.pause()
        assert not isinstance(app.screen, OptionsDialog) and app.candidate is None
