"""The workbench's spread: the Spread picture, the yield in the Readout and
in the ledger, driven through Pilot.  Expected values come from the model
run on the same design, never from an earlier run's output."""

from __future__ import annotations

from test_workbench import LARGE, SMALL, readout, region_text, settle, type_into

from model.design.stage import with_values
from model.files.designfile import read_document
from model.spread.analysis import LEDGER_SAMPLES, quick_yield
from tui.launch import make_app
from tui.pictures import PICTURES, SPREAD
from tui.spread_text import percent


def picture(app) -> str:
    return region_text(app, "#pictures-box")


async def _to_spread(pilot) -> None:
    while pilot.app.picture_kind != SPREAD:
        await pilot.press("f6")
    await settle(pilot)


async def test_the_spread_picture_shows_the_yield_limits_and_nominal(preamp):
    app = make_app(str(preamp))
    async with app.run_test(size=LARGE) as pilot:
        await settle(pilot)
        await _to_spread(pilot)
        y = quick_yield(app.design, LEDGER_SAMPLES)
        shown = picture(app)
        assert f"av_loaded · yield {percent(y.value)}" in shown
        assert "N nominal" in shown and "m spec min" in shown and "M spec max" in shown
        assert "^G figure" in shown


async def test_ctrl_g_steps_through_the_figures_spec_keys_first(preamp):
    app = make_app(str(preamp))
    async with app.run_test(size=LARGE) as pilot:
        await settle(pilot)
        specs = [s.key for s in app.design.spec]
        seen = [app.spread_key]
        for _ in specs[1:]:
            await pilot.press("ctrl+g")
            seen.append(app.spread_key)
        assert seen == specs and app.picture_kind == SPREAD
        await settle(pilot)
        assert f"{specs[-1]} · yield" in picture(app)


async def test_the_readout_shows_the_yield_and_follows_a_candidate(preamp):
    app = make_app(str(preamp))
    async with app.run_test(size=LARGE) as pilot:
        await settle(pilot)
        y = quick_yield(app.design, LEDGER_SAMPLES)
        assert "yield" in readout(app) and f"{100 * y.value:.1f} %" in readout(app)
        # A larger bypass capacitor lowers f_low, the spec that fails most.
        await type_into(pilot, "stage.ce", "680u")
        await settle(pilot)
        better = quick_yield(with_values(app.design, {"stage.ce": 680e-6}), LEDGER_SAMPLES)
        assert better.value > y.value and f"{100 * better.value:.1f} %" in readout(app)


async def test_a_commit_logs_the_yield_change(preamp):
    committed = read_document(preamp).design
    app = make_app(str(preamp))
    async with app.run_test(size=LARGE) as pilot:
        await settle(pilot)
        await type_into(pilot, "stage.ce", "680u")
        await pilot.press("enter")
        await settle(pilot)
    entry = read_document(preamp).history[-1]
    before = quick_yield(committed, LEDGER_SAMPLES).value
    after = quick_yield(with_values(committed, {"stage.ce": 680e-6}), LEDGER_SAMPLES).value
    assert entry.before["yield"] == float(f"{before:.6g}") and entry.after["yield"] == float(f"{after:.6g}")
    assert after > before


async def test_spread_picture_fits_the_small_screen(preamp):
    app = make_app(str(preamp))
    async with app.run_test(size=SMALL) as pilot:
        await settle(pilot)
        await pilot.press("f6")  # show the pictures on a narrow screen
        for _ in PICTURES[1:PICTURES.index(SPREAD) + 1]:
            await pilot.press("f6")
        await settle(pilot)
        assert app.picture_kind == SPREAD and "av_loaded · yield" in picture(app)
