"""Editing in the Knobs: their messages turned into the candidate (a mixin
of :class:`~tui.app.Workbench`, which owns the design, the candidate and the
commit).

Messages arrive in the order the keys were typed, each naming the row it
came from, which need not be the row the editor is on by the time it is
handled: a Tab typed ahead may already have moved it.
"""

from __future__ import annotations

import math

from model.analysis import analyse
from model.design import get_value, with_values
from model.errors import StageledgerError
from model.stepping import choices, step, step_decade

from .state import Candidate
from .widgets.knobs import KnobAbandoned, KnobCommitted, KnobEdited, KnobMoved, Knobs, KnobStepped, field_text


class Editing:
    """Candidate values from typing, stepping, moving, Esc and Enter."""

    #: key → (text, why): the last text typed on a row that was not valid.
    _broken: dict
    #: (key, its pending text or None) at the last checkpoint on a row: the
    #: editor's arrival, or an Esc, a step or a commit there since.
    _arrival: tuple | None = None

    def _checkpoint(self, key: str) -> None:
        self._arrival = (key, self._pending.get(key))

    @property
    def _knobs(self) -> Knobs:
        return self._home.query_one(Knobs)

    @property
    def _pending(self) -> dict:
        return dict(self.candidate.changes) if self.candidate else {}

    def _show_knobs(self) -> None:
        self._knobs.show(self.design, self._pending, self.candidate.design if self.candidate else None)

    def on_knob_edited(self, message: KnobEdited) -> None:
        if self._in_service() and message.key in self._knobs.keys:
            # Not "mine" if the editor has moved on since: its marks are not this row's.
            self._edit(message.key, message.text, mine=self._knobs.seen(message))

    def _edit(self, key: str, text: str, mine: bool) -> None:
        knobs = self._knobs
        self._broken.pop(key, None)
        pending = self._pending
        if text.strip() == field_text(key, get_value(self.design, key)):
            if mine:
                knobs.editor.set_class(False, "-invalid")
            if key not in pending:
                return
            del pending[key]  # typed back to the committed value
        else:
            pending[key] = text
        try:
            self._set_candidate(pending)
        except StageledgerError as err:
            self._broken[key] = (text, str(err))
            if mine:
                knobs.editor.set_class(True, "-invalid")
            self._say(f"{err} (the readout keeps the last valid values)", error=True)
            return
        knobs.hold(pending, self.candidate.design if self.candidate else None)
        if mine:
            knobs.editor.set_class(False, "-invalid")
            knobs.editor.set_class(key in pending, "-candidate")
        if self.candidate:
            # The keys first: a candidate of several fields runs past 80 columns.
            self._say(f"Enter commits, Esc drops this row: candidate {self.candidate.describe()}")

    def _set_candidate(self, pending: dict) -> None:
        """Make ``pending`` (key → text) the candidate, or drop it if empty;
        raises StageledgerError, with nothing changed, if it is not a valid design."""
        if pending:
            design = with_values(self.design, pending)
            self.candidate = Candidate(pending, design, analyse(design, large_signal=False))
        else:
            self.candidate = None
        self._refresh_readout()

    def _reapply(self, pending: dict) -> str:
        """Make ``pending`` the candidate again on a new committed design (after
        an undo, say), leaving out values it now holds; the status to add."""
        still = {k: t for k, t in pending.items() if not _holds(self.design, k, t)}
        try:
            self._set_candidate(still)
        except StageledgerError as err:
            self._set_candidate({})
            return f"; dropped the pending {', '.join(still)}: {err}"
        if not still:
            return ""
        return f"; still pending {self.candidate.describe()}"

    def on_knob_stepped(self, message: KnobStepped) -> None:
        key = message.key
        current = self.candidate.design if key in self._pending else self.design
        value = get_value(current, key)
        words = choices(key)
        if isinstance(value, float) and math.isinf(value):
            self._say(f"{key} is open, which has no neighbouring value: type one", error=True)
            return
        try:
            if words:
                new = words[(words.index(value) + message.steps) % len(words)]
            elif isinstance(value, (int, float)):
                new = (step_decade(key, value, message.steps) if message.decade
                       else step(key, value, message.steps, self.design.parts.series))
            else:
                self._say(f"{key}: text has no steps; type it")
                return
        except StageledgerError as err:
            self._say(f"{key}: cannot step: {err}", error=True)
            return
        text = field_text(key, new)
        self._edit(key, text, mine=self._knobs.put(message, text))
        self._checkpoint(key)

    def on_knob_moved(self, message: KnobMoved) -> None:
        old = message.old
        if old in self._broken:
            text, _ = self._broken.pop(old)
            self._back_to_arrival(old)
            # The editor was placed before the app had seen what was typed on
            # the way: _show_knobs below places it again on what is known now.
            self._show_knobs()
            kept = "pending" if old in self._pending else "committed"
            self._say(f"{old}: {text.strip()!r} is not valid and was dropped; the row keeps "
                      f"{self._knobs.text(old)} ({kept})", error=True)
        else:
            self._show_knobs()
        self._checkpoint(message.new)

    def _back_to_arrival(self, key: str) -> None:
        """Give ``key`` back the pending value it had at the last checkpoint
        (see ``_arrival``), not whatever valid prefix of the broken text came
        on the way ("5" of "5x")."""
        if self._arrival is None or self._arrival[0] != key:
            return
        pending, text = self._pending, self._arrival[1]
        if text is None:
            pending.pop(key, None)
        else:
            pending[key] = text
        try:
            self._set_candidate(pending)
        except StageledgerError:
            pass  # keep the candidate as it is: it was valid

    def on_knob_abandoned(self, message: KnobAbandoned) -> None:
        """Esc (or F9) drops this row's edit: its pending value and any invalid
        text (and the whole candidate if the rest is not valid without it); on
        a row with neither, the whole candidate."""
        key, pending = message.key, self._pending
        broken = self._broken.pop(key, None)
        if key in pending and len(pending) > 1:
            del pending[key]
            try:
                self._set_candidate(pending)
                self._say(f"{key}: abandoned; still pending {self.candidate.describe()}")
            except StageledgerError as err:  # the rest needed this value
                self._set_candidate({})
                self._say(f"candidate abandoned: without {key}, {err}", error=True)
        elif pending and (key in pending or broken is None):
            self._set_candidate({})
            self._say(f"candidate abandoned ({', '.join(pending)})")
        elif broken is not None:
            self._say(f"{key}: invalid text dropped")
        else:
            self._say("nothing to abandon")
        self._checkpoint(key)
        self._show_knobs()

    def on_knob_committed(self, message: KnobCommitted) -> None:
        # Broken text is checked first: the editor can sit on text that does
        # not parse over an earlier valid candidate, and Enter on it is "not
        # committed" (with the rule), not a failed save.
        if message.key in self._broken:
            self._say(f"not committed: {self._broken[message.key][1]}", error=True)
            return
        if self.candidate is None:
            self._say("nothing to commit")
            return
        changes = dict(self.candidate.changes)
        # The background sweep's full figures of the candidate, if they are in,
        # spare the session a second analysis; it checks they are of its design.
        known = (self.candidate.design, self.candidate.figures)
        self._commit(lambda s: s.commit(changes, self.note, known=known))


def _holds(design, key: str, text: str) -> bool:
    """True if ``design`` already has the value ``text`` gives ``key``."""
    try:
        return get_value(with_values(design, {key: text}), key) == get_value(design, key)
    except StageledgerError:
        return False
