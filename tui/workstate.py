"""The workbench's editing state, with no screen: the committed design, the
candidate, the invalid texts, the row checkpoint, the baseline and the note.

Each method takes what a Knobs message carried (a row, its text, a step)
and returns an :class:`Outcome`: the status line, the editor's marks, and
what the Knobs and the readout must be told.  A commit, undo or redo comes
back as a :class:`Save` for the app to run through its DesignSession; the
state moves on (:meth:`WorkState.saved`) only once the save succeeded.
Nothing here imports textual or rich (tests/test_layering_tui.py), so the
editing rules are tested in milliseconds, without a screen.
"""

from __future__ import annotations

import dataclasses
import math
from collections.abc import Callable, Mapping
from dataclasses import dataclass
from typing import NamedTuple

from model.analyses.figures import Figures, analyse
from model.design.stage import SERIES, Design, get_value, with_values
from model.design.stepping import choices, step, step_decade
from model.errors import DesignError, StageledgerError

from .fieldtext import field_text
from .safe_text import internal_error

#: The series F5 steps through, in turn: the resistor ranges stocked as
#: standard (10 %, 5 % and 1 % parts).  A file may also name E6 (mostly a
#: capacitor range) or E48 (2 %, priced as 1 %); F5 goes on from either to
#: the next of these.
SERIES_CYCLE = ("E12", "E24", "E96")
SERIES_CYCLE_TEXT = " → ".join(SERIES_CYCLE + SERIES_CYCLE[:1])


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


@dataclass(frozen=True)
class Save:
    """A change for the session to log: ``run(session)`` saves it and returns
    its Entry, or raises StageledgerError with nothing saved.

    ``keep``: not the candidate's own commit (an undo, a redo, a series
    switch), so the candidate's values stay pending on the new committed
    design, where they still make sense.
    """

    run: Callable
    keep: bool = False


@dataclass(frozen=True)
class Outcome:
    """What one message did, for the app to show."""

    #: The status line's new text (None leaves it); ``error`` marks it ✗.
    status: str | None = None
    error: bool = False
    #: The editor's marks, if it is still on the visit the message came from
    #: (None leaves a mark as it is).
    invalid: bool | None = None
    marked: bool | None = None
    #: What the Knobs must be told: "hold" (the rows' pending values, the
    #: editor left alone), "show" (the rows and the editor placed again) or "".
    knobs: str = ""
    #: The design on show, or its figures, changed: redraw the readout.
    readout: bool = False
    #: A stepped value's text, for the editor.
    put: str | None = None
    #: A change for the session to save; the rest of the outcome is empty.
    save: Save | None = None


class Comparison(NamedTuple):
    """The readout's columns: the figures on show and what they are compared with."""

    shown: Figures
    reference: Figures | None
    shown_label: str
    reference_label: str


class WorkState:
    """The committed design and figures, and everything pending on top of them.

    ``broken`` maps a row's key to (the last text typed there that is not
    valid, why); ``arrival`` is (key, its pending text or None) at the last
    checkpoint on a row: the editor's arrival, or an abandon, a step or a
    commit there since.
    """

    def __init__(self, design: Design, figures: Figures):
        self.design, self.figures = design, figures
        self.candidate: Candidate | None = None
        self.broken: dict[str, tuple[str, str]] = {}
        self.arrival: tuple[str, str | None] | None = None
        self.baseline: Baseline | None = None
        self.note = ""
        self._redraw = False  # set by _set_candidate, taken by _outcome

    # -- what is on show ------------------------------------------------------

    @property
    def pending(self) -> dict:
        """A copy of the candidate's key → text (empty without a candidate)."""
        return dict(self.candidate.changes) if self.candidate else {}

    @property
    def candidate_design(self) -> Design | None:
        return self.candidate.design if self.candidate else None

    def on_show(self) -> tuple[Design, Figures]:
        """The design the readout and the pictures show, and its figures."""
        if self.candidate:
            return self.candidate.design, self.candidate.figures
        return self.design, self.figures

    def reference_design(self) -> Design | None:
        """The design the readout compares with: the baseline's, else the
        committed one beside a candidate; None when nothing is compared."""
        if self.baseline:
            return self.baseline.design
        return self.design if self.candidate else None

    def comparison(self) -> Comparison:
        """The readout's columns: the baseline if one is pinned, else the
        committed design beside a candidate."""
        shown = self.candidate.figures if self.candidate else self.figures
        if self.baseline:
            reference, ref_label = self.baseline.figures, self.baseline.label
        elif self.candidate:
            reference, ref_label = self.figures, "committed"
        else:
            reference, ref_label = None, ""
        shown_label = "candidate" if self.candidate else ("now" if self.baseline else "committed")
        return Comparison(shown, reference, shown_label, ref_label)

    def row_text(self, key: str) -> str:
        """What ``key``'s row shows: its pending value, else the committed one."""
        design = self.candidate.design if key in self.pending else self.design
        return field_text(key, get_value(design, key))

    def take_figures(self, design: Design, figures: Figures) -> bool:
        """The background sweep's full figures of ``design``; True if that
        design is still the candidate's or the committed one."""
        if self.candidate and self.candidate.design == design:
            self.candidate = dataclasses.replace(self.candidate, figures=figures)
        elif design == self.design:
            self.figures = figures
        else:
            return False
        return True

    # -- editing --------------------------------------------------------------

    def checkpoint(self, key: str) -> None:
        self.arrival = (key, self.pending.get(key))

    def edit(self, key: str, text: str) -> Outcome:
        """``text`` typed on ``key``'s row."""
        self.broken.pop(key, None)
        pending = self.pending
        if text.strip() == field_text(key, get_value(self.design, key)):
            if key not in pending:
                return self._outcome(invalid=False)
            del pending[key]  # typed back to the committed value
        else:
            pending[key] = text
        try:
            self._set_candidate(pending)
        except StageledgerError as err:
            self.broken[key] = (text, refusal(err))
            return self._outcome(status=f"{refusal(err)}; the readout keeps the last valid values", error=True,
                                 invalid=True)
        # The keys first: a candidate of several fields runs past 80 columns.
        said = f"Enter commits, Esc drops this row: candidate {self.candidate.describe()}" \
            if self.candidate else None
        return self._outcome(status=said, invalid=False, marked=key in pending, knobs="hold")

    def step(self, key: str, steps: int, decade: bool) -> Outcome:
        """Up/Down (``steps`` along the series, or the choices of a word key)
        or PgUp/PgDn (``decade``) on ``key``'s row, from its value on show."""
        current = self.candidate.design if key in self.pending else self.design
        value = get_value(current, key)
        words = choices(key)
        if isinstance(value, float) and math.isinf(value):
            return Outcome(status=f"{key} is open, which has no neighbouring value: type one", error=True)
        try:
            if words:
                new = words[(words.index(value) + steps) % len(words)]
            elif isinstance(value, (int, float)):
                new = (step_decade(key, value, steps) if decade
                       else step(key, value, steps, self.design.parts.series))
            else:
                return Outcome(status=f"{key}: text has no steps; type it")
        except StageledgerError as err:
            # A DesignError already opens with the key; said twice, the rule
            # that follows would be cut off at 80 columns.
            named = isinstance(err, DesignError) and err.field == key
            return Outcome(status=f"cannot step: {key}: {err.rule}" if named else f"{key}: cannot step: {err}",
                           error=True)
        text = field_text(key, new)
        outcome = self.edit(key, text)
        self.checkpoint(key)
        return dataclasses.replace(outcome, put=text)

    def move(self, old: str, new: str) -> Outcome:
        """The editor left ``old``'s row for ``new``'s: invalid text on ``old``
        is dropped, and the row gets back its value from the last checkpoint."""
        status, error = None, False
        if old in self.broken:
            text, _ = self.broken.pop(old)
            self._back_to_arrival(old)
            kept = "pending" if old in self.pending else "committed"
            status, error = (f"{old}: {text.strip()!r} is not valid and was dropped; the row keeps "
                             f"{self.row_text(old)} ({kept})"), True
        self.checkpoint(new)
        # The editor was placed before the app had seen what was typed on
        # the way: the Knobs place it again on what is known now.
        return self._outcome(status=status, error=error, knobs="show")

    def _back_to_arrival(self, key: str) -> None:
        """Give ``key`` back the pending value it had at the last checkpoint,
        not whatever valid prefix of the broken text came on the way ("5" of
        "5x")."""
        if self.arrival is None or self.arrival[0] != key:
            return
        pending, text = self.pending, self.arrival[1]
        if text is None:
            pending.pop(key, None)
        else:
            pending[key] = text
        try:
            self._set_candidate(pending)
        except StageledgerError:
            pass  # keep the candidate as it is: it was valid

    def abandon(self, key: str) -> Outcome:
        """Esc (or F9) drops this row's edit: its pending value and any invalid
        text (and the whole candidate if the rest is not valid without it); on
        a row with neither, the whole candidate."""
        pending = self.pending
        broken = self.broken.pop(key, None)
        error = False
        if key in pending and len(pending) > 1:
            del pending[key]
            try:
                self._set_candidate(pending)
                said = f"{key}: abandoned; still pending {self.candidate.describe()}"
            except StageledgerError as err:  # the rest needed this value
                self._set_candidate({})
                said, error = f"candidate abandoned: without {key}, {err}", True
        elif pending and (key in pending or broken is None):
            self._set_candidate({})
            said = f"candidate abandoned ({', '.join(pending)})"
        elif broken is not None:
            said = f"{key}: invalid text dropped"
        else:
            said = "nothing to abandon"
        self.checkpoint(key)
        return self._outcome(status=said, error=error, knobs="show")

    # -- committing -----------------------------------------------------------

    def commit(self, key: str) -> Outcome:
        """Enter on ``key``'s row: the candidate to save, or why not."""
        # Broken text is checked first: the editor can sit on text that does
        # not parse over an earlier valid candidate, and Enter on it is "not
        # committed" (with the rule), not a failed save.
        if key in self.broken:
            return Outcome(status=f"not committed: {self.broken[key][1]}", error=True)
        if self.candidate is None:
            return Outcome(status="nothing to commit")
        changes, note = dict(self.candidate.changes), self.note
        # The background sweep's full figures of the candidate, if they are in,
        # spare the session a second analysis; it checks they are of its design.
        known = (self.candidate.design, self.candidate.figures)
        return Outcome(save=Save(lambda s: s.commit(changes, note, known=known)))

    def undo(self) -> Save:
        note = self.note
        return Save(lambda s: s.undo(note), keep=True)

    def redo(self) -> Save:
        note = self.note
        return Save(lambda s: s.redo(note), keep=True)

    def next_series(self) -> Save:
        """F5: the next of SERIES_CYCLE after the design's series (in the order
        of SERIES, so E6 → E12 and E48 → E96), logged."""
        current = self.design.parts.series
        wanted = next((s for s in SERIES_CYCLE if SERIES.index(s) > SERIES.index(current)), SERIES_CYCLE[0])
        note = self.note or f"step along {wanted}"
        return Save(lambda s: s.commit({"parts.series": wanted}, note), keep=True)

    def switch_topology(self, topology: str) -> Save:
        """The design as a stage of ``topology``, logged as one entry; the keys
        both share keep their values (see ``model.design.stage.with_topology``)."""
        note = self.note
        return Save(lambda s: s.commit({"topology": topology}, note), keep=True)

    def saved(self, save: Save, entry, design: Design, figures: Figures, where: str, row: str) -> Outcome:
        """``save`` was logged as ``entry`` and saved to ``where``, leaving
        ``design`` (with ``figures``) committed; the editor is on ``row``."""
        pending = self.pending if save.keep else {}
        # What happened to pending values comes before the path: at 80
        # columns the end of the line is cut off.
        said = f"saved entry #{entry.number} ({entry.action})"
        if self.broken:
            said += f"; the invalid text in {', '.join(self.broken)} was dropped"
        self.design, self.figures = design, figures
        self.candidate, self.note = None, ""
        self.broken.clear()
        said += self._reapply(pending) + f" to {where}"
        self.checkpoint(row)
        return self._outcome(status=said, knobs="show")

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

    # -- the baseline ---------------------------------------------------------

    def toggle_baseline(self) -> Outcome:
        """F4: pin the committed design as it is now, or unpin."""
        if self.baseline is not None:
            self.baseline = None
            said = "baseline unpinned: changes are shown against the committed design"
        else:
            self.baseline = Baseline("baseline", self.design, self.figures)
            said = "baseline pinned: the committed design as it is now"
        return Outcome(status=said, readout=True)

    def pin(self, number: int, design: Design) -> Outcome:
        """The design after ledger entry ``number`` as the baseline."""
        try:
            self.baseline = Baseline(f"#{number}", design, _analysed(design))
        except StageledgerError as err:
            return Outcome(status=f"baseline not pinned: {err}", error=True)
        return Outcome(status=f"baseline pinned: the design after entry #{number} (F4 unpins)", readout=True)

    # -- the candidate --------------------------------------------------------

    def _set_candidate(self, pending: dict) -> None:
        """Make ``pending`` (key → text) the candidate, or drop it if empty;
        raises StageledgerError, with nothing changed, if it is not a valid design."""
        if pending:
            design = with_values(self.design, pending)
            self.candidate = Candidate(pending, design, _analysed(design, large_signal=False))
        else:
            self.candidate = None
        self._redraw = True

    def _outcome(self, **fields) -> Outcome:
        """An Outcome that asks for a readout redraw if the candidate was set since the last one."""
        redraw, self._redraw = self._redraw, False
        return Outcome(readout=redraw, **fields)


def refusal(err: StageledgerError) -> str:
    """Why a value was refused, for the status line: the row and the rule
    before the text that broke it, so that what is wrong and the limit come
    first and only the least telling part is cut on a narrow screen."""
    if isinstance(err, DesignError) and err.path is None:
        return f"{err.field}: {err.rule} ({err.value!r} not taken)"
    return str(err)


def _holds(design: Design, key: str, text: str) -> bool:
    """True if ``design`` already has the value ``text`` gives ``key``."""
    try:
        return get_value(with_values(design, {key: text}), key) == get_value(design, key)
    except StageledgerError:
        return False


class InternalFault(StageledgerError):
    """A fault of ours in an analysis the state runs itself. It is handled as
    a refused value (the candidate and everything committed are kept, the
    status line says what happened), and its text says it is ours."""


def _analysed(design: Design, large_signal: bool = True) -> Figures:
    try:
        return analyse(design, large_signal=large_signal)
    except StageledgerError:
        raise
    except Exception as err:  # noqa: BLE001 - any bug must not end the app mid-edit
        raise InternalFault(internal_error(err)) from err
