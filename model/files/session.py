"""An open design file being tuned: the current design, its history, and safe saves.

Both the command line and the workbench screen commit changes through a
:class:`DesignSession`, so the ledger and the saving rules live in one place.
A commit is reported only after the file is durably on disk; if the save
fails, the session is left exactly as it was before the commit.
"""

from __future__ import annotations

import os
from dataclasses import dataclass

from model.analyses.figures import Figures, analyse
from model.design.stage import Design, with_values
from model.errors import StageledgerError
from model.files import ledger
from model.files.designfile import Document, dumps_checked_document, encode_for_save, read_document
from model.files.historyfile import entry_text
from model.files.ledger import Entry
from model.files.savefile import DesignLock, atomic_write
from model.spread.analysis import LEDGER_SAMPLES, quick_yield


def ledger_yield(design: Design) -> float | None:
    """The yield the ledger records (a fraction; None without specs): from
    LEDGER_SAMPLES builds drawn with the fixed seed, so that before and
    after a change see the same draws and the change itself is sharp."""
    return _value(quick_yield(design, LEDGER_SAMPLES))


def _value(y) -> float | None:
    return None if y is None else y.value


#: Refused alike by a commit and by its dry run, so the two agree.
NOTHING_TO_COMMIT = "nothing to commit: every value is already as given"


class CommentsWouldBeLost(StageledgerError):
    """The file has hand-written comments that a rewrite would drop."""

    def __init__(self, path: str, lines: tuple):
        self.lines = lines
        shown = ", ".join(str(n) for n in lines[:8]) + (" …" if len(lines) > 8 else "")
        super().__init__(
            f"{path}: has hand-written comments (line {shown}) that saving would drop; "
            "move them into the notes field, or allow dropping them"
        )


@dataclass(frozen=True)
class Preview:
    """What a candidate change would do, before it is committed."""

    design: Design
    changes: tuple
    before: Figures
    after: Figures
    yields: tuple = (None, None)


class DesignSession:
    """One design file opened for tuning.

    Parameters
    ----------
    path : the design file.
    lock : take the single-writer lock (False opens read-only).
    drop_comments : allow a save to drop hand-written ``#`` comments.
    """

    def __init__(self, path: str, *, lock: bool = True, drop_comments: bool = False):
        self.path = os.fspath(path)
        if lock and not os.path.isfile(self.path):
            # Say "no such file" rather than leave a lock file beside a mistyped name.
            read_document(self.path)
        self._lock = DesignLock(self.path).acquire() if lock else None
        self.read_only = not lock
        self.drop_comments = drop_comments
        try:
            # Loading replays the history, which can refuse the file too; the
            # lock must not outlive a session that never opened.
            self._load(read_document(self.path))
        except BaseException:
            self.close()
            raise

    def _load(self, doc: Document) -> None:
        self.design = doc.design
        self._doc = doc
        self._entries: list | None = None
        self._count = doc.entry_count
        # The entries' text, made only for a save: a verified file's is its own,
        # while a fully checked one's must be serialised anew.
        self._texts: list | None = None
        self._logged = doc.logged
        self.fingerprint = doc.fingerprint
        self.comment_lines = doc.comment_lines
        self.figures = analyse(self.design)
        self._yields: dict = {}
        self.hand_edits = doc.hand_edits()
        self._recorded_yields = self._recorded_yield(doc)

    def _recorded_yield(self, doc: Document) -> dict:
        """{design: yield} for the yield the last entry records for the design
        it left, so that the next commit reads its before-yield rather than
        drawing the same LEDGER_SAMPLES builds again (a tenth of a second).
        Only where that record is certainly this engine's: the file is as
        stageledger wrote it (its digest matched), nothing was changed by
        hand since, and the entry's other figures are exactly this analysis's."""
        if not (self._count and self.design.spec) or doc.verified_text is None or self.hand_edits:
            return {}
        after = doc.entry(self._count).after
        recorded = after.get("yield")
        if recorded is None or ledger.headline(self.figures, recorded) != after:
            return {}
        return {self.design: recorded}

    @property
    def history(self) -> list:
        """The ledger Entries, read from the file on first use: a commit
        needs only their count, and the design they replay to."""
        if self._entries is None:
            self._entries = list(self._doc.history)
        return self._entries

    def close(self) -> None:
        if self._lock is not None:
            self._lock.release()
            self._lock = None

    def __enter__(self) -> "DesignSession":
        return self

    def __exit__(self, *exc) -> None:
        self.close()

    # -- what-if ---------------------------------------------------------------

    def preview(self, values: dict) -> Preview:
        """The consequences of setting ``values`` ("table.key" → number or text)."""
        design = with_values(self.design, values)
        changes = ledger.changes_between(self.design, design)
        return Preview(design, changes, self.figures, analyse(design),
                       (self.yield_of(self.design), self.yield_of(design)))

    def yield_of(self, design: Design) -> float | None:
        """:func:`ledger_yield`, kept for the designs this session has seen
        (or read from the file's last entry, see :meth:`_recorded_yield`)."""
        if design in self._recorded_yields:
            return self._recorded_yields[design]
        return _value(self.yield_result(design))

    def yield_result(self, design: Design):
        """The Yield behind :meth:`yield_of` (with its interval), or None without specs."""
        if design not in self._yields:
            self._yields[design] = quick_yield(design, LEDGER_SAMPLES)
        return self._yields[design]

    def commit(self, values: dict, note: str = "", known: tuple | None = None) -> Entry:
        """Apply ``values``, log the change and save; returns the new entry.

        ``known`` is an optional (design, figures) pair the caller has
        already analysed in full (the workbench's background sweep); it
        spares the analysis only if it is of exactly the design ``values``
        make, so a stale pair cannot be logged.
        """
        design = with_values(self.design, values)
        changes = ledger.changes_between(self.design, design)
        if not changes:
            raise StageledgerError(NOTHING_TO_COMMIT)
        if known is not None and known[0] == design and known[1].large_signal:
            after = known[1]
        else:
            after = analyse(design)
        return self._commit(ledger.SET, design, changes, after, note, None)

    def undo(self, note: str = "") -> Entry:
        undoable, _ = ledger.stacks(self._steps())
        if not undoable:
            raise StageledgerError("nothing to undo")
        return self._reverse(undoable[-1], ledger.UNDO, note)

    def redo(self, note: str = "") -> Entry:
        _, redoable = ledger.stacks(self._steps())
        if not redoable:
            raise StageledgerError("nothing to redo")
        return self._reverse(redoable[-1], ledger.REDO, note)

    def _steps(self) -> list:
        """What ledger.stacks needs of every entry, the owed ones included;
        only the entry undone or redone is then read whole."""
        return (self._entries if self._entries is not None else self._doc.steps()) + self._prefix()

    def _entry(self, number: int) -> Entry:
        if number > self._count:
            return self._prefix()[number - self._count - 1]
        return self._entries[number - 1] if self._entries is not None else self._doc.entry(number)

    def _reverse(self, target: int, action: str, note: str) -> Entry:
        changes = ledger.inverse(self._entry(target).changes)
        ledger.check_changes_apply(self.design, changes)
        design = ledger.apply(self.design, changes)
        return self._commit(action, design, changes, analyse(design), note, target)

    # -- logging and saving -----------------------------------------------------

    def _prefix(self) -> list:
        """Entries owed before the next one: a start entry for a file never
        logged, or a hand-edit entry for changes made outside the tool."""
        if not self._count:
            return [ledger.start_entry(self.design, self.figures, yield_=self.yield_of(self.design))]
        if self.hand_edits:
            logged = self._logged
            return [ledger.change_entry(self._count + 1, ledger.HAND_EDIT, self.hand_edits,
                                        analyse(logged), self.figures,
                                        note="changed in the file outside stageledger",
                                        yields=(self.yield_of(logged), self.yield_of(self.design)))]
        return []

    def _commit(self, action, design, changes, after, note, reverses) -> Entry:
        if self.read_only:
            raise StageledgerError(f"{self.path}: opened read-only; nothing was saved")
        if self.comment_lines and not self.drop_comments:
            raise CommentsWouldBeLost(self.path, self.comment_lines)
        prefix = self._prefix()
        number = self._count + len(prefix) + 1
        entry = ledger.change_entry(number, action, changes, self.figures, after, note=note, reverses=reverses,
                                    yields=(self.yield_of(self.design), self.yield_of(design)))
        added = prefix + [entry]
        # The entries already in the file are written as they were read: only the new ones are serialised.
        if self._texts is None:
            self._texts = [self._doc.history_text] if self._count else []
        texts = self._texts + [entry_text(e) for e in added]
        data = encode_for_save(dumps_checked_document(design, texts, number), self.path)
        self.fingerprint = atomic_write(self.path, data, self.fingerprint)
        # Only now, with the file durably saved, does the session move on.
        self.design, self.figures, self._logged = design, after, design
        # The entries, if not read yet, are read from what was just written.
        self._doc = Document(self.path, design, number, self.fingerprint, (), design,
                             verified_text="\n".join(texts))
        if self._entries is not None:
            self._entries += added
        self._texts, self._count = texts, number
        self.comment_lines = ()
        self.hand_edits = ()
        return entry


def create(path: str, design: Design, *, origin: str | None = None, note: str = "", changes: tuple = ()) -> Entry:
    """Write a new design file holding ``design`` and its start entry
    (``changes``: the starting values set on top of where it came from).

    Refuses to overwrite an existing file.
    """
    entry = ledger.start_entry(design, analyse(design), origin=origin, note=note, yield_=ledger_yield(design),
                               changes=changes)
    data = encode_for_save(dumps_checked_document(design, [entry_text(entry)]), path)
    with DesignLock(path):
        atomic_write(path, data, None, create=True)
    return entry


def design_at(spec: str) -> tuple:
    """(Design, label) for ``FILE`` or ``FILE@N`` (the design after history entry N)."""
    path, _, number = spec.rpartition("@")
    if path and number.isdigit() and not os.path.exists(spec):
        doc = read_document(path)
        if not doc.history:
            raise StageledgerError(f"{path}: has no history, so there is no entry {number}")
        return ledger.replay(doc.history, int(number), checked=True), spec
    return read_document(spec).design, spec
