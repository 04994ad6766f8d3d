"""The installed `stageledger` command in a real terminal (tmux): keys in,
screen out, and the saved file read back.

Pilot tests drive the app inside Python; this one checks what they cannot:
the console script starts, the terminal's own key codes arrive as the app
expects, and a commit made by typing reaches the disk.
"""

from __future__ import annotations

import os
import shutil
import subprocess
import time
import uuid
from pathlib import Path

import pytest

from model.analyses.figures import analyse
from model.design.stage import with_values
from model.files.designfile import read_document
from tui.minus_sign import minus_signs
from tui.number_text import gain_text

TMUX = shutil.which("tmux")
COMMAND = shutil.which("stageledger")
REPO = Path(__file__).resolve().parent.parent
DEMO = REPO / "saved_designs" / "geophone_preamp.toml"

pytestmark = pytest.mark.skipif(not (TMUX and COMMAND),
                                reason="needs tmux and the installed stageledger command")


def _wait_for(predicate, what: str, timeout: float = 20.0, show=lambda: ""):
    deadline = time.monotonic() + timeout
    while True:
        value = predicate()
        if value:
            return value
        if time.monotonic() > deadline:
            raise AssertionError(f"timed out waiting for {what}; the screen:\n{show()}")
        time.sleep(0.1)


def test_typing_a_resistor_and_committing_in_tmux(tmp_path):
    path = tmp_path / "preamp.toml"
    shutil.copyfile(DEMO, path)
    original = read_document(path).design
    # A private server with its own socket (no user configuration, no clash
    # with other tests or sessions); the socket lives in tmp_path, so nothing
    # is left in the shared tmux folder afterwards.
    socket = str(tmp_path / f"tmux-{uuid.uuid4().hex[:8]}")
    env = {**os.environ, "TERM": "xterm-256color"}
    env.pop("NO_COLOR", None)
    env.pop("TMUX", None)  # a test run from inside tmux must still start its own server

    def tmux(*args, check=True):
        return subprocess.run([TMUX, "-S", socket, "-f", os.devnull, *args], env=env,
                              capture_output=True, text=True, check=check, timeout=10)

    def screen() -> str:
        return tmux("capture-pane", "-p", "-t", "bench").stdout

    # PYTHONPATH puts this checkout first, so the command runs the code under
    # test even when the installed copy is older.
    command = f"cd {tmp_path} && PYTHONPATH={REPO} exec {COMMAND} preamp.toml"
    try:
        tmux("new-session", "-d", "-s", "bench", "-x", "100", "-y", "30", command)
        _wait_for(lambda: "rc" in screen() and "F1 help" in screen(), "the workbench to start", show=screen)

        # The editor starts on vcc; three Tabs reach rc, whose text is selected
        # on arrival, so typing replaces it.  The value is typed straight after
        # the Tabs, without waiting for them: keys typed ahead must land in
        # the row the Tabs lead to.
        rc_row = next(i for i, line in enumerate(screen().splitlines()) if line.startswith("rc "))
        tmux("send-keys", "-t", "bench", "Tab", "Tab", "Tab")
        tmux("send-keys", "-t", "bench", "-l", "10k")
        shown = _wait_for(lambda: (lambda s: s if "candidate" in s else "")(screen()),
                          "the candidate in the readout", show=screen)
        assert shown.splitlines()[rc_row].split()[:2] == ["rc", "10k"]
        assert "Enter commits" in shown
        # The terminal's own cursor follows the editor to its new row.
        _wait_for(lambda: tmux("display", "-p", "-t", "bench", "#{cursor_y}").stdout.strip() == str(rc_row),
                  "the cursor on the rc row", show=screen)

        tmux("send-keys", "-t", "bench", "Enter")
        shown = _wait_for(lambda: (lambda s: s if "saved entry #2" in s else "")(screen()),
                          "the commit to be reported", show=screen)
        assert "candidate" not in shown

        doc = read_document(path)
        expected = with_values(original, {"stage.rc": 10e3})
        assert doc.design == expected
        assert [e.action for e in doc.history] == ["start", "set"]
        assert [(c.key, c.new) for c in doc.history[-1].changes] == [("stage.rc", 10e3)]
        # The figures logged with the entry are the engine's for the new design
        # (the history keeps six significant figures).
        assert doc.history[-1].after["av_loaded"] == pytest.approx(analyse(expected).av_loaded, rel=1e-5)
        # The readout on screen shows the committed gain, with the screen's minus.
        assert minus_signs(gain_text(analyse(expected).av_loaded)) in shown

        # A burst in one send: Tab to re1, a value, Enter, then back to rc
        # and another.  Each value must be committed on its own row.
        tmux("send-keys", "-t", "bench", "Tab", "4", "7", "Enter", "BTab", "1", "2", "k", "Enter")
        _wait_for(lambda: "saved entry #4" in screen(), "both commits to be reported", show=screen)
        expected = with_values(expected, {"stage.re1": 47.0, "stage.rc": 12e3})
        doc = read_document(path)
        assert doc.design == expected
        assert [[(c.key, c.new) for c in e.changes] for e in doc.history[2:]] == [
            [("stage.re1", 47.0)], [("stage.rc", 12e3)]]

        # F10 quits; the session (and its pane) ends with the program.
        tmux("send-keys", "-t", "bench", "F10")
        _wait_for(lambda: tmux("has-session", "-t", "bench", check=False).returncode != 0,
                  "the program to exit", timeout=10)
    finally:
        tmux("kill-server", check=False)
    assert read_document(path).design == expected
