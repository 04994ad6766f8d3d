"""The workbench's pictures (Bode, load lines, transfer) driven through Pilot.

What each picture must show comes from the engine's own figures of the
design the test expects (``model.analyse``), never from a previous run's
numbers; the legend's words and letters are checked because the pictures
must read without colour.
"""

from __future__ import annotations

import pytest
from test_workbench import LARGE, SMALL, region_text, settle, type_into

from model.analyses.figures import analyse
from model.design.stage import with_values
from model.design.units import format_si
from tui.launch import make_app
from tui.pictures import BODE, LOAD_LINES, NOISE, PICTURES, TRANSFER

BRAILLE = {chr(c) for c in range(0x2801, 0x2900)}


def picture(app) -> str:
    return region_text(app, "#pictures-box")


def _has_curve(text: str) -> bool:
    return sum(ch in BRAILLE for ch in text) > 20


async def test_wide_screen_shows_the_bode_plot_with_its_corners(preamp):
    app = make_app(str(preamp))
    async with app.run_test(size=LARGE) as pilot:
        await settle(pilot)
        fig = analyse(app.design)
        shown = picture(app)
        assert "Bode" in shown and _has_curve(shown)
        # The legend names each mark in words, with the corner values
        # (three significant figures, as the Readout writes them).
        assert f"L f_low {format_si(fig.f_low, 'Hz')}" in shown
        assert f"H f_high {format_si(fig.f_high, 'Hz')}" in shown
        assert "Hz" in shown and "dB" in shown and "°" in shown  # axes carry units


async def test_f6_steps_through_every_picture(preamp):
    app = make_app(str(preamp))
    async with app.run_test(size=LARGE) as pilot:
        await settle(pilot)
        seen = []
        for _ in PICTURES:
            seen.append(app.picture_kind)
            await pilot.press("f6")
            await settle(pilot)
        assert seen == list(PICTURES) and app.picture_kind == BODE
        await pilot.press("f6")
        await settle(pilot)
        assert app.picture_kind == NOISE
        shown = picture(app)
        assert "Input-referred noise" in shown and "e en" in shown and "r rs alone" in shown
        await pilot.press("f6")
        await settle(pilot)
        assert app.picture_kind == LOAD_LINES
        shown = picture(app)
        assert "Load lines" in shown and "Q Q-point" in shown and "DC load line" in shown
        assert "AC load line" in shown and "VCE" in shown and "A" in shown
        # The geophone preamp clips both ways; both edges are marked.
        assert "S saturation edge" in shown and "X cut-off edge" in shown
        await pilot.press("f6")
        await settle(pilot)
        shown = picture(app)
        assert app.picture_kind == TRANSFER
        assert "Transfer" in shown and "Q quiescent" in shown and "+vpk" in shown and _has_curve(shown)


async def test_picture_follows_the_preview(preamp):
    """A smaller bypass capacitor raises f_low; the Bode legend shows the
    candidate's corner once the sweep is in, and Esc brings the committed one back."""
    app = make_app(str(preamp))
    async with app.run_test(size=LARGE) as pilot:
        await settle(pilot)
        committed = analyse(app.design)
        await type_into(pilot, "stage.ce", "4u7")
        await settle(pilot)
        candidate = analyse(with_values(app.design, {"stage.ce": 4.7e-6}))
        assert candidate.f_low > 2 * committed.f_low
        assert f"L f_low {format_si(candidate.f_low, 'Hz')}" in picture(app)
        await pilot.press("escape")
        await settle(pilot)
        assert f"L f_low {format_si(committed.f_low, 'Hz')}" in picture(app)


async def test_narrow_screen_switches_between_readout_pictures_and_ledger(preamp):
    app = make_app(str(preamp))
    async with app.run_test(size=SMALL) as pilot:
        await settle(pilot)
        boxes = {name: app.query_one(f"#{name}-box") for name in ("readout", "pictures", "ledger")}

        def showing():
            return {name for name, box in boxes.items() if box.region.width > 0}

        assert showing() == {"readout"}
        await pilot.press("f6")
        await settle(pilot)
        assert showing() == {"pictures"} and app.picture_kind == BODE
        assert _has_curve(picture(app))
        await pilot.press("f6")  # already showing: the next picture (noise, then the load lines)
        await settle(pilot)
        assert app.picture_kind == NOISE
        await pilot.press("f6")
        await settle(pilot)
        assert app.picture_kind == LOAD_LINES and "Q Q-point" in picture(app)
        await pilot.press("f3")
        await pilot.pause()
        assert showing() == {"ledger"}
        await pilot.press("f3")
        await pilot.pause()
        assert showing() == {"readout"}


@pytest.mark.parametrize("size", [SMALL, LARGE])
async def test_the_readout_names_the_part_setting_each_corner(preamp, size):
    app = make_app(str(preamp))
    async with app.run_test(size=size) as pilot:
        await settle(pilot)
        fig = analyse(app.design)
        text = region_text(app, "#readout-box")
        assert format_si(fig.f_low, "Hz") in text and format_si(fig.f_high, "Hz") in text
        by = f"set by {fig.response.low_by.part} ({format_si(fig.response.low_by.freq, 'Hz')})"
        assert by in text


@pytest.mark.parametrize("size", [SMALL, LARGE])
async def test_results_arriving_under_a_dialog_are_kept(preamp, size):
    """The sweeps finish while the help screen is open: nothing fails, and
    the readout and picture show the candidate's figures once it closes."""
    app = make_app(str(preamp))
    async with app.run_test(size=size) as pilot:
        await settle(pilot)
        await type_into(pilot, "stage.ce", "4u7")
        await pilot.press("f1")
        await settle(pilot)
        assert app.is_running and app.candidate.figures.large_signal
        await pilot.press("escape")
        await settle(pilot)
        candidate = analyse(with_values(app.design, {"stage.ce": 4.7e-6}))
        assert format_si(candidate.f_low, "Hz") in region_text(app, "#readout-box")
        if size == LARGE:
            assert f"L f_low {format_si(candidate.f_low, 'Hz')}" in picture(app)
