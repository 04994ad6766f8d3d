"""One line per history entry, as the workbench's Ledger and `history --oneline`
show it: number, time, action, the change, its biggest consequences, the note.

Plain text, no screen: the command line uses it without Textual.  A line is
built of pieces that must never be split (a value with its unit, an arrow
pair ``220 Ω→330 Ω``, one consequence ``gain +1.56 dB``) joined at the
separators (`` · `` between the parts, ``, `` inside a list), so that
:func:`wrap_line` breaks a long line at a separator and nowhere else (see
:mod:`tui.wrapping`).
"""

from __future__ import annotations

import functools

from model.design.fields import FIELDS
from model.files.ledger import HAND_EDIT, START, Entry

from .consequences import compact_parts, show_value
from .fieldtext import field_text
from .minus_sign import SCREEN_MINUS, minus_signs
from .safe_text import visible
from .wrapping import KEEP, whole, wrap

#: Tables whose keys are not named by their last part alone (transistor2.beta
#: beside transistor.beta; a spec's figure beside the figure itself).
_FULL_KEY = ("transistor2", "tolerance", "spec")


def _piece(text: str, minus: str) -> str:
    """``text`` as one unbreakable piece, its numbers signed with ``minus``."""
    return whole(minus_signs(text, minus))


def _key(key: str) -> str:
    table, _, name = key.rpartition(".")
    return key if table in _FULL_KEY else name


@functools.lru_cache(maxsize=4096)
def _number_text(key: str, value: float) -> str:
    """A number as the Knobs write it; remembered, because a history sets the
    same few values again and again and finding the shortest exact text
    takes a parse per digit."""
    return field_text(key, value)


def _step(change, minus: str) -> str:
    """``re1 220 Ω→330 Ω``: one change as one piece (a name or notes change
    is the file's text, escaped)."""
    if change.key in FIELDS:
        old, new = (visible(field_text(change.key, v)) if isinstance(v, str) else _number_text(change.key, v)
                    for v in (change.old, change.new))
    else:  # a tolerance or spec entry: a number or a range MIN..MAX, as set takes it
        old, new = (show_value(change.key, v) for v in (change.old, change.new))
    step = f"{_key(change.key)} {old}→{new}"
    # Text (a name, notes) is the user's, hyphens and all; only numbers take the minus.
    return whole(step) if isinstance(change.old, str) or isinstance(change.new, str) else _piece(step, minus)


def _action(e: Entry) -> str:
    if e.action == START:
        return "start" + (f" from {visible(e.origin)}" if e.origin else "")
    if e.reverses is not None:
        return f"{e.action} #{e.reverses}"
    return e.action


def _parts(e: Entry, shown_date: bool, minus: str) -> list:
    """The entry's parts, each a list of pieces (joined by ", " within a part)."""
    when = f"{e.time:%Y-%m-%d %H:%M}" if shown_date else f"{e.time:%H:%M}"
    head = whole(f"#{e.number} {when} {_action(e)}")
    steps = [_step(c, minus) for c in e.changes]
    # The head and the first change read as one phrase: "#3 20:31 set rc 6.8 kΩ→10 kΩ".
    # "undo #4: rc ..." and "hand-edit: rc ...", where "set rc ..." reads as it is.
    colon = ":" if e.action in (START, HAND_EDIT) or e.reverses is not None else ""
    parts = [[f"{head}{colon} {steps[0]}", *steps[1:]] if steps else [head]]
    if e.before:
        parts.append([_piece(p, minus) for p in compact_parts(e.before, e.after)])
    if e.note:
        parts.append([f'"{visible(e.note)}"'])  # the user's words: free to wrap at their spaces
    return parts


def _joined(parts: list) -> str:
    # The dot stays with the part before it, so a row never starts with one.
    return f"{KEEP}· ".join(", ".join(pieces) for pieces in parts)


def ledger_lines(history: list, minus: str = SCREEN_MINUS, cache: dict | None = None) -> list:
    """One line per entry, oldest first, with no-break spaces inside its
    pieces (see :func:`wrap_line`, :func:`tui.wrapping.plain`).  The date is written
    where it changes from the entry before (always on the first), the time
    to the minute everywhere.  ``cache`` keeps the lines of one file's
    entries from call to call: entries are only ever appended, never
    rewritten, so a long history is not worded again after each commit."""
    lines, last_date = [], None
    cache = {} if cache is None else cache
    for e in history:
        date = e.time.date()
        key = (e.number, e.time, e.action, date != last_date, minus)
        if key not in cache:
            cache[key] = _joined(_parts(e, date != last_date, minus))
        lines.append(cache[key])
        last_date = date
    return lines


def wrap_line(line: str, width: int, indent: str = "  ") -> str:
    """``line`` broken into rows of at most ``width`` cells at its
    separators (never inside a value, a unit pair or one consequence), the
    rows after the first indented; a piece wider than a row stays whole."""
    return "\n".join(wrap(line, width, indent))
