"""The Ledger pane: one line per history entry, newest at the bottom."""

from __future__ import annotations

from textual.widgets import OptionList
from textual.widgets.option_list import Option

from model.files.ledger import Entry

from ..consequences import compact_deltas
from ..safe_text import visible
from .knobs import field_text


def entry_line(e: Entry) -> str:
    """``#3 20:31 rc 8.2 kΩ→10 kΩ · gain +1.6 dB, rin −0.6 % · "note"``"""
    if e.action == "start":
        what = "start" + (f" from {e.origin}" if e.origin else "")
    else:
        steps = ", ".join(f"{c.key.split('.')[-1]} {field_text(c.key, c.old)}→{field_text(c.key, c.new)}"
                          for c in e.changes)
        what = (f"{e.action} #{e.reverses}: " if e.reverses else ("hand edit: " if e.action == "hand-edit" else "")) + steps
    line = f"#{e.number} {e.time:%H:%M} {what}"
    if e.before:
        line += " · " + compact_deltas(e.before, e.after)
    if e.note:
        line += f' · "{e.note}"'
    # The note, the origin and any name or notes change are the file's text.
    return visible(line)


class LedgerPane(OptionList):
    """The history; selecting an entry pins it as the baseline.

    Its lines are plain text, never markup: a note such as "[b]x[/b]" or
    "gain[dB]" is shown as typed.
    """

    def __init__(self, *, id: str | None = None):
        super().__init__(id=id, markup=False)

    def show(self, history: list) -> None:
        self.clear_options()
        self.add_options([Option(entry_line(e), id=f"entry-{e.number}") for e in history])
        if history:
            self.highlighted = len(history) - 1
            self.scroll_end(animate=False)
