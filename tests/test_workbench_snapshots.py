"""Whole-screen snapshots of the workbench at the two sizes it is designed for.

The baselines are SVGs under tests/__snapshots__/; after a deliberate change
to the layout, look at the new screens and accept them with
``python3 -m pytest tests/test_workbench_snapshots.py --snapshot-update``.

To keep the pictures the same from run to run: the design file has no
history (the ledger would show clock times), it is opened by a relative name
(the header shows the path), the cursor does not blink, and the large-signal
sweep has finished before the picture is taken.
"""

from __future__ import annotations

import shutil
from pathlib import Path

import pytest

pytest.importorskip("pytest_textual_snapshot")

from test_workbench import settle  # noqa: E402
from textual.widgets import Input  # noqa: E402

from tui.launch import make_app  # noqa: E402

DEMO = Path(__file__).resolve().parent.parent / "saved_designs" / "geophone_preamp.toml"


@pytest.fixture
def app(tmp_path, monkeypatch):
    monkeypatch.chdir(tmp_path)
    monkeypatch.delenv("NO_COLOR", raising=False)  # colour is part of the picture
    shutil.copyfile(DEMO, tmp_path / "preamp.toml")
    return make_app("preamp.toml")


def _steady(pilot):
    for field in pilot.app.query(Input):
        field.cursor_blink = False


def test_opening_screen_80x24(app, snap_compare):
    async def before(pilot):
        _steady(pilot)
        await pilot.pause()

    assert snap_compare(app, terminal_size=(80, 24), run_before=before)


def test_candidate_with_ledger_120x40(app, snap_compare):
    async def before(pilot):
        _steady(pilot)
        # From vcc, where the editor starts, to rc: r1, r2, rc.
        await pilot.press("tab", "tab", "tab", "1", "0", "k")
        await settle(pilot)

    assert snap_compare(app, terminal_size=(120, 40), run_before=before)


def test_load_lines_picture_80x24(app, snap_compare):
    """The pictures take the readout's place on a narrow screen (F6 three
    times: show them, then step from the Bode plot past the noise to the
    load lines)."""
    async def before(pilot):
        _steady(pilot)
        await settle(pilot)
        await pilot.press("f6", "f6", "f6")
        await settle(pilot)

    assert snap_compare(app, terminal_size=(80, 24), run_before=before)


def test_transfer_picture_80x24(app, snap_compare):
    """The transfer, with the view around Q where ±vpk can be read."""
    async def before(pilot):
        _steady(pilot)
        await settle(pilot)
        await pilot.press("f6", "f6", "f6", "f6")
        await settle(pilot)

    assert snap_compare(app, terminal_size=(80, 24), run_before=before)


def test_refused_value_80x24(app, snap_compare):
    """A value that is not a number: the rule on the status line, on two rows."""
    async def before(pilot):
        _steady(pilot)
        await settle(pilot)
        # From vcc, where the editor starts, to re1: r1, r2, rc, re1.
        await pilot.press("tab", "tab", "tab", "tab", "a", "b", "c")
        await settle(pilot)

    assert snap_compare(app, terminal_size=(80, 24), run_before=before)
