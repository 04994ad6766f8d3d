"""The workbench as a new user at 80×24 or 120×40 reads it: every message,
unit, key and picture says what it must within the screen it has.

Driven through Pilot on the real app (``make_app``); expected figures come
from ``model.analyse`` of the design the test expects.
"""

from __future__ import annotations

from test_workbench import LARGE, SMALL, readout_row, region_text, screen_text, settle, type_into

from tui.launch import make_app


def knob_row(app, label: str) -> str:
    rows = [line.strip() for line in region_text(app, "#knobs").splitlines() if line.strip().startswith(label + " ")]
    assert rows, f"no {label!r} row in the Knobs"
    return rows[0].rstrip("▕▏▁▂▃▄▅▆▇█ ")


# -- item 10: units ------------------------------------------------------------


async def test_tj_max_shows_its_unit_in_the_knobs_and_a_value_in_each_readout_column(preamp):
    app = make_app(str(preamp))
    async with app.run_test(size=LARGE) as pilot:
        await settle(pilot)
        limit = app.design.transistor.tj_max
        assert knob_row(app, "tj_max").split() == ["tj_max", f"{limit:g}", "°C"]
        # A candidate elsewhere: the committed column has its limit too.
        await type_into(pilot, "stage.rc", "10k")
        assert readout_row(app, "tj_max").split() == ["tj_max", f"{limit:g}", "°C", f"{limit:g}", "°C"]
        # A candidate of the limit itself: each column its own, and the move.
        await pilot.press("escape")
        await type_into(pilot, "transistor.tj_max", "125")
        assert app.candidate.design.transistor.tj_max == 125.0
        row = readout_row(app, "tj_max").split()
        assert row[:5] == ["tj_max", f"{limit:g}", "°C", "125", "°C"]
        assert row[5:] == [f"{125 - limit:+g}", "K", "↓"]
        # The row typed "125" reads back the same, with its unit.
        await pilot.press("enter")
        await pilot.pause()
        assert app.design.transistor.tj_max == 125.0
        assert knob_row(app, "tj_max").split() == ["tj_max", "125", "°C"]
