"""The Knobs panel: one compact field per design key, grouped by table.

Fields post domain messages (:class:`KnobEdited`, :class:`KnobCommitted`,
:class:`KnobStepped`, :class:`KnobAbandoned`) and never reach into the app.
"""

from __future__ import annotations

import math

from textual.binding import Binding
from textual.containers import Horizontal, VerticalScroll
from textual.message import Message
from textual.widgets import Input, Label, Static

from model.design import FIELDS, Design, get_value, keys_for
from model.units import format_si, parse_value

#: Table order on screen, with the heading shown for each.
GROUPS = (
    ("supply", "supply"), ("bias", "bias"), ("stage", "stage"), ("source", "source"),
    ("load", "load"), ("transistor", "transistor"), ("environment", "environment"),
    ("parts", "parts"), ("estimate", "hand estimate"),
)


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


class KnobInput(Input):
    """A one-line field for one design key, with stepping keys."""

    BINDINGS = [
        Binding("up", "step(1)", "step up", show=False),
        Binding("down", "step(-1)", "step down", show=False),
        Binding("pageup", "decade(1)", "decade up", show=False),
        Binding("pagedown", "decade(-1)", "decade down", show=False),
        Binding("escape", "abandon", "cancel edit", show=False),
    ]

    def __init__(self, key: str, value: str):
        # validate_on=(): Input's own validation (with no validators) marks every
        # value "-valid" on change, blur and submit, which would wipe the app's
        # "-invalid" mark before Enter is handled; the app is the validator here.
        super().__init__(value, id="knob-" + key.replace(".", "-"), compact=True, select_on_focus=True,
                         validate_on=())
        self.key = key

    def on_mount(self) -> None:
        # Show the start of a long value (a design's name), not its end.
        self.cursor_position = 0

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
    """Every editable key of a design, grouped by table, one row each."""

    def __init__(self, design: Design, **kwargs):
        super().__init__(**kwargs)
        self._design = design

    def compose(self):
        keys = [k for k in keys_for(self._design.topology) if k not in ("topology", "notes")]
        yield Label("name", classes="knob-group")
        yield self._row("name")
        for table, heading in GROUPS:
            mine = [k for k in keys if k.startswith(table + ".")]
            if mine:
                yield Label(heading, classes="knob-group")
                for key in mine:
                    yield self._row(key)

    def _row(self, key: str) -> Horizontal:
        label = key.split(".")[-1]
        return Horizontal(
            Static(label, classes="knob-label", markup=False),
            KnobInput(key, field_text(key, get_value(self._design, key))),
            classes="knob-row",
        )

    def field(self, key: str) -> KnobInput:
        return self.query_one("#knob-" + key.replace(".", "-"), KnobInput)

    def show(self, design: Design, keys=None) -> None:
        """Set the fields (all, or just ``keys``) to ``design``'s values, quietly."""
        self._design = design
        for field in self.query(KnobInput):
            if keys is None or field.key in keys:
                with field.prevent(Input.Changed):
                    field.value = field_text(field.key, get_value(design, field.key))
                field.set_class(False, "-candidate", "-invalid")
