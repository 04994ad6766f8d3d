"""The workbench as a new user at 80×24 or 120×40 reads it: every message,
unit, key and picture says what it must within the screen it has.

Driven through Pilot on the real app (``make_app``); expected figures come
from ``model.analyse`` of the design the test expects.
"""

from __future__ import annotations

import re
import shutil

import pytest
from rich.cells import cell_len
from test_workbench import LARGE, SMALL, readout_row, region_text, screen_text, settle, status, type_into

import tui.launch
from model.design.stage import SERIES, default_design, with_values
from model.files.session import create
from tui.app import fit_where, status_lines
from tui.bundled import default_demo
from tui.launch import make_app
from tui.minus_sign import minus_signs
from tui.screens import footer_text


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
        assert row[5:] == [minus_signs(f"{125 - limit:+g}"), "K", "↓"]
        # The row typed "125" reads back the same, with its unit.
        await pilot.press("enter")
        await pilot.pause()
        assert app.design.transistor.tj_max == 125.0
        assert knob_row(app, "tj_max").split() == ["tj_max", "125", "°C"]


# -- item 11: the title --------------------------------------------------------


def _header(app) -> str:
    return screen_text(app).splitlines()[0]


@pytest.mark.parametrize("size", [SMALL, LARGE])
async def test_the_title_keeps_the_file_name_whole_and_says_it_is_a_demo(tmp_path, monkeypatch, size):
    # A bundled demo deep in a long folder, as an installed package has it.
    deep = tmp_path / ("site-packages-" * 4) / "tui" / "demos"
    deep.mkdir(parents=True)
    shutil.copyfile(default_demo(), deep / "geophone_preamp.toml")
    monkeypatch.setattr(tui.launch, "default_demo", lambda: deep / "geophone_preamp.toml")
    monkeypatch.chdir(tmp_path)
    app = make_app(None)
    async with app.run_test(size=size) as pilot:
        await pilot.pause()
        header = _header(app)
        assert "geophone_preamp.toml" in header and "…" not in header.split("geophone_preamp.toml")[1]
        assert "demo" in header and header.rstrip().endswith(")"), header
        assert ("…/tui/demos/geophone_preamp.toml" if size == LARGE else "…/geophone_preamp.toml") in header
        # How it is open, in as many words as fit: a commit saves a copy.
        assert ("(bundled demo: the first commit saves a copy)" if size == LARGE
                else "(demo, copied on commit)") in header


def test_fit_where_shortens_the_folder_then_the_tag_never_the_name():
    tags = ("(bundled demo: the first commit saves a copy)", "(demo)")
    assert fit_where("/a/b.toml", tags, 80) == "/a/b.toml (bundled demo: the first commit saves a copy)"
    assert fit_where("/a/b.toml", tags, 20) == "/a/b.toml (demo)"
    assert fit_where("/long/folder/b.toml", tags, 22) == "…/folder/b.toml (demo)"
    assert fit_where("/long/folder/b.toml", tags, 21) == "…/b.toml (demo)"
    assert fit_where("/long/folder/b.toml", tags, 55) == "…/b.toml (bundled demo: the first commit saves a copy)"
    assert fit_where("/long/folder/b.toml", tags, 5) == "…/b.toml (demo)"
    assert fit_where("b.toml", ("",), 3) == "b.toml"


# -- item 12: the status line follows the region on show -----------------------


async def test_f3_says_what_it_shows_instead_of_the_pictures_line(preamp):
    app = make_app(str(preamp))
    async with app.run_test(size=SMALL) as pilot:
        await settle(pilot)
        await pilot.press("f6")
        await settle(pilot)
        assert status(app).startswith("picture: Bode")
        await pilot.press("f3")
        await pilot.pause()
        assert app.query_one("#ledger-box").region.width > 0
        assert status(app).startswith("ledger:") and "picture" not in status(app)
        await pilot.press("f3")
        await pilot.pause()
        assert app.query_one("#readout-box").region.width > 0
        assert status(app).startswith("readout")
    app = make_app(str(preamp))
    async with app.run_test(size=LARGE) as pilot:
        await pilot.press("f3")
        await pilot.pause()
        assert "ledger is always beside the readout" in status(app)


# -- item 1: an error on the status line fits the width -----------------------


def status_rows(app) -> list[str]:
    """The status line's rows as the screen shows them (above the footer)."""
    box = app.query_one("#status").region
    return screen_text(app).splitlines()[box.y:box.y + box.height]


async def test_a_refused_value_shows_its_rule_and_limit_within_80_columns(preamp):
    app = make_app(str(preamp))
    async with app.run_test(size=SMALL) as pilot:
        await type_into(pilot, "stage.re1", "abc")
        rows = status_rows(app)
        assert 1 <= len(rows) <= 2 and all(len(r) <= SMALL[0] for r in rows), rows
        shown = " ".join(r.strip() for r in rows)
        # The row and the whole rule, with its examples, come before the text typed.
        assert shown.startswith("✗ stage.re1: not a number")
        assert "(examples: 4k7, 2.2k, 100n, R47)" in shown
        assert shown.index("R47") < shown.index("'abc'")
        # A limit: both ends of the range are on screen, and nothing is cut inside a word.
        await type_into(pilot, "stage.re1", "-5")
        rows = status_rows(app)
        shown = " ".join(r.strip() for r in rows)
        assert shown.startswith("✗ stage.re1: must be") and "Ω" in shown and "'-5'" in shown, rows
        # Back to a valid value: one row again, the readout as tall as before.
        height = app.query_one("#readout-box").region.height
        await type_into(pilot, "stage.re1", "220")
        assert len(status_rows(app)) == 1
        assert app.query_one("#readout-box").region.height == height + 1


def test_a_status_longer_than_two_rows_is_cut_at_a_word_with_an_ellipsis():
    text = "✗ " + " ".join(f"word{n}" for n in range(60))
    lines = status_lines(text, 80)
    assert len(lines) == 2 and all(cell_len(line) <= 80 for line in lines)
    assert lines[1].startswith("  ") and lines[1].endswith(" …")
    assert lines[1][:-2].split()[-1] in text.split()  # a whole word before the ellipsis
    assert status_lines("short", 80) == ["short"]
    # Wide characters count two cells.
    assert all(cell_len(line) <= 20 for line in status_lines("✗ " + "測" * 30, 20))


# -- item 15: the footer keeps every region's key ------------------------------


@pytest.mark.parametrize("size", [SMALL, LARGE])
async def test_the_footer_lists_every_f_key_at_both_sizes_and_f3_reaches_the_ledger(preamp, size):
    app = make_app(str(preamp))
    async with app.run_test(size=size) as pilot:
        await settle(pilot)
        footer = screen_text(app).splitlines()[-1]
        assert len(footer) <= size[0]
        words = {"F1": "help", "F2": "note", "F3": "ledger", "F4": "baseline", "F5": "series",
                 "F6": "plot" if size == SMALL else "pictures", "F7": "undo", "F8": "redo",
                 "F9": "drop" if size == SMALL else "abandon", "F10": "quit"}
        for key, word in words.items():
            assert re.search(rf"(^| ){key} ?{word}\b", footer), (key, footer)
        if size == LARGE:
            assert "^P palette" in footer
        # What the footer offers reaches each region on the narrow screen.
        boxes = {name: app.query_one(f"#{name}-box") for name in ("readout", "pictures", "ledger")}
        for key, region in (("f3", "ledger"), ("f3", "readout"), ("f6", "pictures"), ("f3", "ledger")):
            await pilot.press(key)
            await pilot.pause()
            assert boxes[region].region.width > 0, (key, region)


def test_the_footer_leaves_keys_out_only_below_the_tightest_form():
    assert footer_text(78).plain.split() == ["F1help", "F2note", "F3ledger", "F4baseline", "F5series", "F6plot",
                                             "F7undo", "F8redo", "F9drop", "F10quit"]
    narrow = footer_text(40).plain
    assert len(narrow) <= 40
    for kept in ("F1help", "F3ledger", "F6plot"):
        assert kept in narrow.split()
    assert "F4baseline" not in narrow  # the first to go after the palette


# -- item 13: the series F5 steps through --------------------------------------


async def test_help_and_palette_name_every_series_a_file_takes_and_what_f5_cycles(preamp):
    app = make_app(str(preamp))
    async with app.run_test(size=LARGE) as pilot:
        await pilot.press("f1")
        await pilot.pause()
        await pilot.press("end")
        await pilot.pause()
        help_text = " ".join(screen_text(app).split())
        palette = dict((title, text) for title, text, _ in app.PALETTE)["Switch the preferred series"]
        for text in (help_text, palette):
            for series in SERIES:  # every series parts.series accepts
                assert re.search(rf"\b{series}\b", text), (series, text)
            assert "E12 → E24 → E96 → E12" in text
        assert "stocked resistor ranges" in help_text


@pytest.mark.parametrize("start, after", [("E6", "E12"), ("E12", "E24"), ("E24", "E96"), ("E48", "E96"),
                                          ("E96", "E12")])
async def test_f5_goes_on_to_the_next_of_the_cycle_from_any_series(tmp_path, start, after):
    path = tmp_path / "d.toml"
    create(str(path), with_values(default_design("common-emitter"), {"parts.series": start}))
    app = make_app(str(path))
    async with app.run_test(size=SMALL) as pilot:
        await pilot.press("f5")
        await pilot.pause()
        assert app.design.parts.series == after
        assert app.session.history[-1].changes[-1].new == after


# -- item 14: the palette speaks in one voice ----------------------------------


#: The verbs the palette's descriptions open with.
VERBS = {"List", "Write", "Switch", "Show", "Pin", "Make", "Drop", "Undo", "Redo", "Set", "Rebuild", "Quit",
         "Change", "Save"}


async def test_every_palette_entry_says_what_it_does_verb_first_and_help_is_offered_once(preamp):
    app = make_app(str(preamp))
    async with app.run_test(size=LARGE) as pilot:
        commands = list(app.get_system_commands(app.screen))
        for command in commands:
            assert command.help.split()[0] in VERBS, (command.title, command.help)
        titles = [c.title for c in commands]
        assert len(titles) == len(set(titles))
        # Textual's key panel is a second help; a maximised one-line editor shows nothing more.
        assert not {"Keys", "Maximize", "Minimize"} & set(titles)
        # On screen: the palette opened with Ctrl+P and asked for help lists one entry.
        await pilot.press("ctrl+p")
        await pilot.pause()
        await pilot.press(*"help")
        await pilot.pause(0.3)
        shown = screen_text(app)
        assert "List every key and what it does (F1)" in shown
        assert "summary of available keys" not in shown
