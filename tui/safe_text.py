"""Text from a design file, made safe to show on a terminal.

A design's name, its notes and the notes in its history are whatever the
file says.  Sent raw, an ESC or a C1 CSI (U+009B) starts a terminal control
sequence (clear the screen, move the cursor, retitle the window), BEL rings
and CR overwrites the line.  Every place that shows such text, in the
command line and in the workbench, passes it through :func:`visible`.

Every line break is escaped too, newline included: each place that shows
these texts is one line (a report heading, a ledger row, ``notes: old →
new``), so a raw newline would break the layout or pass for a line of
output.  Backslashes are left as they are, so a name such as ``A\\B``
reads naturally; the escapes are for reading, not for copying back.
"""

from __future__ import annotations

import re

#: Shown by their usual short escapes; every other one as \\xNN or \\uNNNN.
_SHORT = {"\n": "\\n", "\r": "\\r", "\t": "\\t"}

# C0 controls, DEL and the C1 controls (U+0080–U+009F: a terminal may take
# U+009B as CSI); the Unicode line and paragraph separators, which some
# terminals break lines at; and the bidirectional embeddings, overrides and
# isolates, which reorder how the rest of a line reads.
_UNSAFE = re.compile("[\x00-\x1f\x7f-\x9f\u2028\u2029\u202a-\u202e\u2066-\u2069]")


def _escape(match: re.Match) -> str:
    c = match.group()
    if c in _SHORT:
        return _SHORT[c]
    return f"\\x{ord(c):02x}" if ord(c) < 0x100 else f"\\u{ord(c):04x}"


def visible(text: str) -> str:
    r"""``text`` with every control character written as a visible escape.

    An ESC becomes the four characters ``\x1b`` and the rest of its sequence,
    being printable, stays as it is, so no sequence can start: ``a␛[2Jb``
    is shown as ``a\x1b[2Jb``.
    """
    return _UNSAFE.sub(_escape, text)


def internal_error(err: Exception) -> str:
    """A fault of ours as one status line: the exception's type and message
    (escaped: it may quote a value from the file)."""
    return f"internal error ({type(err).__name__}: {visible(str(err))}); please report it"
