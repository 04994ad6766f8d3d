"""The keys as the screen lists them (the help screen and the footer line),
and the modal screens: help and the note prompt."""

from __future__ import annotations

from rich.cells import cell_len
from rich.table import Table
from rich.text import Text
from textual import events
from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import Vertical, VerticalScroll
from textual.screen import ModalScreen
from textual.widgets import Input, Label, Static

from .workstate import SERIES_CYCLE_TEXT

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
    ("F5", f"switch the series values step along: {SERIES_CYCLE_TEXT}, the stocked resistor ranges "
           "(10 %, 5 %, 1 %); a logged change. Files also take E6 and E48 (parts.series); F5 goes on from "
           "either to the next of the three"),
    ("F6", "show the pictures (narrow screens), then the next: Bode, noise, load lines (and the follower's), "
               "transfer, spread, knob effects"),
    ("Ctrl+G", "the spread picture's next figure (the design's specs first)"),
    ("F7 or Ctrl+Z", "undo the last change (logged as a new entry); pending values stay pending"),
    ("F8 or Ctrl+Y", "redo (logged as a new entry); pending values stay pending"),
    ("Ctrl+T", "aim the knob under the cursor at FIGURE=TARGET, as a candidate"),
    ("Ctrl+O", "every usual way to reach FIGURE=TARGET, cheapest first"),
    ("Ctrl+R", "change the topology (a logged change; keys both stages have keep their values)"),
    ("F1", "this help"),
    ("Ctrl+P", "every action by name"),
    ("F10 or Ctrl+Q", "quit; every commit is already saved"),
)


#: The footer's keys in the order shown: (key, word on a wide screen, word
#: on a narrow one).  Each region has its key here (F3 the ledger and back to
#: the readout, F6 the pictures); every other key is in the help (F1).
FOOTER = (
    ("F1", "help", "help"), ("F2", "note", "note"), ("F3", "ledger", "ledger"), ("F4", "baseline", "baseline"),
    ("F5", "series", "series"), ("F6", "pictures", "plot"), ("F7", "undo", "undo"), ("F8", "redo", "redo"),
    ("F9", "abandon", "drop"), ("F10", "quit", "quit"), ("^P", "palette", "palette"),
)
#: When even the tightest form is too wide: the keys left out first.  The
#: region keys (F1, F3, F6) and quit go last.
DROPPED_FIRST = ("^P", "F4", "F2", "F8", "F7", "F5", "F9", "F10", "F6", "F3")


def footer_text(width: int) -> Text:
    """The footer line for a screen ``width`` columns wide: every key, in the
    roomiest form that fits (wide words, two spaces apart; then the narrow
    words; then "F1help F2note", the key set apart by its style alone), and
    only below that are keys left out, the least needed first."""
    forms = ((1, " ", "  "), (2, " ", "  "), (2, " ", " "), (2, "", " "))
    keys = list(FOOTER)
    for word, joint, gap in forms:
        if _footer_cells(keys, word, joint, gap) <= width:
            return _footer(keys, word, joint, gap)
    for key in DROPPED_FIRST:
        keys = [k for k in keys if k[0] != key]
        if _footer_cells(keys, 2, "", " ") <= width:
            break
    return _footer(keys, 2, "", " ")


def _footer_cells(keys, word: int, joint: str, gap: str) -> int:
    return cell_len(gap.join(k[0] + joint + k[word] for k in keys))


def _footer(keys, word: int, joint: str, gap: str) -> Text:
    out = Text(no_wrap=True, overflow="crop")
    for n, k in enumerate(keys):
        out.append(gap if n else "")
        out.append(k[0], style="reverse")
        out.append(joint + k[word])
    return out


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
