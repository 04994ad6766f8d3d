"""The stageledger terminal interface: the command line and the workbench."""

import os

# Textual repaints on a frame clock, 60 a second by default, so a keystroke's
# new readout could wait up to two frames (~33 ms) before it is drawn.  At
# 240 the wait is a few ms; the clock only runs while something changed, so
# an idle screen sends nothing.  Set TEXTUAL_FPS yourself to choose otherwise.
os.environ.setdefault("TEXTUAL_FPS", "240")
