"""SI prefixes and the IEC 60062 letter code: the one parser and formatter.

Every value a user types or reads passes through here, so "4k7", "4.7k",
"4.7 kΩ" and "4700" mean the same everywhere. Case matters: "m" is milli and
"M" is mega. "meg" is refused with a hint to write M, because accepting it
would make "2m" and "2meg" look like near twins.
"""

from __future__ import annotations

import math
import numbers
import re

from model.errors import UnitError

__all__ = ["parse_value", "format_si", "format_rkm", "NO_NUMBER"]

# Power of ten for each prefix letter a user may type (SI prefixes, BIPM SI
# Brochure). Both micro code points are accepted because keyboards differ.
# Upper-case "K" is accepted as kilo because the IEC 60062 resistor code
# writes it so (from memory of the standard, e.g. "4K7").
_PREFIX_EXPONENT = {
    "T": 12, "G": 9, "M": 6, "k": 3, "K": 3,
    "m": -3, "u": -6, "\u00b5": -6, "\u03bc": -6, "n": -9, "p": -12, "f": -15,
}
# In the letter code "R" marks the decimal point of a plain value.
_RKM_EXPONENT = {**_PREFIX_EXPONENT, "R": 0}
# Prefix written for each engineering exponent; µ is U+00B5 MICRO SIGN.
_PREFIX_FOR = {12: "T", 9: "G", 6: "M", 3: "k", 0: "", -3: "m", -6: "\u00b5",
               -9: "n", -12: "p", -15: "f"}

# Spellings of each unit symbol. Ohm gets ASCII words because Ω is hard to
# type, and U+2126 OHM SIGN because it looks the same as Ω.
_UNIT_SPELLINGS = {
    "Ω": ("Ω", "\u2126", "ohm", "ohms"),
    "F": ("F",), "V": ("V",), "A": ("A",), "W": ("W",), "Hz": ("Hz",), "s": ("s",),
}
_KNOWN_SPELLINGS = {s for spellings in _UNIT_SPELLINGS.values() for s in spellings}
_CASELESS = {"ohm", "ohms"}

_RKM = re.compile(r"(\d*)([A-Za-z\u00b5\u03bc])(\d*)", re.ASCII)
_DECIMAL = re.compile(
    r"(\d+\.?\d*|\.\d+)([eE][+-]?\d+)?(?:\s*([A-Za-z\u00b5\u03bc]))?", re.ASCII
)
_BARE_EXPONENT = re.compile(r"[\d.]+[eE][+-]?", re.ASCII)
NOT_A_NUMBER = "not a number with an SI prefix or RKM code (examples: 4k7, 2.2k, 100n, R47)"
_NAN, _INFINITE, _TOO_LARGE = "nan is not a value", "an infinite value is not allowed here", "too large to represent"
#: The reasons that say a value is no usable number at all, as against a
#: misspelt one (a 'meg', an unknown prefix) whose reason names its fix: a
#: field's limits belong beside these only.
NO_NUMBER = (NOT_A_NUMBER, _NAN, _INFINITE, _TOO_LARGE)


def parse_value(value: object, unit: str = "", *, allow_inf: bool = False) -> float:
    """Read a number, an SI-prefixed value or an IEC 60062 letter code.

    Parameters
    ----------
    value : int, float or str
        A number, or text such as ``"2.2k"``, ``"100nF"``, ``"4k7 Ω"``,
        ``"R47"`` or ``"1e-3"``. Surrounding white space is ignored.
    unit : str
        The unit symbol the text may end with (``"Ω"``, ``"F"``, ``"V"``,
        ``"A"``, ``"W"``, ``"Hz"``, ``"s"``); ``""`` accepts none.
    allow_inf : bool
        Accept ``inf``/``∞`` (for example an open circuit).

    Returns
    -------
    float
        The value in the base unit (ohm, farad, ...).

    Raises
    ------
    UnitError
        For anything else, naming the input and what is wrong with it.
    """
    if isinstance(value, str):
        return _parse_text(value, unit, allow_inf)
    if not isinstance(value, numbers.Real) or isinstance(value, bool):
        raise UnitError(value, "not a number or text")
    try:
        result = float(value)
    except OverflowError:
        raise UnitError(value, _TOO_LARGE) from None
    if math.isnan(result):
        raise UnitError(value, _NAN)
    if math.isinf(result) and not allow_inf:
        raise UnitError(value, _INFINITE)
    return result


def _parse_text(text: str, unit: str, allow_inf: bool) -> float:
    body = text.strip()
    negative = body[:1] in ("-", "\u2212")
    if body[:1] in ("+", "-", "\u2212"):
        body = body[1:]
    body = _strip_unit(text, body, unit)
    if body.lower() in ("inf", "infinity", "∞"):
        if not allow_inf:
            raise UnitError(text, _INFINITE)
        magnitude = math.inf
    else:
        magnitude = _parse_number(text, body)
        if math.isinf(magnitude):
            raise UnitError(text, _TOO_LARGE)
    return -magnitude if negative else magnitude


def _strip_unit(text: str, body: str, unit: str) -> str:
    accepted = _UNIT_SPELLINGS.get(unit, (unit,) if unit else ())
    for spelling in sorted(_KNOWN_SPELLINGS | set(accepted), key=len, reverse=True):
        tail = body[-len(spelling):]
        if tail == spelling or (spelling in _CASELESS and tail.lower() == spelling):
            if spelling not in accepted:
                # "lots" ends in s but is no number in seconds: say what it is not.
                _parse_number(text, body[: -len(spelling)].rstrip() or spelling)
                raise UnitError(text, f"unit {spelling!r} does not match the expected {unit!r}"
                                if unit else f"unexpected unit {spelling!r} (no unit belongs here)")
            return body[: -len(spelling)].rstrip()
    return body


def _parse_number(text: str, body: str) -> float:
    lowered = body.lower()
    if lowered == "nan":
        raise UnitError(text, _NAN)
    if "meg" in lowered:
        raise UnitError(text, "'meg' is not accepted; write M for mega (m is milli)")
    if body.count(".") > 1:
        raise UnitError(text, "two decimal points")
    rkm = _RKM.fullmatch(body)
    if rkm and (rkm[1] or rkm[3]) and rkm[2] in _RKM_EXPONENT:
        whole, letter, fraction = rkm.groups()
        return float(f"{whole or '0'}.{fraction or '0'}e{_RKM_EXPONENT[letter]}")
    if _BARE_EXPONENT.fullmatch(body):
        raise UnitError(text, "the exponent has no digits")
    decimal = _DECIMAL.fullmatch(body)
    if decimal:
        number, exponent, prefix = decimal.groups()
        if prefix is None:
            return float(number + (exponent or ""))
        if exponent:
            raise UnitError(text, "both an exponent and a prefix; use one of them")
        if prefix not in _PREFIX_EXPONENT:
            raise UnitError(text, f"unknown prefix {prefix!r}")
        return float(f"{number}e{_PREFIX_EXPONENT[prefix]}")
    if rkm and (rkm[1] or rkm[3]):
        raise UnitError(text, f"unknown prefix {rkm[2]!r}")
    raise UnitError(text, NOT_A_NUMBER)


def _round_sig(value: float, digits: int) -> tuple[str, int]:
    """Significant digits of ``|value|`` rounded to ``digits``, and its power of ten."""
    mantissa, exponent = f"{abs(value):.{digits - 1}e}".split("e")
    return mantissa.replace(".", ""), int(exponent)


def _split_digits(figures: str, whole_digits: int) -> tuple[str, str]:
    """Integer and fraction digit strings, padding the integer part with zeros."""
    return figures[:whole_digits].ljust(whole_digits, "0"), figures[whole_digits:]


#: Units written without a prefix, as plain numbers.
_NO_PREFIX = frozenset({"dB", "°"})


def format_si(value: float, unit: str = "", digits: int = 3, *, ascii: bool = False) -> str:
    """Write a value in engineering notation with an SI prefix.

    Parameters
    ----------
    value : float
        The value in the base unit.
    unit : str
        Unit symbol to append, e.g. ``"Ω"``.
    digits : int
        Significant figures (at least 1); ``4700`` gives ``"4.70 kΩ"``.
    ascii : bool
        Write ``u`` for micro, ``ohm`` for Ω and ``inf`` for ∞.

    Returns
    -------
    str
        For example ``"12.3 mA"``, ``"-1.00 V"``, ``"∞ Ω"`` or ``"nan"``;
        dB and ° take no prefix (``"-20 dB"``, ``"180 °"``).
        Values beyond tera or below femto use exponent notation,
        ``"1.00e15 V"``. Every result except ``"nan"`` reads back with
        :func:`parse_value` (``∞`` needs ``allow_inf=True``).
    """
    if digits < 1:
        raise ValueError(f"digits must be at least 1, not {digits}")
    value = float(value)
    if math.isnan(value):
        return "nan"
    if unit in _NO_PREFIX and math.isfinite(value):
        # Decibels and degrees take no SI prefix: "-3 dB", never "-3000 mdB".
        return f"{float(f'{value:.{digits}g}'):g} {unit}"
    if ascii and unit in _UNIT_SPELLINGS["Ω"]:
        unit = "ohm"
    sign = "-" if value < 0 else ""
    if math.isinf(value):
        number = "inf" if ascii else "∞"
    elif value == 0:
        number = "0"
    else:
        figures, exponent = _round_sig(value, digits)
        engineering = 3 * (exponent // 3)
        prefix = _PREFIX_FOR.get(engineering)
        if prefix is None:
            whole, fraction = figures[0], figures[1:]
            exponent_text = f"e{exponent}"
        else:
            whole, fraction = _split_digits(figures, exponent - engineering + 1)
            exponent_text = ""
            unit = ("u" if ascii and prefix == "\u00b5" else prefix) + unit
        number = whole + (f".{fraction}" if fraction else "") + exponent_text
    return f"{sign}{number} {unit}" if unit else sign + number


def format_rkm(value: float, digits: int = 3, *, capacitance: bool = False) -> str:
    """Write a positive value in the IEC 60062 letter code.

    The letter stands where the decimal point would be: ``4700`` gives
    ``"4k7"``, ``2.2e6`` gives ``"2M2"``, ``1.0`` gives ``"1R0"``.

    Parameters
    ----------
    value : float
        Positive, finite value in the base unit (ohm or farad).
    digits : int
        Significant figures kept before trailing zeros are dropped.
    capacitance : bool
        Below 1, write the prefixes m, u, n, p, f (``4.7e-9`` gives
        ``"4n7"``) rather than a leading ``R`` (``0.47`` gives ``"R47"``).

    Returns
    -------
    str
        The code, using ASCII ``u`` for micro; it reads back with
        :func:`parse_value`.
    """
    if (isinstance(value, bool) or not isinstance(value, numbers.Real)
            or not (math.isfinite(value) and value > 0)):
        raise UnitError(value, "must be a positive, finite value")
    if digits < 1:
        raise ValueError(f"digits must be at least 1, not {digits}")
    figures, exponent = _round_sig(value, digits)
    engineering = 3 * (exponent // 3)
    if engineering < 0 and not capacitance:
        letter, whole, fraction = "R", "", "0" * (-exponent - 1) + figures
    else:
        letter = "R" if engineering == 0 else _PREFIX_FOR.get(engineering)
        if letter is None:
            raise UnitError(value, "outside the range of the letter code")
        letter = "u" if letter == "\u00b5" else letter
        whole, fraction = _split_digits(figures, exponent - engineering + 1)
    fraction = fraction.rstrip("0")
    # Common practice in the IEC 60062 style (1R0, 1k0, R10): a code carries
    # at least two digits, so a lone digit gets a trailing zero.
    fraction = fraction.ljust(2 - len(whole), "0")
    return whole + letter + fraction
