"""The Ledger pane: one line per history entry, newest at the bottom."""

from __future__ import annotations

from textual.widgets import OptionList
from textual.widgets.option_list import Option

from ..ledger_text import ledger_lines, wrap_line

#: What an empty ledger says (a disabled line, never an entry to select).
EMPTY = "no entries yet: Enter commits a change, and each commit is logged here"


class LedgerPane(OptionList):
    """The history; selecting an entry pins it as the baseline.

    Its lines are plain text, never markup: a note such as "[b]x[/b]" or
    "gain[dB]" is shown as typed.  They are wrapped here, at their
    separators, to the pane's width, and again when it changes: Textual
    would wrap them at any space, between a number and its unit too.
    """

    def __init__(self, *, id: str | None = None):
        super().__init__(id=id, markup=False)
        self._entry_lines: list = []
        self._wrap_width = 0
        self._worded: dict = {}  # ledger_text's cache of this file's lines

    def show(self, history: list) -> None:
        self._entry_lines = ledger_lines(history, cache=self._worded)
        self._wrap_width = self._text_width()
        self.clear_options()
        self.add_options([Option(wrap_line(line, self._wrap_width), id=f"entry-{e.number}")
                          for line, e in zip(self._entry_lines, history)])
        if history:
            self.highlighted = len(history) - 1
            self.scroll_end(animate=False)
        else:  # a new file or a demo: say what will appear here
            self.add_option(Option(EMPTY, disabled=True))

    def _text_width(self) -> int:
        """The cells an option's text may take: the content region less the
        options' padding, and less a vertical scrollbar even before one shows,
        so that its arrival never makes Textual re-wrap a line itself."""
        padding = self.get_component_styles("option-list--option").padding
        scrollbar = 0 if self.show_vertical_scrollbar else self.styles.scrollbar_size_vertical
        return self.scrollable_content_region.width - padding.width - scrollbar

    def on_resize(self) -> None:
        width = self._text_width()
        if width != self._wrap_width and self._entry_lines:
            self._wrap_width = width
            for index, line in enumerate(self._entry_lines):
                self.replace_option_prompt_at_index(index, wrap_line(line, width))
