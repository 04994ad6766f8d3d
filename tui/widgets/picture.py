"""The Picture: charts from :mod:`tui.chart` drawn at the widget's size, or
a table's rows of text (:class:`Rows`) shown as they are."""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass

from rich.segment import Segment
from textual.strip import Strip
from textual.widget import Widget

from ..chart import Chart, render_stack

EMPTY = "no picture yet"

Charts = Sequence[Chart]


@dataclass(frozen=True)
class Rows:
    """A picture that is a table, not a chart: its lines of text, cut or
    padded to the widget's size (nothing to rasterise)."""

    lines: tuple

    def fit(self, width: int, height: int) -> list[str]:
        return [line[:width].ljust(width) for line in self.lines[:height]]


class Picture(Widget, can_focus=False):
    """One chart, or several stacked top to bottom sharing the height (or
    the Rows of a table).

    The workbench's picture worker hands over the charts already drawn at
    the widget's size; the widget draws them itself only at another size.
    """

    DEFAULT_CSS = """
    Picture { height: 1fr; }
    """

    def __init__(self, content: Charts = (), *, name: str | None = None,
                 id: str | None = None, classes: str | None = None) -> None:
        super().__init__(name=name, id=id, classes=classes)
        self._content = content
        # Bumped by show(); with the size it keys the cache, so a repaint
        # (scrolling past, a dialog closing) never rasterises again.
        self._version = 0
        self._cache_key: tuple | None = None
        self._lines: list[str] = []

    def show(self, content: Charts | Rows, rendered: tuple | None = None) -> None:
        """Replace the charts and redraw.

        ``rendered`` is (width, height, lines) already drawn elsewhere (a
        worker thread); it is used if the picture is still that size.
        """
        self._content = content
        self._version += 1
        if rendered is not None:
            width, height, lines = rendered
            self._cache_key, self._lines = (self._version, width, height), lines
        self.refresh()

    def lines(self) -> list[str]:
        """The picture as plain text rows at the present size."""
        width, height = self.size
        key = (self._version, width, height)
        if key != self._cache_key:
            content = self._content
            if isinstance(content, Rows):
                self._lines = content.fit(width, height)
            elif tuple(content):
                self._lines = render_stack(tuple(content), width, height)
            else:
                self._lines = [EMPTY[:width].ljust(width)] if height else []
            self._cache_key = key
        return self._lines

    def render_line(self, y: int) -> Strip:
        lines = self.lines()
        width = self.size.width
        text = lines[y] if y < len(lines) else " " * width
        return Strip([Segment(text, self.rich_style)], width)
