"""A design value as the Knobs show it (and as the editing state compares
typed text with it): plain text, no screen, so the editing rules use it
without Textual."""

from __future__ import annotations

from model.design.stage import FIELDS, file_word
from model.design.units import format_si, parse_value


def field_text(key: str, value) -> str:
    """A value as the field shows it: SI prefix and unit, with as many figures
    as it takes to read back exactly (so an untouched field never changes)."""
    if isinstance(value, str):
        return value
    unit = FIELDS[key].unit if key in FIELDS else ""
    word = file_word(key, value)
    if word is not None:
        return word
    if unit == "°C":
        # No SI prefix for a temperature ("150 °C", never "150 k…"), but the
        # unit all the same, as every other row shows its own.
        text = f"{value:g}"
        return f"{text if float(text) == value else repr(value)} °C"
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
