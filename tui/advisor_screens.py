"""The advisor's dialogs: a one-line FIGURE=TARGET prompt, and the list of options."""

from __future__ import annotations

from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import Vertical
from textual.screen import ModalScreen
from textual.widgets import Input, Label, OptionList
from textual.widgets.option_list import Option

from .screens import NotePrompt


class TargetPrompt(NotePrompt):
    """FIGURE=TARGET on one line (the note prompt's input and its rules)."""

    def __init__(self, title: str, current: str = ""):
        super().__init__(current)
        self._title = title

    def compose(self) -> ComposeResult:
        with Vertical(id="note-box", classes="dialog"):
            yield Label(self._title, classes="dialog-title")
            yield Input(self._current, id="note-input", placeholder="for example av_loaded=33dB", compact=True)


class OptionsDialog(ModalScreen[int | None]):
    """The ways to a target, cheapest first; Enter makes one the candidate."""

    DEFAULT_CSS = "OptionsDialog { align: center middle; } #options-list { height: auto; max-height: 16; }"
    BINDINGS = [Binding("escape,f9", "cancel", "cancel")]

    def __init__(self, title: str, lines: list, why: list):
        super().__init__()
        self._title, self._lines, self._why = title, lines, why

    def compose(self) -> ComposeResult:
        with Vertical(id="options-box", classes="dialog"):
            yield Label(self._title, classes="dialog-title")
            items = [Option(text, id=f"way-{i}") for i, text in enumerate(self._lines)]
            items += [Option(f"cannot: {text}", disabled=True) for text in self._why]
            yield OptionList(*items, id="options-list")
            yield Label("Up/Down choose, Enter makes it the candidate, Esc or F9 cancels", classes="dialog-hint")

    def on_mount(self) -> None:
        self.query_one(OptionList).focus()

    def on_option_list_option_selected(self, event: OptionList.OptionSelected) -> None:
        event.stop()
        self.dismiss(int(event.option.id.split("-")[1]))

    def action_cancel(self) -> None:
        self.dismiss(None)
