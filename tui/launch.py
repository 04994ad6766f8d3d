"""Starting the workbench: open, create or copy the design, then run the app."""

from __future__ import annotations

import os
import signal
import sys

# Textual repaints on a frame clock, 60 a second by default, so a keystroke's
# new readout could wait up to two frames (~33 ms) before it is drawn.  At
# 240 the wait is a few ms; the clock only runs while something changed, so
# an idle screen sends nothing.  Set here, before the workbench first imports
# Textual (which reads it once); set TEXTUAL_FPS yourself to choose otherwise.
os.environ.setdefault("TEXTUAL_FPS", "240")

from model.design.stage import default_design  # noqa: E402
from model.files.designfile import read_design  # noqa: E402
from model.files.savefile import LockHeld  # noqa: E402
from model.files.session import DesignSession, create  # noqa: E402

from .bundled import default_demo  # noqa: E402
from .safe_text import visible  # noqa: E402


def ask(question: str) -> bool:
    """A yes/no question on the terminal; anything but y/yes (or no terminal) is no."""
    if not sys.stdin.isatty():
        return False
    try:
        return input(f"{question} [y/N] ").strip().lower() in ("y", "yes")
    except EOFError:
        return False


def make_app(path: str | None, *, read_only: bool = False, asker=ask):
    """The Workbench for ``path`` (None: the bundled demo), or None if the user declined.

    Used by the command line and by the tests, so both build the real app.
    """
    from .app import Workbench

    if path is None:
        demo = str(default_demo())
        return Workbench(read_design(demo), session=None, source=demo,
                         demo_copy_dir=None if read_only else os.getcwd())
    if not os.path.lexists(path):
        if read_only or not asker(f"{path} does not exist. Create it from the common-emitter defaults?"):
            return None
        create(path, default_design())
    if read_only:
        session = DesignSession(path, lock=False)
    else:
        try:
            session = DesignSession(path)
        except LockHeld as held:
            if not asker(f"{visible(str(held))}. Open it read-only?"):
                return None
            session = DesignSession(path, lock=False)
    return Workbench(session.design, session=session, source=path)


def run(path: str | None, read_only: bool) -> int:
    app = make_app(path, read_only=read_only)
    if app is None:
        print("stageledger: nothing opened", file=sys.stderr)
        return 2
    # A hang-up must be no worse than a kill (every commit is already on disk),
    # but the app should end, not spin on a dead terminal.
    signal.signal(signal.SIGHUP, lambda *_: app.exit())
    app.run(mouse=False)
    return 0
