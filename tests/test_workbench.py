"""The workbench screen driven through Textual's Pilot, on the real app that
``make_app`` builds (the same one the command line runs).

Expected figures always come from ``model.analyse`` of the design the test
expects, or from the saved file read back, never from numbers copied out of a
previous run, so a wrong engine or a wrong wire-up both fail here.
"""

from __future__ import annotations

import errno
import html
import math
import pathlib
import re

import pytest
from rich.cells import cell_len
from textual.worker import WorkerCancelled

import tui.app
from model.analyses.figures import analyse
from model.design.stage import with_values
from model.design.stepping import step, step_decade
from model.files.designfile import read_document
from model.files.savefile import LockHeld
from model.files.session import DesignSession
from tui.bundled import default_demo, demo_dir
from tui.launch import make_app
from tui.minus_sign import minus_signs
from tui.screens import HelpScreen, NotePrompt
from tui.widgets.knobs import Knobs, field_text
from tui.widgets.ledger_pane import EMPTY, LedgerPane

DEMOS = pathlib.Path(__file__).resolve().parent.parent / "saved_designs"
SMALL = (80, 24)
LARGE = (120, 40)


# -- helpers ------------------------------------------------------------------


#: One run of text in Rich's SVG export (what ``App.export_screenshot``
#: returns): its left edge, its width and the line it is clipped to.
_SVG_TEXT = re.compile(r'<text class="[^"]*" x="([0-9.]+)" y="[0-9.]+" textLength="([0-9.]+)" '
                       r'clip-path="url\(#[^)]*-line-([0-9]+)\)">([^<]*)</text>')


def screen_text(app) -> str:
    """The screen as plain text, read back from ``App.export_screenshot``
    (public Textual API), so tests read what a person would see, including
    anything cropped or hidden by the layout and any dialog over the screen.

    Rich writes each run of text at x = column · (cell width) on its own
    clipped line; the cell width is a run's textLength over its length in cells.
    """
    width, height = app.size
    rows = [[" "] * width for _ in range(height)]
    runs = [(float(x), float(length), int(line), html.unescape(text).replace("\xa0", " "))
            for x, length, line, text in _SVG_TEXT.findall(app.export_screenshot())]
    runs = [run for run in runs if cell_len(run[3]) > 0]
    cell = runs[0][1] / cell_len(runs[0][3])
    for x, _, line, text in runs:
        column = round(x / cell)
        for offset, char in enumerate(text):
            if column + offset < width:
                rows[line][column + offset] = char
    return "\n".join("".join(row).rstrip() for row in rows) + "\n"


def region_text(app, selector: str) -> str:
    """The visible part of one widget, cut out of :func:`screen_text`."""
    region = app.screen.query_one(selector).region
    lines = screen_text(app).splitlines()[region.y:region.y + region.height]
    return "\n".join(line[region.x:region.x + region.width] for line in lines)


def readout(app) -> str:
    return region_text(app, "#readout-box")


#: Textual's scrollbar glyphs: a readout taller than its box shows one in
#: its last column, which is not part of any row.
SCROLLBAR = "▁▂▃▄▅▆▇█▔▕▏▐▌"


def readout_row(app, label: str) -> str:
    """The readout line for one figure (labels are indented under group
    headings), without the scrollbar's column."""
    rows = [line.rstrip().rstrip(SCROLLBAR).strip() for line in readout(app).splitlines()
            if line.strip().startswith(label + " ")]
    assert rows, f"no {label!r} row in the readout:\n{readout(app)}"
    return rows[0]


def header_row(app) -> str:
    return next(line for line in readout(app).splitlines() if "figure" in line)


def status(app) -> str:
    """The status line's text, its rows (at most two, wrapped at spaces) joined again."""
    return " ".join(line.strip() for line in str(app.query_one("#status").content).splitlines())


def knobs(app) -> Knobs:
    return app.query_one(Knobs)


def field(app, key: str):
    """The Knobs editor, on ``key``'s row: moved there (as Tabs would) if it is
    elsewhere, as it is; there is one editor for all the rows."""
    panel = knobs(app)
    if panel.key != key:
        panel.select(key)
    return panel.editor


async def type_into(pilot, key: str, text: str) -> None:
    """Select all of a field and type ``text`` over it, key by key.

    Moving the editor to a row selects its text (as Tab does); on the row it
    is already on, the text is selected with Home, Shift+End.
    """
    panel = knobs(pilot.app)
    widget = panel.editor
    if pilot.app.focused is widget and panel.key == key:
        await pilot.press("home", "shift+end")
    else:
        panel.select(key)
        widget.focus()
        await pilot.pause()
    assert widget.selected_text == widget.value
    await pilot.press(*text)
    await pilot.pause()


async def settle(pilot) -> None:
    """Let the debounced large-signal sweep start, finish and be shown.

    Waiting for workers alone is not enough: until the debounce timer fires
    there is no worker to wait for.
    """
    await pilot.pause(tui.app.DEBOUNCE + 0.1)
    # The sweep's result starts the picture worker: wait for that one too.
    # A worker replaced by a newer one (exclusive) ends cancelled; that is fine.
    for _ in range(3):
        try:
            await pilot.app.workers.wait_for_complete()
        except WorkerCancelled:
            pass
        await pilot.pause()


def saved(path) -> bytes:
    return pathlib.Path(path).read_bytes()


# -- typing and previewing ---------------------------------------------------------


async def test_typing_with_a_prefix_makes_a_candidate_and_previews_it(preamp):
    before = saved(preamp)
    app = make_app(str(preamp))
    async with app.run_test(size=SMALL) as pilot:
        committed, old = app.design, app.figures
        for text, value in (("4k7", 4.7e3), ("10k", 10e3)):
            await type_into(pilot, "stage.rc", text)
            assert app.candidate is not None
            assert app.candidate.changes == {"stage.rc": text}
            # Only the one key moved, and the committed design did not.
            assert app.candidate.design == with_values(committed, {"stage.rc": value})
            assert app.design == committed
            assert field(app, "stage.rc").has_class("-candidate")
            head = header_row(app)
            assert "candidate" in head and "committed" in head
            assert "Enter commits" in status(app)

        # The change column, for 10k: one screen line per figure, with its arrow.
        new = analyse(with_values(committed, {"stage.rc": 10e3}), large_signal=False)
        gain = readout_row(app, "av_loaded")
        assert minus_signs(f"{20 * math.log10(abs(new.av_loaded) / abs(old.av_loaded)):+.2f} dB") in gain
        assert gain.endswith("↑" if abs(new.av_loaded) > abs(old.av_loaded) else "↓")
        rout = readout_row(app, "rout")
        assert f"{100 * (new.rout - old.rout) / old.rout:+.3g} %" in rout
        assert rout.endswith("↑" if new.rout > old.rout else "↓")
        # The region did not move, so it has no arrow.
        assert old.region == new.region
        assert not readout_row(app, "region").endswith(("↑", "↓"))

        assert app.session.history == []
    assert saved(preamp) == before  # a candidate is never saved


# -- committing and abandoning ---------------------------------------------------


async def test_commit_logs_an_entry_with_the_note_and_saves_it(preamp):
    app = make_app(str(preamp))
    async with app.run_test(size=SMALL) as pilot:
        original = app.design
        assert app.session.history == []  # the demo has never been tuned
        ledger = app.query_one(LedgerPane)
        assert ledger.option_count == 1 and str(ledger.get_option_at_index(0).prompt) == EMPTY
        assert ledger.get_option_at_index(0).disabled

        await pilot.press("f2")
        assert isinstance(app.screen, NotePrompt)
        await pilot.press(*"more gain", "enter")
        await pilot.pause()
        assert app.note == "more gain"
        # Esc in the prompt keeps the note as it was.
        await pilot.press("ctrl+n", *" and", "escape")
        await pilot.pause()
        assert not isinstance(app.screen, NotePrompt)
        assert app.note == "more gain"

        await type_into(pilot, "stage.rc", "10k")
        await pilot.press("enter")
        await pilot.pause()

        history = app.session.history
        # A file never logged gets its start entry first, then the change.
        assert [e.action for e in history] == ["start", "set"]
        entry = history[-1]
        assert entry.note == "more gain"
        assert [(c.key, c.old, c.new) for c in entry.changes] == [("stage.rc", original.stage.rc, 10e3)]
        assert app.candidate is None and app.note == ""
        assert app.design.stage.rc == 10e3
        assert f"saved entry #{entry.number}" in status(app)
        assert app.query_one(LedgerPane).option_count == len(history)

        doc = read_document(preamp)
        assert doc.design == with_values(original, {"stage.rc": 10e3})
        assert [e.action for e in doc.history] == ["start", "set"]
        assert doc.history[-1].note == "more gain"
        assert doc.history[-1].changes == entry.changes

        # The readout is back to the committed design alone.
        assert "candidate" not in header_row(app)
        await settle(pilot)
        expected = analyse(doc.design)
        assert app.figures.av_loaded == pytest.approx(expected.av_loaded, rel=1e-12)
        assert app.figures.swing_up == pytest.approx(expected.swing_up, rel=1e-9)


async def test_escape_abandons_the_candidate(preamp):
    before = saved(preamp)
    app = make_app(str(preamp))
    async with app.run_test(size=SMALL) as pilot:
        rc = field(app, "stage.rc")
        shown = rc.value
        await type_into(pilot, "stage.rc", "10k")
        assert app.candidate is not None
        await pilot.press("escape")
        await pilot.pause()
        assert rc.value == shown
        assert app.candidate is None
        assert not rc.has_class("-candidate")
        assert "abandoned" in status(app)
        assert "candidate" not in header_row(app)

        # Enter on the untouched field has nothing to commit.
        await pilot.press("enter")
        await pilot.pause()
        assert "nothing to commit" in status(app)
        assert app.session.history == []
    assert saved(preamp) == before


# -- stepping ---------------------------------------------------------------------
# The stepping rules (the series, decades, a pending value's start, F5) are
# tested on the plain state in tests/test_workstate.py; this is the wiring.


async def test_the_stepping_keys_step_the_row_the_editor_is_on(preamp):
    """PgUp/PgDn by a decade, Up/Down along the series; the editor shows the
    stepped value, marked as a candidate."""
    app = make_app(str(preamp))
    async with app.run_test(size=SMALL) as pilot:
        committed = app.design
        rc = field(app, "stage.rc")
        await pilot.pause()
        value = committed.stage.rc
        for key, moved in (("pageup", lambda v: step_decade("stage.rc", v, 1)),
                           ("down", lambda v: step("stage.rc", v, -1, committed.parts.series)),
                           ("pagedown", lambda v: step_decade("stage.rc", v, -1))):
            await pilot.press(key)
            await pilot.pause()
            value = moved(value)
            assert app.candidate.design == with_values(committed, {"stage.rc": value}), key
            assert rc.value == field_text("stage.rc", value) and rc.has_class("-candidate"), key
        assert read_document(preamp).design == committed  # stepping previews; only Enter saves


# -- invalid input ----------------------------------------------------------------
# The rules are tested on the plain state in tests/test_workstate.py; this is
# the wiring: the editor's mark, the ✗ status line, and the mark cleared on Tab.


async def test_invalid_text_is_marked_and_refused_on_screen(preamp):
    before = saved(preamp)
    app = make_app(str(preamp))
    async with app.run_test(size=SMALL) as pilot:
        rc = field(app, "stage.rc")
        await type_into(pilot, "stage.rc", "10k")
        await type_into(pilot, "stage.rc", "abc")
        assert rc.value == "abc" and rc.has_class("-invalid")
        assert status(app).startswith("✗") and "not a number" in status(app)
        # The readout still shows the last valid candidate, not the broken text.
        gain = analyse(with_values(app.design, {"stage.rc": 10e3}), large_signal=False).av_loaded
        assert minus_signs(f"{gain:+.4g}") in readout_row(app, "av_loaded")  # the screen's minus
        assert "candidate" in header_row(app)

        await pilot.press("enter")
        await pilot.pause()
        assert status(app).startswith("✗ not committed") and "not a number" in status(app)
        await pilot.press("tab")
        await pilot.pause()
        assert knobs(app).key == "stage.re1" and not rc.has_class("-invalid")
        assert status(app).startswith("✗") and "'abc' is not valid and was dropped" in status(app)
        assert app.session.history == []
    assert saved(preamp) == before


# -- undo and redo ------------------------------------------------------------------


async def test_undo_and_redo_are_logged_entries(preamp):
    app = make_app(str(preamp))
    async with app.run_test(size=SMALL) as pilot:
        original = app.design
        await type_into(pilot, "stage.rc", "10k")
        await pilot.press("enter")
        await pilot.pause()
        changed = app.design
        rc = field(app, "stage.rc")
        changed_text = rc.value
        # The focus stays in a field: the keys must reach the app from there.
        assert app.focused is rc

        for undo, redo in (("f7", "f8"), ("ctrl+z", "ctrl+y")):
            await pilot.press(undo)
            await pilot.pause()
            entry = app.session.history[-1]
            assert entry.action == "undo", undo
            assert app.design == original
            assert rc.value != changed_text
            assert read_document(preamp).design == original

            await pilot.press(redo)
            await pilot.pause()
            entry = app.session.history[-1]
            assert entry.action == "redo", redo
            assert app.design == changed
            assert rc.value == changed_text

        doc = read_document(preamp)
        # Each undo or redo reverses the entry just before it: the set, then the
        # undo, then the redo (undoing a redo), and so on.
        assert [(e.action, e.reverses) for e in doc.history] == [
            ("start", None), ("set", None), ("undo", 2), ("redo", 3), ("undo", 4), ("redo", 5)]
        assert doc.design == changed
        assert app.query_one(LedgerPane).option_count == 6

        # Nothing is left to redo: refused with a message, nothing logged.
        await pilot.press("f8")
        await pilot.pause()
        assert "nothing to redo" in status(app)
        assert len(read_document(preamp).history) == 6


# -- baselines ---------------------------------------------------------------------


async def test_pinning_a_baseline_with_f4_and_from_the_ledger(preamp):
    app = make_app(str(preamp))
    async with app.run_test(size=SMALL) as pilot:
        original = app.design
        await pilot.press("f4")
        await pilot.pause()
        assert app.baseline is not None
        assert app.baseline.design == original
        head = header_row(app)
        assert app.baseline.label in head and "now" in head

        # A candidate is compared with the baseline, not with the committed design.
        await type_into(pilot, "stage.rc", "10k")
        head = header_row(app)
        assert app.baseline.label in head and "candidate" in head and "committed" not in head

        await pilot.press("enter")
        await pilot.pause()
        await pilot.press("f4")
        await pilot.pause()
        assert app.baseline is None
        assert "unpinned" in status(app)
        assert "baseline" not in header_row(app)

        # On a narrow screen the ledger is hidden until F3 shows it.
        ledger_box = app.query_one("#ledger-box")
        assert ledger_box.region.width == 0
        await pilot.press("f3")
        await pilot.pause()
        assert ledger_box.region.width > 0
        shown = region_text(app, "#ledger-box")
        assert "#1" in shown and "#2" in shown

        app.query_one(LedgerPane).focus()
        await pilot.press("up", "enter")  # from the newest entry (#2) up to the start (#1)
        await pilot.pause()
        assert app.baseline is not None and app.baseline.label == "#1"
        assert app.baseline.design == original
        assert app.baseline.figures.av_loaded == pytest.approx(analyse(original).av_loaded, rel=1e-12)

        await pilot.press("f3")
        await pilot.pause()
        assert "#1" in header_row(app)
        db = 20 * math.log10(abs(app.figures.av_loaded) / abs(analyse(original).av_loaded))
        assert f"{db:+.2f} dB" in readout_row(app, "av_loaded")

        await pilot.press("f4")
        await pilot.pause()
        assert app.baseline is None


# -- files that cannot be written ----------------------------------------------------


async def test_a_locked_file_opens_read_only_and_refuses_commits(preamp):
    before = saved(preamp)
    asked = []
    holder = DesignSession(str(preamp))  # another editor has the file
    try:
        app = make_app(str(preamp), asker=lambda q: asked.append(q) or True)
        assert app is not None and asked and "being edited" in asked[0]
        assert app.session.read_only
        async with app.run_test(size=SMALL) as pilot:
            assert "read-only" in app.sub_title
            await type_into(pilot, "stage.rc", "10k")
            assert app.candidate is not None  # trying values is still allowed
            await pilot.press("enter")
            await pilot.pause()
            assert "not saved" in status(app) and "read-only" in status(app)
            assert app.session.history == []
            assert app.candidate is not None
        assert saved(preamp) == before

        # Declining opens nothing, and the other editor keeps the lock.
        assert make_app(str(preamp), asker=lambda q: False) is None
        with pytest.raises(LockHeld):
            DesignSession(str(preamp))
    finally:
        holder.close()
    assert saved(preamp) == before


async def test_a_failed_save_keeps_the_candidate_and_the_file(preamp, monkeypatch, tmp_path):
    before = saved(preamp)
    app = make_app(str(preamp))
    async with app.run_test(size=SMALL) as pilot:
        await type_into(pilot, "stage.rc", "10k")
        with monkeypatch.context() as m:
            def full(*args, **kwargs):
                raise OSError(errno.ENOSPC, "No space left on device")
            m.setattr("model.files.savefile.os.replace", full)
            await pilot.press("enter")
            await pilot.pause()
        assert "not saved" in status(app) and "disk is full" in status(app)
        assert app.candidate is not None and app.candidate.design.stage.rc == 10e3
        assert field(app, "stage.rc").value == "10k"  # the editor is still on it, as typed
        assert app.design.stage.rc != 10e3
        assert app.session.history == []
        assert saved(preamp) == before
        # No temporary file was left behind.
        assert sorted(p.name for p in tmp_path.iterdir()) == ["preamp.toml", "preamp.toml.lock"]

        # With the disk back, the same Enter saves the kept candidate.
        await pilot.press("enter")
        await pilot.pause()
        assert "saved entry #2" in status(app)
        assert read_document(preamp).design.stage.rc == 10e3


# -- the bundled demo ------------------------------------------------------------------


def _package_demos() -> dict:
    return {p.name: p.read_bytes() for p in sorted(demo_dir().iterdir())}


async def test_the_bundled_demo_is_copied_on_the_first_commit(tmp_path, monkeypatch):
    monkeypatch.chdir(tmp_path)
    # A file of the demo's name is already here: the copy must not replace it.
    mine = tmp_path / default_demo().name
    mine.write_text("my own notes\n")
    package = _package_demos()
    app = make_app(None)
    async with app.run_test(size=SMALL) as pilot:
        assert app.session is None
        assert "(demo, copied on commit)" in app.sub_title  # at 80 columns
        await type_into(pilot, "stage.rc", "10k")
        await pilot.press("enter")
        await pilot.pause()
        assert app.session is not None
        copy = pathlib.Path(app.session.path)
        assert copy.parent.resolve() == tmp_path.resolve() and copy.name != mine.name
        assert read_document(copy).design.stage.rc == 10e3
        assert "saved entry #2" in status(app)

        # Later commits go to the same copy, not to a third file.
        await pilot.press("f7")
        await pilot.pause()
        assert [e.action for e in read_document(copy).history] == ["start", "set", "undo"]
    assert sorted(p.name for p in tmp_path.glob("*.toml")) == sorted([mine.name, copy.name])
    assert mine.read_text() == "my own notes\n"
    assert _package_demos() == package  # nothing written there, not even a lock file


async def test_the_read_only_demo_refuses_commits(tmp_path, monkeypatch):
    monkeypatch.chdir(tmp_path)
    package = _package_demos()
    app = make_app(None, read_only=True)
    async with app.run_test(size=SMALL) as pilot:
        await type_into(pilot, "stage.rc", "10k")
        await pilot.press("enter")
        await pilot.pause()
        assert "not saved" in status(app) and "read-only" in status(app)
        assert app.session is None
    assert list(tmp_path.iterdir()) == []
    assert _package_demos() == package


# -- help, footer and colour ---------------------------------------------------------


async def test_f1_help_lists_every_key_and_the_footer_the_main_ones(preamp):
    app = make_app(str(preamp))
    async with app.run_test(size=SMALL) as pilot:
        await pilot.pause()
        footer = screen_text(app).splitlines()[-1]
        # Every F key fits at 80 columns (tests/test_workbench_polish.py checks each).
        for word in ("help", "note", "baseline", "undo", "redo", "quit"):
            assert word in footer, (word, footer)

        await pilot.press("f1")
        await pilot.pause()
        assert isinstance(app.screen, HelpScreen)
        text = screen_text(app)
        for key in ("Tab", "Up / Down", "PgUp / PgDn", "Enter", "Esc", "F2"):
            assert key in text, key
        # The list is taller than 24 rows: the rest must be reachable by scrolling.
        await pilot.press("end")
        await pilot.pause()
        text = screen_text(app)
        for key in ("F7 or Ctrl+Z", "F8 or Ctrl+Y", "F10 or Ctrl+Q"):
            assert key in text, key
        # A description too long for the line wraps under its own column.
        # (The dialog's rows are what lies right of its border "│".)
        lines = [line.split("│", 1)[-1] for line in text.splitlines()]
        row = next(i for i, line in enumerate(lines) if "F7 or Ctrl+Z" in line and "undo the last" in line)
        column = lines[row].index("undo the last")
        rest = lines[row + 1]
        assert rest[:column].strip() == "" and rest[column:column + 1].strip(), (lines[row], rest)

        await pilot.press("escape")
        await pilot.pause()
        assert not isinstance(app.screen, HelpScreen)
        assert app.focused is knobs(app).editor


async def test_the_wide_screen_without_colour(preamp, monkeypatch):
    monkeypatch.setenv("NO_COLOR", "1")
    app = make_app(str(preamp))
    async with app.run_test(size=LARGE) as pilot:
        assert app.no_color
        await pilot.pause()
        footer = screen_text(app).splitlines()[-1]
        for word in ("help", "note", "baseline", "undo", "redo", "quit"):
            assert word in footer, (word, footer)
        # The ledger sits beside the readout without F3.
        assert app.query_one("#ledger-box").region.width > 0

        # A collector resistor this large leaves no room: the stage saturates.
        old = app.figures
        await type_into(pilot, "stage.rc", "47k")
        new = analyse(with_values(app.design, {"stage.rc": 47e3}), large_signal=False)
        assert new.warnings, "the test needs a design that raises a warning"
        # Without colour, warnings still read as words, and changes as arrows.
        shown = readout(app)
        assert "warnings:" in shown
        for w in new.warnings:
            assert w.code in shown, w.code
        # Every column stays apart, even a value as wide as its column.
        assert readout_row(app, "region").split() == ["region", old.region, new.region, "changed"]
        gain = readout_row(app, "av_loaded")
        assert minus_signs(f"{20 * math.log10(abs(new.av_loaded) / abs(old.av_loaded)):+.2f} dB") in gain
        assert gain.endswith("↓")
        head = header_row(app)
        assert "committed" in head and "candidate" in head


# -- the large-signal worker -----------------------------------------------------------


async def test_swing_figures_arrive_from_the_worker(preamp, monkeypatch):
    # A longer debounce makes "not computed yet" observable even on a slow machine.
    monkeypatch.setattr(tui.app, "DEBOUNCE", 0.5)
    app = make_app(str(preamp))
    # Tall enough that the whole readout, down to thd, is on screen.
    async with app.run_test(size=(120, 40)) as pilot:
        await type_into(pilot, "stage.rc", "10k")
        assert not app.candidate.figures.large_signal
        assert "…" in readout_row(app, "swing_up")

        # A second value before the first sweep starts: only its result may show.
        await type_into(pilot, "stage.rc", "12k")
        await settle(pilot)
        expected = analyse(with_values(app.design, {"stage.rc": 12e3}))
        assert app.candidate.design.stage.rc == 12e3
        assert app.candidate.figures.large_signal
        assert app.candidate.figures.swing_up == pytest.approx(expected.swing_up, rel=1e-9)
        assert app.candidate.figures.swing_down == pytest.approx(expected.swing_down, rel=1e-9)
        assert app.candidate.figures.thd == pytest.approx(expected.thd, rel=1e-6)
        for label in ("swing_up", "swing_down", "thd"):
            assert "…" not in readout_row(app, label), label
