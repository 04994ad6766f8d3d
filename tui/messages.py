"""The messages the workbench's workers post back (the editing state itself
is plain, in tui/workstate.py)."""

from __future__ import annotations

from textual.message import Message

from model.analyses.figures import Figures
from model.design.stage import Design


class LargeSignalReady(Message):
    """The worker's full analysis of ``design``."""

    def __init__(self, design: Design, figures: Figures):
        super().__init__()
        self.design, self.figures = design, figures


class PictureReady(Message):
    """The picture worker's charts of ``design`` for ``kind`` (picture, spread figure),
    and their lines drawn at a size."""

    def __init__(self, design: Design, kind: tuple, charts: tuple, rendered: tuple):
        super().__init__()
        self.design, self.kind, self.charts, self.rendered = design, kind, charts, rendered


class YieldReady(Message):
    """The yield worker's yield of ``design`` against its specs (a Yield)."""

    def __init__(self, design: Design, result):
        super().__init__()
        self.design, self.result = design, result


class OptionsReady(Message):
    """The options worker's ways to ``target`` from ``design`` (a list of
    Options), or None with ``error`` in words."""

    def __init__(self, design: Design, target, ways, error: str):
        super().__init__()
        self.design, self.target, self.ways, self.error = design, target, ways, error
