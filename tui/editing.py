"""Editing in the Knobs: their messages handed to the editing state
(:class:`~tui.workstate.WorkState`) and its outcomes turned into widget
updates (a mixin of :class:`~tui.app.Workbench`, which owns the session).

Messages arrive in the order the keys were typed, each naming the row it
came from, which need not be the row the editor is on by the time it is
handled: a Tab typed ahead may already have moved it.  So an outcome's
marks go on the editor only if the message is of the editor's present
visit (``Knobs.seen``/``put``); the rules themselves live in the state.
"""

from __future__ import annotations

from .widgets.knobs import KnobAbandoned, KnobCommitted, KnobEdited, KnobMoved, Knobs, KnobStepped
from .workstate import Outcome, WorkState


class Editing:
    """The Knobs' messages in, the state's outcomes out."""

    state: WorkState

    @property
    def _knobs(self) -> Knobs:
        return self._home.query_one(Knobs)

    def _show_knobs(self) -> None:
        self._knobs.show(self.state.design, self.state.pending, self.state.candidate_design)

    def _apply(self, outcome: Outcome, mine: bool = False) -> None:
        """Show ``outcome``; ``mine``: the editor is still on the visit it came from."""
        if outcome.save is not None:
            self._commit(outcome.save)
            return
        knobs = self._knobs
        if outcome.knobs == "show":
            self._show_knobs()
        elif outcome.knobs == "hold":
            knobs.hold(self.state.pending, self.state.candidate_design)
        if mine:
            if outcome.invalid is not None:
                knobs.editor.set_class(outcome.invalid, "-invalid")
            if outcome.marked is not None:
                knobs.editor.set_class(outcome.marked, "-candidate")
        if outcome.readout:
            self._refresh_readout()
        if outcome.status is not None:
            self._say(outcome.status, error=outcome.error)

    def on_knob_edited(self, message: KnobEdited) -> None:
        if self._in_service() and message.key in self._knobs.keys:
            # Not "mine" if the editor has moved on since: its marks are not this row's.
            mine = self._knobs.seen(message)
            self._apply(self.state.edit(message.key, message.text), mine)

    def on_knob_stepped(self, message: KnobStepped) -> None:
        outcome = self.state.step(message.key, message.steps, message.decade)
        mine = outcome.put is not None and self._knobs.put(message, outcome.put)
        self._apply(outcome, mine)

    def on_knob_moved(self, message: KnobMoved) -> None:
        self._apply(self.state.move(message.old, message.new))
        self._knob_changed()

    def on_knob_abandoned(self, message: KnobAbandoned) -> None:
        self._apply(self.state.abandon(message.key))

    def on_knob_committed(self, message: KnobCommitted) -> None:
        self._apply(self.state.commit(message.key))
