"""The topology dialog (Ctrl+R): the seven stages, the present one marked."""

from __future__ import annotations

from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import Vertical
from textual.screen import ModalScreen
from textual.widgets import Label, OptionList
from textual.widgets.option_list import Option

from model.design.fields import TOPOLOGIES

#: What each topology is, in a few words, for the dialog.
WHAT = {
    "common-emitter": "gain, base divider",
    "emitter-follower": "buffer, base divider",
    "common-base": "gain, low rin, base on cb",
    "collector-feedback": "gain, base biased by rf",
    "ce-follower": "gain stage, then follower q2",
    "common-emitter-split": "gain on ± supplies",
    "emitter-follower-split": "buffer on ± supplies",
}

class TopologyDialog(ModalScreen[str | None]):
    """Choose the stage's topology; Enter picks it, Esc or F9 cancels."""

    DEFAULT_CSS = "TopologyDialog { align: center middle; } #topology-list { height: auto; border: none; }"
    BINDINGS = [Binding("escape,f9", "cancel", "cancel")]

    def __init__(self, current: str):
        super().__init__()
        self._current = current

    def compose(self) -> ComposeResult:
        with Vertical(id="topology-box", classes="dialog"):
            yield Label("Topology (a logged change; keys it shares keep their values)", classes="dialog-title")
            items = [Option(f"{'•' if t == self._current else ' '} {t:<22} {WHAT[t]}", id=f"topology-{t}")
                     for t in TOPOLOGIES]
            yield OptionList(*items, id="topology-list")
            yield Label("Up/Down choose, Enter commits it, Esc or F9 cancels", classes="dialog-hint")

    def on_mount(self) -> None:
        options = self.query_one(OptionList)
        options.highlighted = TOPOLOGIES.index(self._current)
        options.focus()

    def on_option_list_option_selected(self, event: OptionList.OptionSelected) -> None:
        event.stop()  # else the app would take it for a ledger entry
        self.dismiss(event.option.id.removeprefix("topology-"))

    def action_cancel(self) -> None:
        self.dismiss(None)
