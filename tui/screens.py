"""Modal screens: help and the note prompt."""

from __future__ import annotations

from rich.table import Table
from textual import events
from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import Vertical, VerticalScroll
from textual.screen import ModalScreen
from textual.widgets import Input, Label, Static

#: Every key of the workbench, as the help screen lists it.
KEYS = (
    ("Tab / Shift+Tab", "move between fields; a pending value stays, so a candidate can span several"),
    ("type", "a value with an SI prefix or letter code: 4k7, 2.2k, 100n, R47"),
    ("Up / Down", "step a part along the preferred series; plain numbers by a fixed step"),
    ("PgUp / PgDn", "step a decade"),
    ("Enter", "commit the candidate, all its fields as one entry: logged in the ledger and saved"),
    ("Esc or F9", "abandon this row's edit, or on an unchanged row the whole candidate"),
    ("F2 or Ctrl+N", "write a note for the next logged change (commit, undo, redo, F5)"),
    ("F3", "show the ledger or the readout (narrow screens)"),
    ("F4", "pin the committed design as the baseline, or unpin it"),
    ("Enter on a ledger entry", "pin the design as it stood after that entry"),
    ("F5", "switch the preferred series (E12, E24, E96) — a logged change"),
    ("F6", "show the pictures (narrow screens), then the next: Bode, load lines (and the follower's), "
               "transfer, spread, knob effects"),
    ("Ctrl+G", "the spread picture's next figure (the design's specs first)"),
    ("F7 or Ctrl+Z", "undo the last change (logged as a new entry); pending values stay pending"),
    ("F8 or Ctrl+Y", "redo (logged as a new entry); pending values stay pending"),
    ("Ctrl+R", "change the topology (a logged change; keys both stages have keep their values)"),
    ("F1", "this help"),
    ("Ctrl+P", "every action by name"),
    ("F10 or Ctrl+Q", "quit; every commit is already saved"),
)


class HelpScreen(ModalScreen):
    BINDINGS = [Binding("escape,f1,q,enter", "dismiss", "close")]

    def compose(self) -> ComposeResult:
        # Two columns, so a description that wraps stays under its own column
        # instead of running back under the keys.
        keys = Table.grid(padding=(0, 2))
        keys.add_column(no_wrap=True)
        keys.add_column(ratio=1)
        for key, what in KEYS:
            keys.add_row(key, what)
        # Scrollable: at 80×24 the list is taller than the screen, and a plain
        # container would cut off the last keys with no way to reach them.
        with VerticalScroll(id="help-box", classes="dialog"):
            yield Label("Keys", classes="dialog-title")
            yield Static(keys)
            yield Label("Esc, F1 or Enter closes this.", classes="dialog-hint")


class NotePrompt(ModalScreen[str | None]):
    """One line of text for the next commit's note."""

    BINDINGS = [Binding("escape", "cancel", "cancel")]

    def __init__(self, current: str):
        super().__init__()
        self._current = current

    def compose(self) -> ComposeResult:
        with Vertical(id="note-box", classes="dialog"):
            yield Label("Note for the next commit (Enter keeps it, Esc cancels)", classes="dialog-title")
            yield Input(self._current, id="note-input", compact=True)

    def on_input_submitted(self, event: Input.Submitted) -> None:
        event.stop()
        self.dismiss(event.value.strip())

    def on_key(self, event: events.Key) -> None:
        # Keys typed straight after F2 can arrive before the input has the
        # focus; they are the note's, so they go into it, in order.
        field = self.query_one("#note-input", Input)
        if field.has_focus:
            return
        if event.is_printable:
            event.stop()
            field.insert_text_at_cursor(event.character)
        elif event.key == "enter":
            event.stop()
            self.dismiss(field.value.strip())

    def action_cancel(self) -> None:
        self.dismiss(None)
