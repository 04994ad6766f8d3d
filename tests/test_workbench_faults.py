"""A fault of ours inside the workbench (an exception that is not a
StageledgerError) is reported on the status line and loses nothing; one
that escapes anyway ends the command with status 3, never 0.

The fault is provoked by replacing the analysis the sweep worker or the
commit calls with one that raises, since no valid design is known to make
the engine fail once the engine's own fixes are in.
"""

from __future__ import annotations

from test_workbench import SMALL, settle, status, type_into

import model.files.session
import tui.app
import tui.launch
from model.errors import StageledgerError
from tui.cli import main
from tui.launch import make_app


def _raise(*args, **kwargs):
    raise ValueError("grid\nnot increasing")  # a newline: the status line must stay one line


def _refuse(*args, **kwargs):
    raise StageledgerError("refused")


async def test_a_fault_in_the_sweep_is_reported_and_the_candidate_kept(preamp, monkeypatch):
    app = make_app(str(preamp))
    async with app.run_test(size=SMALL) as pilot:
        monkeypatch.setattr(tui.app, "analyse", _raise)
        await type_into(pilot, "stage.rc", "10k")
        await settle(pilot)
        said = status(app)
        assert said.startswith("✗") and "internal error (ValueError: grid\\nnot increasing)" in said
        assert "\n" not in said
        assert app.candidate is not None and app.candidate.changes == {"stage.rc": "10k"}
        assert app.is_running


async def test_a_fault_in_a_commit_is_reported_and_nothing_is_lost(preamp, monkeypatch):
    before = preamp.read_bytes()
    app = make_app(str(preamp))
    async with app.run_test(size=SMALL) as pilot:
        await type_into(pilot, "stage.rc", "10k")
        await pilot.press("enter")  # a first commit, saved: it must survive the fault
        await pilot.pause()
        saved = preamp.read_bytes()
        assert saved != before and len(app.session.history) == 2
        # The sweep refuses quietly (as for a design the quick analysis has
        # already refused), so no full figures spare the commit its analysis,
        # and no sweep report can race the commit's own.
        monkeypatch.setattr(tui.app, "analyse", _refuse)
        monkeypatch.setattr(model.files.session, "analyse", _raise)
        await type_into(pilot, "stage.rc", "12k")
        await pilot.press("enter")
        await pilot.pause()
        said = status(app)
        assert said.startswith("✗ not saved: internal error (ValueError: grid\\nnot increasing)"), said
        assert app.is_running
        assert preamp.read_bytes() == saved and len(app.session.history) == 2
        assert app.design.stage.rc == 10e3
        assert app.candidate is not None and app.candidate.changes == {"stage.rc": "12k"}
        # The engine mended, the same Enter commits the kept candidate.
        monkeypatch.undo()
        await pilot.press("enter")
        await pilot.pause()
        assert [e.action for e in app.session.history] == ["start", "set", "set"]
        assert app.design.stage.rc == 12e3 and app.candidate is None


def test_an_unhandled_exception_ends_the_command_with_status_3(preamp, monkeypatch, capsys):
    """Textual shows the traceback and stops; the command then exits 3 (an
    internal fault, as tui/cli.py documents), not 0 as if all were well."""
    app = make_app(str(preamp))
    monkeypatch.setattr(app, "action_help", lambda: _raise())

    async def press_f1(pilot):
        await pilot.press("f1")
        await pilot.pause()

    monkeypatch.setattr(app, "run", lambda **kw: type(app).run(app, headless=True, size=SMALL,
                                                              auto_pilot=press_f1))
    monkeypatch.setattr(tui.launch, "make_app", lambda *a, **k: app)
    monkeypatch.setattr(tui.launch.signal, "signal", lambda *a: None)  # leave SIGHUP alone
    assert main([str(preamp)]) == 3
    err = capsys.readouterr().err.strip().splitlines()
    assert err[-1].startswith("stageledger: internal error (WorkbenchFault")
    assert "ValueError" in err[-1]


def test_a_clean_quit_still_exits_0(preamp, monkeypatch):
    app = make_app(str(preamp))

    async def quit_(pilot):
        await pilot.press("f10")

    monkeypatch.setattr(app, "run", lambda **kw: type(app).run(app, headless=True, size=SMALL,
                                                              auto_pilot=quit_))
    monkeypatch.setattr(tui.launch, "make_app", lambda *a, **k: app)
    monkeypatch.setattr(tui.launch.signal, "signal", lambda *a: None)
    assert main([str(preamp)]) == 0
