"""What the workbench holds besides the session, and the messages its
workers post back: plain values, so the app's handlers stay short."""

from __future__ import annotations

from dataclasses import dataclass

from textual.message import Message

from model.analysis import Figures
from model.design import Design


@dataclass(frozen=True)
class Candidate:
    """An uncommitted value in one field, and what it would do."""

    key: str
    text: str
    design: Design
    figures: Figures


@dataclass(frozen=True)
class Baseline:
    label: str
    design: Design
    figures: Figures


class LargeSignalReady(Message):
    """The worker's full analysis of ``design``."""

    def __init__(self, design: Design, figures: Figures):
        super().__init__()
        self.design, self.figures = design, figures


class PictureReady(Message):
    """The picture worker's charts of ``design``, and their lines drawn at a size."""

    def __init__(self, design: Design, kind: str, charts: tuple, rendered: tuple):
        super().__init__()
        self.design, self.kind, self.charts, self.rendered = design, kind, charts, rendered
