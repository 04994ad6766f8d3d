"""The Knobs panel: every design key in one list, grouped by table.

The rows are drawn as text, and a single editor moves between them: one
focusable widget instead of one input per key keeps the screen quick to
build, and keys typed ahead of a Tab always reach the row the Tab moved to.
The editor posts domain messages (:class:`KnobEdited`, :class:`KnobCommitted`,
:class:`KnobStepped`, :class:`KnobAbandoned`, :class:`KnobMoved`) and never
reaches into the app.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Iterable

from rich.text import Text
from textual import events
from textual.binding import Binding
from textual.containers import Horizontal, VerticalScroll
from textual.message import Message
from textual.widgets import Input, Static

from model.design import FIELDS, Design, get_value, keys_for
from model.units import format_si, parse_value

#: Table order on screen, with the heading shown for each.
GROUPS = (
    ("supply", "supply"), ("bias", "bias"), ("stage", "stage"), ("source", "source"),
    ("load", "load"), ("transistor", "transistor"), ("environment", "environment"),
    ("parts", "parts"), ("estimate", "hand estimate"),
)

#: Columns of the label in front of each value.
LABEL_WIDTH = 13


def field_text(key: str, value) -> str:
    """A value as the field shows it: SI prefix and unit, with as many figures
    as it takes to read back exactly (so an untouched field never changes)."""
    if isinstance(value, str):
        return value
    unit = FIELDS[key].unit if key in FIELDS else ""
    if value == math.inf:
        return "open"
    if unit == "°C":
        return f"{value:g}"
    for digits in range(3, 13):
        text = format_si(value, unit, digits)
        try:
            if parse_value(text, unit) == value:
                return _trim(text)
        except ValueError:
            break
    return repr(value)


def _trim(text: str) -> str:
    """ "4.70 kΩ" → "4.7 kΩ": trailing zeros carry no information here."""
    number, _, rest = text.partition(" ")
    if "." in number and "e" not in number:
        number = number.rstrip("0").rstrip(".")
    return f"{number} {rest}".strip()


def layout(design: Design) -> list[tuple[str, str | None]]:
    """The panel's lines in order: ``(heading, None)`` or ``(label, key)``."""
    keys = [k for k in keys_for(design.topology) if k not in ("topology", "notes")]
    lines = [("name", None), ("name", "name")]
    for table, heading in GROUPS:
        mine = [k for k in keys if k.startswith(table + ".")]
        if mine:
            lines.append((heading, None))
            lines.extend((k.split(".")[-1], k) for k in mine)
    return lines


class KnobEdited(Message):
    def __init__(self, key: str, text: str):
        super().__init__()
        self.key, self.text = key, text


class KnobCommitted(Message):
    def __init__(self, key: str, text: str):
        super().__init__()
        self.key, self.text = key, text


class KnobStepped(Message):
    def __init__(self, key: str, steps: int, decade: bool):
        super().__init__()
        self.key, self.steps, self.decade = key, steps, decade


class KnobAbandoned(Message):
    def __init__(self, key: str):
        super().__init__()
        self.key = key


class KnobMoved(Message):
    """The editor left ``old`` for ``new``; ``dropped`` is the invalid text it
    held (not kept), or None."""

    def __init__(self, old: str, new: str, dropped: str | None):
        super().__init__()
        self.old, self.new, self.dropped = old, new, dropped


class KnobEditor(Input):
    """The one-line editor, on whichever row is current, with stepping keys."""

    BINDINGS = [
        Binding("up", "step(1)", "step up", show=False),
        Binding("down", "step(-1)", "step down", show=False),
        Binding("pageup", "decade(1)", "decade up", show=False),
        Binding("pagedown", "decade(-1)", "decade down", show=False),
        Binding("escape", "abandon", "cancel edit", show=False),
    ]

    #: Tab and Shift+Tab, as steps through the rows.
    MOVES = {"tab": 1, "shift+tab": -1}

    def __init__(self, move: Callable[[int], None]):
        """``move(steps)`` puts the editor on another row."""
        # validate_on=(): Input's own validation (with no validators) marks every
        # value "-valid" on change, blur and submit, which would wipe the app's
        # "-invalid" mark before Enter is handled; the app is the validator here.
        super().__init__(id="knob-editor", compact=True, select_on_focus=True, validate_on=())
        self.key = ""
        self._move = move

    async def _on_key(self, event: events.Key) -> None:
        # Tab is handled here, in the editor's own queue, not as a binding: a
        # binding runs only once the key has bubbled up to the app, and the
        # characters typed after it would reach the old row first.
        if event.key in self.MOVES:
            event.stop()
            event.prevent_default()
            self._move(self.MOVES[event.key])
            return
        await super()._on_key(event)

    def action_step(self, steps: int) -> None:
        self.post_message(KnobStepped(self.key, steps, False))

    def action_decade(self, steps: int) -> None:
        self.post_message(KnobStepped(self.key, steps, True))

    def action_abandon(self) -> None:
        self.post_message(KnobAbandoned(self.key))

    def on_input_changed(self, event: Input.Changed) -> None:
        event.stop()
        self.post_message(KnobEdited(self.key, event.value))

    def on_input_submitted(self, event: Input.Submitted) -> None:
        event.stop()
        self.post_message(KnobCommitted(self.key, event.value))


class Knobs(VerticalScroll):
    """Every editable key of a design, one row each, with the editor on one.

    Rows holding a pending (uncommitted) value show it underlined.
    """

    # The editor takes the focus; the panel itself never does.
    can_focus = False

    def __init__(self, design: Design, **kwargs):
        super().__init__(**kwargs)
        self._design = design
        self._candidate: Design | None = None
        self._pending: frozenset[str] = frozenset()
        self._lines = layout(design)
        self.keys = [key for _, key in self._lines if key is not None]
        self.key = "supply.vcc" if "supply.vcc" in self.keys else self.keys[0]
        self.editor = KnobEditor(self.move)

    def compose(self):
        yield Static(id="knobs-above", markup=False)
        with Horizontal(id="knob-row"):
            yield Static(id="knob-label", markup=False)
            yield self.editor
        yield Static(id="knobs-below", markup=False)

    def on_mount(self) -> None:
        self._place()

    def text(self, key: str) -> str:
        """What ``key``'s row shows when the editor is elsewhere: the
        candidate's value if the key is pending, else the committed one."""
        design = self._candidate if key in self._pending else self._design
        return field_text(key, get_value(design, key))

    def hold(self, pending: Iterable[str], candidate: Design | None) -> None:
        """Note the pending keys and the candidate design they make; their rows
        show it once the editor moves on.  The editor's own text is left alone."""
        self._pending, self._candidate = frozenset(pending), candidate

    def show(self, design: Design, pending: Iterable[str] = (), candidate: Design | None = None) -> None:
        """Show ``design``, with the ``pending`` keys taken from ``candidate``, quietly.

        The editor's text is reset to its row's, so a broken entry goes too.
        """
        self._design = design
        self.hold(pending, candidate)
        if layout(design) != self._lines:
            self._lines = layout(design)
            self.keys = [key for _, key in self._lines if key is not None]
        self._place()

    def select(self, key: str) -> KnobEditor:
        """Put the editor on ``key``'s row, with its text selected."""
        self.key = key
        self._place()
        return self.editor

    def move(self, steps: int) -> None:
        """Tab and Shift+Tab: the next or previous row; past either end the
        focus leaves the panel (for the ledger), or wraps if nothing else takes it."""
        old, dropped = self.key, None
        if self.editor.has_class("-invalid"):
            dropped = self.editor.value
        index = self.keys.index(self.key) + steps
        if not 0 <= index < len(self.keys):
            index %= len(self.keys)
            (self.screen.focus_next if steps > 0 else self.screen.focus_previous)()
        self.select(self.keys[index])
        self.post_message(KnobMoved(old, self.key, dropped))

    def _place(self) -> None:
        at = next(i for i, (_, key) in enumerate(self._lines) if key == self.key)
        for name, lines in (("#knobs-above", self._lines[:at]), ("#knobs-below", self._lines[at + 1:])):
            part = self.query_one(name, Static)
            part.update(self._rows_text(lines))
            part.display = bool(lines)
        self.query_one("#knob-label", Static).update(self._lines[at][0])
        editor = self.editor
        editor.key = self.key
        with editor.prevent(Input.Changed):
            editor.value = self.text(self.key)
        editor.set_class(False, "-invalid")
        editor.set_class(self.key in self._pending, "-candidate")
        # Show the start of a long value (a design's name), selected, so typing replaces it.
        editor.cursor_position = 0
        editor.select_all()
        self.call_after_refresh(self._follow)

    def _follow(self) -> None:
        """Once the rows are laid out: keep the editor in view, and put the
        terminal's cursor on it (Input set it before the row moved)."""
        self.scroll_to_widget(self.query_one("#knob-row"), animate=False)
        self.call_after_refresh(self._put_cursor)

    def _put_cursor(self) -> None:
        if self.editor.has_focus:
            self.app.cursor_position = self.editor.cursor_screen_offset

    def _rows_text(self, lines) -> Text:
        text = Text(no_wrap=True, overflow="ellipsis", end="")
        for i, (label, key) in enumerate(lines):
            if i:
                text.append("\n")
            if key is None:
                text.append(label, style="bold")
                continue
            text.append(label.ljust(LABEL_WIDTH))
            text.append(self.text(key), style="bold underline" if key in self._pending else "")
        return text
