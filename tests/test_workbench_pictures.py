"""The workbench's pictures (Bode, load lines, transfer) driven through Pilot.

What each picture must show comes from the engine's own figures of the
design the test expects (``model.analyse``), never from a previous run's
numbers; the legend's words and letters are checked because the pictures
must read without colour.
"""

from __future__ import annotations

import re

import numpy as np
import pytest
from test_workbench import LARGE, SMALL, region_text, settle, type_into

from model.analyses.figures import analyse
from model.design.stage import TOPOLOGIES, default_design, with_values
from model.design.units import format_si, parse_value
from tui.chart import render_stack
from tui.launch import make_app
from tui.messages import PictureReady
from tui.pictures import BODE, LOAD_LINES, NEAR_Q_SPAN, NOISE, PICTURES, TRANSFER, bode, charts_for
from tui.readout_table import readout_table

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
        assert "Transfer" in shown and "Q quiescent" in shown and "A ±vpk" in shown and _has_curve(shown)


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


# -- issue 15: one corner one way, the midband on the axis, ±vpk readable ------


def _y_labels(rows: list[str]) -> list[float]:
    """The y tick values of a rendered chart (the labels left of "┤"), in dB."""
    labels = [row.split("┤")[0].strip() for row in rows if "┤" in row]
    return [parse_value(label.removesuffix("dB").strip()) for label in labels if label]


@pytest.mark.parametrize("topology", TOPOLOGIES)
def test_the_bode_legend_writes_each_corner_as_the_readout_does(topology):
    design = default_design(topology)
    fig = analyse(design)
    legend = " ".join(render_stack(bode(design, fig), 60, 24))
    table = readout_table(fig, None, shown_label="committed", reference_label="", tj_max=150.0).plain
    for label, symbol in (("f_low", "L"), ("f_high", "H")):
        row = next(line for line in table.splitlines() if line.strip().startswith(label + " "))
        cell = row.split(label, 1)[1].strip()
        assert f"{symbol} {label} {cell}" in legend, (label, cell, legend)


@pytest.mark.parametrize("size", [(60, 24), (42, 22), (52, 30), (80, 40)])
@pytest.mark.parametrize("topology", TOPOLOGIES)
def test_the_bode_gain_axis_has_a_labelled_tick_either_side_of_the_midband(topology, size):
    design = default_design(topology)
    fig = analyse(design)
    gain = bode(design, fig)[0]
    midband = float(20 * np.log10(abs(fig.av_source)))
    ticks = _y_labels(render_stack((gain,), *size))
    assert any(t >= midband for t in ticks) and any(t <= midband for t in ticks), (midband, ticks)


async def test_the_bode_gain_axis_reaches_the_midband_on_screen(preamp):
    app = make_app(str(preamp))
    async with app.run_test(size=LARGE) as pilot:
        await settle(pilot)
        midband = float(20 * np.log10(abs(app.figures.av_source)))
        rows = picture(app).splitlines()
        gain_rows = rows[:next(i for i, row in enumerate(rows) if "Bode phase" in row)]
        ticks = _y_labels(gain_rows)
        assert min(ticks) <= midband <= max(ticks), (midband, ticks)


@pytest.mark.parametrize("size", [SMALL, LARGE])
async def test_the_transfer_shows_plus_minus_vpk_apart_from_q_with_one_minus_sign(preamp, size):
    app = make_app(str(preamp))
    async with app.run_test(size=size) as pilot:
        await settle(pilot)
        while app.picture_kind != TRANSFER:
            await pilot.press("f6")
            await settle(pilot)
        shown = picture(app)
        vpk = app.design.source.vpk
        assert f"A ±vpk {format_si(vpk, 'V')}" in shown
        rows = shown.splitlines()
        near = next(i for i, row in enumerate(rows) if row.startswith("Near Q"))
        # In the near-Q view the two A marks stand well apart from Q and each other.
        plot = rows[near + 1:]
        marks = plot[0]
        q_col = next(row.index("Q") for row in plot if "Q" in row)
        a_cols = [i for i, ch in enumerate(marks) if ch == "A"]
        assert len(a_cols) == 2 and all(abs(a - q_col) >= 4 for a in a_cols), (a_cols, q_col, shown)
        # Its x labels are on the scale of vpk (mV here), either side of 0.
        x_labels = next(row for row in plot if "0 V" in row and "┤" not in row)
        assert "−" in x_labels and "mV" in x_labels
        # One minus sign: U+2212 for every negative number, never a hyphen before a digit.
        assert not re.search(r"-\d", shown), shown


def test_a_large_amplitude_needs_no_near_q_view():
    design = with_values(default_design("common-emitter"), {"source.vpk": 0.2})
    fig = analyse(design)
    assert len(charts_for(TRANSFER, design, fig)) == 1
    small = with_values(design, {"source.vpk": 1e-3})
    charts = charts_for(TRANSFER, small, analyse(small))
    assert len(charts) == 2 and charts[1].x.hi == pytest.approx(NEAR_Q_SPAN * 1e-3)


async def test_a_picture_dropped_while_another_design_was_on_show_is_drawn_when_it_is_back(preamp):
    """The committed design's Bode arrives while a candidate is on show (so it
    is dropped); once Esc brings the committed design back, its picture is
    drawn again rather than the candidate's left beside the committed Readout."""
    app = make_app(str(preamp))
    async with app.run_test(size=LARGE) as pilot:
        await settle(pilot)
        committed, fig = app.design, app.figures
        await type_into(pilot, "load.cl", "1n")
        await settle(pilot)
        candidate = analyse(with_values(committed, {"load.cl": 1e-9}))
        assert f"H f_high {format_si(candidate.f_high, 'Hz')}" in picture(app)
        # A draw of the committed design, asked for and arriving now, under the candidate.
        size = app._picture_asked[3]
        app._picture_asked = (committed, BODE, app._picture_key(), size)
        app.post_message(PictureReady(committed, (BODE, app._picture_key()), (), None))
        await pilot.pause()
        await pilot.press("escape")
        await settle(pilot)
        assert f"H f_high {format_si(fig.f_high, 'Hz')}" in picture(app)
