"""The ledger: every committed change to a design, with its consequences.

The history is append-only.  Undo and redo are new entries that point at the
entry they reverse, so nothing is ever deleted or rewritten.  The first entry
(``start``) holds a full snapshot of the design; every later entry holds only
the keys it changed (old and new values), so the design as it stood after any
entry is the start snapshot with the changes replayed in order.
"""

from __future__ import annotations

import datetime as _dt
import math
from dataclasses import dataclass, field
from typing import TYPE_CHECKING

from model.design.stage import (
    NONE,
    Design,
    check_key,
    design_from_dict,
    design_to_dict,
    file_word,
    get_value,
    knows,
    with_values,
)
from model.errors import DesignError, StageledgerError

if TYPE_CHECKING:  # only named: reading a design file needs no engine
    from model.analyses.figures import Figures

#: Entry kinds, in the words the file uses.
START, SET, UNDO, REDO, HAND_EDIT = "start", "set", "undo", "redo", "hand-edit"
ACTIONS = (START, SET, UNDO, REDO, HAND_EDIT)

#: The figures every entry records before and after its change.
#: "yield" (a fraction of builds meeting every spec, see model.spread) only
#: for a design with a [spec] table.
#: ic2, vce2 and p_transistor2 (the follower's) only for a two-transistor stage.
HEADLINE = ("ic", "vce", "region", "av_loaded", "av_source", "rin", "rout", "swing_up",
            "swing_down", "thd", "p_transistor", "p_supply", "tj", "f_low", "f_high",
            "ic2", "vce2", "p_transistor2", "nf_db", "snr_db", "yield")


@dataclass(frozen=True)
class Change:
    """One key's step: ``key`` is "table.key" (or "name"/"notes")."""

    key: str
    old: object
    new: object


@dataclass(frozen=True)
class Entry:
    """One history entry.

    ``time`` is a timezone-aware UTC datetime; ``before``/``after`` map each
    HEADLINE figure to its value (``before`` is empty for a start entry);
    ``raised``/``cleared`` are warning codes; ``snapshot`` is the full design
    table dict of a start entry; ``reverses`` the entry an undo or redo reverses.
    """

    number: int
    time: _dt.datetime
    action: str
    changes: tuple = ()
    note: str = ""
    before: dict = field(default_factory=dict)
    after: dict = field(default_factory=dict)
    raised: tuple = ()
    cleared: tuple = ()
    reverses: int | None = None
    origin: str | None = None
    snapshot: dict | None = None


def headline(fig: Figures, yield_: float | None = None) -> dict:
    """The HEADLINE figures of an analysis (and the yield, a fraction, when
    the design has specs), to six significant figures: the ledger is read by
    people, and the design itself can always be re-analysed.  A figure that
    does not exist for this design (NaN: no −3 dB band, no follower, no
    noise figure at rs = 0) is left out."""
    values = {k: getattr(fig, k) for k in HEADLINE if k != "yield"}
    if yield_ is not None:
        values["yield"] = yield_
    return {k: _sig(v) for k, v in values.items() if not (isinstance(v, float) and math.isnan(v))}


def _sig(value, digits: int = 6):
    if isinstance(value, float) and math.isfinite(value) and value != 0.0:
        return float(f"{value:.{digits}g}")
    return value


def warning_codes(fig: Figures) -> tuple:
    return tuple(dict.fromkeys(w.code for w in fig.warnings))


def now() -> _dt.datetime:
    # Whole seconds: the file is for people, and TOML round-trips them exactly.
    return _dt.datetime.now(_dt.timezone.utc).replace(microsecond=0)


def changes_between(old: Design, new: Design) -> tuple:
    """Every key whose value differs between two designs; a key (or tolerance
    or spec entry) only one of them has is "none" in the other, so the keys a
    new topology lacks stay in the history.  A change of topology comes
    first: the keys after it follow the new topology's rules."""
    a, b = _flat(design_to_dict(old)), _flat(design_to_dict(new))
    keys = ["topology"] + [k for k in b if k != "topology"] + [k for k in a if k not in b]
    return tuple(Change(k, a.get(k, NONE), b.get(k, NONE)) for k in keys if a.get(k, NONE) != b.get(k, NONE))


def _flat(data: dict, prefix: str = "") -> dict:
    out = {}
    for k, v in data.items():
        if isinstance(v, dict):
            out.update(_flat(v, f"{prefix}{k}."))
        elif k != "format":
            out[prefix + k] = v
    return out


def start_entry(design: Design, fig: Figures, *, origin: str | None = None, note: str = "",
                yield_: float | None = None, changes: tuple = ()) -> Entry:
    """The first entry: the whole design; ``changes`` are the starting values
    given on top of the defaults (or of the design copied), for the record:
    the replay starts from the snapshot, which already holds them."""
    snapshot = {k: v for k, v in design_to_dict(design).items() if k != "format"}
    return Entry(1, now(), START, changes=changes, note=note, after=headline(fig, yield_), raised=warning_codes(fig),
                 origin=origin, snapshot=snapshot)


def change_entry(number: int, action: str, changes: tuple, before: Figures, after: Figures, *,
                 note: str = "", reverses: int | None = None, yields: tuple = (None, None)) -> Entry:
    """``yields`` are the (before, after) yields, None where the design has no spec."""
    old, new = set(warning_codes(before)), set(warning_codes(after))
    return Entry(number, now(), action, changes=changes, note=note, before=headline(before, yields[0]),
                 after=headline(after, yields[1]), raised=tuple(c for c in warning_codes(after) if c not in old),
                 cleared=tuple(c for c in warning_codes(before) if c not in new), reverses=reverses)


def apply(design: Design, changes: tuple) -> Design:
    """``design`` with each change's new value."""
    return with_values(design, {c.key: c.new for c in changes})


def inverse(changes: tuple) -> tuple:
    return tuple(Change(c.key, c.new, c.old) for c in changes)


def replay(history: list, upto: int | None = None, *, checked: bool = False) -> Design:
    """The design as it stood after entry ``upto`` (the last entry by default).

    Each entry's old values are checked against the design before it,
    unless the history is ``checked`` already (a Document's is: read by the
    full check, or vouched for by the file's digest); then the changes are
    applied in batches, a Design built only where the topology changes and
    at the end, which gives the same design far sooner."""
    if not history or history[0].action != START:
        raise StageledgerError("the history has no start entry to replay from")
    last = len(history) if upto is None else upto
    if not 1 <= last <= len(history):
        raise StageledgerError(f"there is no history entry {upto}; entries run from 1 to {len(history)}")
    design = design_from_dict({"format": 1, **history[0].snapshot})
    if checked:
        return _replay_checked(design, history[1:last])
    for entry in history[1:last]:
        _check_old(design, entry)
        design = apply(design, entry.changes)
    return design


def _replay_checked(design: Design, entries: list) -> Design:
    pending: dict = {}
    for entry in entries:
        if entry.changes[0].key == "topology":
            # The keys after a change of topology follow the new one's rules.
            design = apply(with_values(design, pending), entry.changes)
            pending = {}
        else:
            pending.update((c.key, c.new) for c in entry.changes)
    return with_values(design, pending)


def _check_old(design: Design, entry: Entry) -> None:
    """Refuse an entry whose ``old`` values the design before it does not
    hold: the history would not tell how the design got where it is."""
    for k, c in enumerate(entry.changes, start=1):
        differs, shown = _holds_not(design, c.key, c.old)
        if differs:
            raise DesignError(f"history[{entry.number}].changes[{k}].old", c.old,
                              f"differs from the value the entries before it leave, {shown!r}")


def _holds_not(design: Design, key: str, value) -> tuple[bool, object]:
    """(whether ``design`` does not hold ``value`` for ``key``, what it holds
    as the file shows it).  A key the design's topology lacks holds "none";
    the rest are compared as stored values, so "none" and 0.0 (or "open"
    and inf, as older files wrote some of them) are the same value."""
    if key != "topology" and not knows(key, design.topology):
        return value != NONE, NONE
    held = get_value(design, key)
    return held != check_key(key, design.topology, value), file_word(key, held) or held


def stacks(history: list) -> tuple[list, list]:
    """(undoable, redoable) entry numbers, most recent last, derived from the history.

    A set or hand edit can be undone; an undo can be redone until the next new
    change; a redo can be undone again.
    """
    undoable, redoable = [], []
    for e in history:
        if e.action in (SET, HAND_EDIT):
            undoable.append(e.number)
            redoable.clear()
        elif e.action == UNDO:
            if undoable and undoable[-1] == e.reverses:
                undoable.pop()
            redoable.append(e.number)
        elif e.action == REDO:
            if redoable and redoable[-1] == e.reverses:
                redoable.pop()
            undoable.append(e.number)
    return undoable, redoable


def check_changes_apply(design: Design, changes: tuple) -> None:
    """Refuse to reverse a change whose new values the design no longer holds."""
    for c in changes:
        differs, shown = _holds_not(design, c.key, c.old)
        if differs:
            raise DesignError(c.key, shown, f"no longer holds {c.old!r}; cannot reverse that entry")
