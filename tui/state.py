"""What the workbench holds besides the session, and the messages its
workers post back: plain values, so the app's handlers stay short."""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass

from textual.message import Message

from model.analysis import Figures
from model.design import Design


@dataclass(frozen=True)
class Candidate:
    """Uncommitted values, one or more fields at once, and what they would do.

    ``changes`` maps each key to its text as typed; Enter commits them all as
    one ledger entry (a bias pair is often retuned together).
    """

    changes: Mapping[str, str]
    design: Design
    figures: Figures

    def describe(self) -> str:
        return ", ".join(f"{key} = {text.strip()}" for key, text in self.changes.items())


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
