"""The Knobs panel: every design key in one list, grouped by table.

The rows are drawn as text, and a single editor moves between them: one
focusable widget instead of one input per key keeps the screen quick to
build, and keys typed ahead of a Tab reach the row the Tab moved to (a lone
Esc excepted: the terminal driver joins it to a key that follows quickly).
The editor posts domain messages (:class:`KnobEdited`, :class:`KnobCommitted`,
:class:`KnobStepped`, :class:`KnobAbandoned`, :class:`KnobMoved`) and never
reaches into the app.
"""

from __future__ import annotations

from collections.abc import Callable, Iterable

from rich.text import Text
from textual import events
from textual.binding import Binding
from textual.containers import Horizontal, VerticalScroll
from textual.message import Message
from textual.widgets import Input, Static
from textual.widgets.input import Selection

from model.design.stage import Design, get_value, keys_for

from ..fieldtext import field_text
from ..safe_text import visible

#: Table order on screen, with the heading shown for each.  transistor2 is
#: the follower of a two-transistor stage, which shares the first one's
#: parameters but β (see model.design.fields).
GROUPS = (
    ("supply", "supply"), ("bias", "bias"), ("stage", "stage"), ("source", "source"),
    ("load", "load"), ("transistor", "transistor"), ("transistor2", "follower q2"), ("environment", "environment"),
    ("parts", "parts"), ("estimate", "hand estimate"),
)

#: Columns of the label in front of each value.
LABEL_WIDTH = 13


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
    """``text`` typed on ``key``'s row, on the editor's ``visit`` to a row."""

    def __init__(self, key: str, text: str, visit: int):
        super().__init__()
        self.key, self.text, self.visit = key, text, visit


class KnobCommitted(Message):
    def __init__(self, key: str, text: str):
        super().__init__()
        self.key, self.text = key, text


class KnobStepped(Message):
    def __init__(self, key: str, steps: int, decade: bool, visit: int):
        super().__init__()
        self.key, self.steps, self.decade, self.visit = key, steps, decade, visit


class KnobAbandoned(Message):
    def __init__(self, key: str):
        super().__init__()
        self.key = key


class KnobMoved(Message):
    """The editor left ``old``'s row for ``new``'s."""

    def __init__(self, old: str, new: str):
        super().__init__()
        self.old, self.new = old, new


class KnobEditor(Input):
    """The one-line editor, on whichever row is current.

    Textual runs a key's binding only once the key has bubbled up to the
    app, while a printable key is handled at once; in a burst of keys (a
    slow link, or fast typing) "12", Backspace, "3" would come out "123",
    and Enter, Tab, "47" would type 47 before the commit.  So the editor
    handles every key it knows in its key handler, in arrival order: its
    own (Tab, Enter, Esc, the stepping keys) and Input's editing bindings.
    Its messages go straight to its parent, the way a key it does not know
    (F7, say) bubbles on, so the app receives both in the order typed; and
    each names the row it came from (edits and steps the visit too), since
    a Tab typed ahead may have moved the editor by the time the app
    handles it.
    """

    #: key → (message kind, steps)
    KEYS = {
        "tab": ("move", 1), "shift+tab": ("move", -1),
        "up": ("step", 1), "down": ("step", -1),
        "pageup": ("decade", 1), "pagedown": ("decade", -1),
        "enter": ("commit", 0), "escape": ("abandon", 0),
    }
    #: Input's own editing keys (Backspace, the cursor keys, …) → action.
    EDITING = {key: b.action for b in Input.BINDINGS if isinstance(b, Binding) for key in b.key.split(",")}

    def __init__(self, move: Callable[[int], None]):
        """``move(steps)`` puts the editor on another row."""
        # validate_on=(): Input's own validation (with no validators) marks every
        # value "-valid" on change, blur and submit, which would wipe the app's
        # "-invalid" mark; the app is the validator here.
        super().__init__(id="knob-editor", compact=True, select_on_focus=True, validate_on=())
        self.key = ""
        #: Counts the editor's arrivals on a row; a message from an earlier
        #: visit (even to the same row) no longer describes the editor's text.
        self.visit = 0
        self._move = move

    def _send(self, message: Message) -> None:
        self.parent.post_message(message)

    async def _on_key(self, event: events.Key) -> None:
        if self.screen.focused is not self:
            # A Tab earlier in the burst moved the focus out of the panel, but
            # the keys behind it were handed to the editor before it was
            # handled: hand them on, in order, to whatever has the focus now.
            event.stop()
            event.prevent_default()
            self.app.post_message(events.Key(event.key, event.character))
            return
        if event.key not in self.KEYS:
            if event.key in self.EDITING:
                event.stop()
                event.prevent_default()
                await self.run_action(self.EDITING[event.key])
            else:
                await super()._on_key(event)
            return
        event.stop()
        event.prevent_default()
        kind, steps = self.KEYS[event.key]
        key = self.key
        if kind == "move":
            self._move(steps)
            self._send(KnobMoved(key, self.key))
            return
        if kind == "commit":
            self._send(KnobCommitted(key, self.value))
        elif kind == "abandon":
            self._send(KnobAbandoned(key))
        else:
            self._send(KnobStepped(key, steps, kind == "decade", self.visit))
        # The app will put the row's new text here, selected; until then the
        # old text is selected at once, so keys typed ahead replace it too.
        self.select_whole()

    def select_whole(self) -> None:
        """Select all the text with the cursor at its start, so typing
        replaces it and a long value (a design's name) shows its beginning."""
        self.selection = Selection(len(self.value), 0)

    def watch_value(self, value: str) -> None:
        # Sent here, as the text changes, so it names the row it changed on;
        # Input's own Changed is handled later, when the editor may have moved.
        if self.key:
            self._send(KnobEdited(self.key, value, self.visit))

    def on_input_changed(self, event: Input.Changed) -> None:
        event.stop()


class Knobs(VerticalScroll):
    """Every editable key of a design, one row each, with the editor on one.

    Rows holding a pending (uncommitted) value show it underlined.  The app
    tells the panel what it has seen; the panel never overwrites text typed
    into the editor that the app has not seen yet.
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
        self.key = self._first()
        self.editor = KnobEditor(self.move)
        self._known = ""  # the editor's text as the app last saw it
        self._drawn: dict[str, Text] = {}

    def compose(self):
        yield Static(id="knobs-above", markup=False)
        with Horizontal(id="knob-row"):
            yield Static(id="knob-label", markup=False)
            yield self.editor
        yield Static(id="knobs-below", markup=False)

    def on_mount(self) -> None:
        self._place(arrive=True)

    def _first(self) -> str:
        """The row the editor starts on: the supply, the first value people tune."""
        return "supply.vcc" if "supply.vcc" in self.keys else self.keys[0]

    def text(self, key: str) -> str:
        """What ``key``'s row shows when the editor is elsewhere: the
        candidate's value if the key is pending, else the committed one."""
        design = self._candidate if key in self._pending else self._design
        return field_text(key, get_value(design, key))

    def seen(self, message: KnobEdited) -> bool:
        """The app has handled ``message``; True if it was typed on the
        editor's present visit (so the editor still holds it, or more)."""
        if message.visit != self.editor.visit:
            return False
        self._known = message.text
        return True

    def hold(self, pending: Iterable[str], candidate: Design | None) -> None:
        """The pending keys and the candidate design they make, shown in
        their rows; the editor is left alone."""
        self._pending, self._candidate = frozenset(pending), candidate
        self._draw_rows()

    def show(self, design: Design, pending: Iterable[str] = (), candidate: Design | None = None) -> None:
        """Show ``design``, with the ``pending`` keys taken from ``candidate``.

        The editor's text is reset to its row's (a broken entry goes too),
        unless it holds typing the app has not seen yet.
        """
        pending = frozenset(pending)
        if ((design, pending, candidate) == (self._design, self._pending, self._candidate)
                and self.editor.value == self.text(self.key) == self._known):
            return  # as shown already (the app's check after every Tab, mostly)
        self._design, self._pending, self._candidate = design, pending, candidate
        arrive = False
        if layout(design) != self._lines:
            self._lines = layout(design)
            self.keys = [key for _, key in self._lines if key is not None]
            if self.key not in self.keys:  # a row the new topology lacks
                self.key, arrive = self._first(), True
        if arrive or self.editor.value == self._known:
            self._place(arrive)
        else:
            self._draw_rows()

    def put(self, message: KnobStepped, text: str) -> bool:
        """Show ``text`` (the stepped value) in the editor, if it is still on
        the visit the step came from and holds nothing unseen; True if shown."""
        if message.visit != self.editor.visit or self.editor.value != self._known:
            return False
        with self.editor.prevent(KnobEdited):
            self.editor.value = text
        self._known = text
        self.editor.select_whole()
        return True

    def select(self, key: str) -> KnobEditor:
        """Put the editor on ``key``'s row, with its text selected."""
        self.key = key
        self._place(arrive=True)
        return self.editor

    def move(self, steps: int) -> None:
        """Tab and Shift+Tab: the next or previous row.  Past either end the
        focus leaves the panel (for the readout and the ledger), and the
        editor stays where it was until the focus comes back (see the app's
        ``action_focus_next``)."""
        index = self.keys.index(self.key) + steps
        if 0 <= index < len(self.keys):
            self.select(self.keys[index])
            return
        (self.screen.focus_next if steps > 0 else self.screen.focus_previous)()
        if self.screen.focused is self.editor:  # nothing else takes the focus: wrap
            self.select(self.keys[index % len(self.keys)])

    def _place(self, arrive: bool) -> None:
        """The editor on its row with the row's text; ``arrive``: a new visit
        (a move), rather than the same row brought up to date."""
        self._draw_rows()
        at = self._at()
        self.query_one("#knob-label", Static).update(self._lines[at][0])
        editor = self.editor
        editor.key = self.key
        if arrive:
            editor.visit += 1
        text = self.text(self.key)
        with editor.prevent(KnobEdited):
            editor.value = text
        self._known = text
        editor.set_class(False, "-invalid")
        editor.set_class(self.key in self._pending, "-candidate")
        editor.select_whole()
        self.call_after_refresh(self._follow)

    def _at(self) -> int:
        return next(i for i, (_, key) in enumerate(self._lines) if key == self.key)

    def _draw_rows(self) -> None:
        at = self._at()
        for name, lines in (("#knobs-above", self._lines[:at]), ("#knobs-below", self._lines[at + 1:])):
            text = self._rows_text(lines)
            if self._drawn.get(name) == text:
                continue  # as it is: typing in one row leaves the others alone
            part = self.query_one(name, Static)
            before = self._drawn.get(name)
            # Same number of lines, same size: no layout pass for it.
            part.update(text, layout=before is None or before.plain.count("\n") != text.plain.count("\n"))
            part.display = bool(lines)
            self._drawn[name] = text

    def _follow(self) -> None:
        """Once the rows are laid out: keep the editor in view, and put the
        terminal's cursor on it (Input set it before the row moved)."""
        if self.key == self.keys[0]:
            self.scroll_home(animate=False)  # with the heading above it
        else:
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
            # visible(): the name row shows the file's text (its rule refuses controls; belt and braces).
            text.append(visible(self.text(key)), style="bold underline" if key in self._pending else "")
        return text
