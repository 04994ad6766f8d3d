"""Every design file key: its unit and the rule its value must keep, per topology.

One table (``FIELDS``) is the single source for parsing, validation and the
error messages that name the key, the value and the limit.
"""

from __future__ import annotations

import difflib
import math
import numbers
import unicodedata
from dataclasses import dataclass

from model.design.units import NO_NUMBER, parse_value
from model.errors import DesignError, UnitError

FORMAT = 1
TOPOLOGIES = ("common-emitter", "emitter-follower", "common-base", "collector-feedback",
              "ce-follower", "common-emitter-split", "emitter-follower-split")
SERIES = ("E6", "E12", "E24", "E48", "E96")
POLARITIES = ("npn", "pnp")
CE, EF, CB, CF, CEF, CE_SPLIT, EF_SPLIT = TOPOLOGIES
#: Topologies by what they share: an emitter bypass (re1, re2, ce), a base
#: divider from the supply (r1, r2), a split supply (vee, rb).
WITH_BYPASS = (CE, CF, CEF, CE_SPLIT)
WITH_DIVIDER = (CE, EF, CB, CEF)
SPLIT = (CE_SPLIT, EF_SPLIT)
#: Topologies whose output is a follower's emitter.
FOLLOWERS = (EF, EF_SPLIT, CEF)
#: Topologies with a second transistor (the follower of ce-follower).
TWO_TRANSISTORS = (CEF,)
#: The file's words for an infinite resistance and for a part not fitted.
#: The one place they are spelt: parsing (check_value), the file
#: (design_to_dict) and the Knobs (file_word) all use these.
OPEN, NONE = "open", "none"


@dataclass(frozen=True)
class Rule:
    """What a value must be; ``text`` says it in words for error messages.

    kind "number": low/high limits (strict or not); open_ok lets the string
    "open" (or +inf) stand for an infinite resistance; none_ok lets 0 or the
    string "none" stand for a part that is not fitted (stored as 0.0).
    kind "choice": one of choices. kind "text": any string; one_line also
    refuses control characters.
    """

    text: str
    kind: str = "number"
    low: float = -math.inf
    low_strict: bool = False
    high: float = math.inf
    high_strict: bool = False
    open_ok: bool = False
    none_ok: bool = False
    choices: tuple[str, ...] = ()
    one_line: bool = False


def _range(unit: str, low: float | None = None, high: float | None = None, *,
           low_strict: bool = True, high_strict: bool = False,
           high_shown: str | None = None, open_ok: bool = False) -> Rule:
    words = []
    if low is not None:
        words.append(("greater than " if low_strict else "at least ") + f"{low:g} {unit}".rstrip())
    if high is not None:
        shown = high_shown or f"{high:g} {unit}".rstrip()
        words.append(("less than " if high_strict else "at most ") + shown)
    text = "must be " + (" and ".join(words) or "a finite number")
    text += f", or '{OPEN}' for an open circuit" if open_ok else ""
    return Rule(text, low=-math.inf if low is None else low, low_strict=low_strict,
                high=math.inf if high is None else high, high_strict=high_strict, open_ok=open_ok)


def _fitted(unit: str, high: float = math.inf) -> Rule:
    """A part that may be left off the board: positive, or 0 / "none" when not fitted."""
    most = f"; at most {high:g} {unit}" if high < math.inf else ""
    return Rule(f"must be greater than 0 {unit}, or 0 or '{NONE}' when not fitted{most}",
                low=0.0, low_strict=False, high=high, none_ok=True)


def _choice(choices: tuple[str, ...]) -> Rule:
    return Rule("must be " + " or ".join(f"'{c}'" for c in choices), kind="choice", choices=choices)


@dataclass(frozen=True)
class Field:
    """A file key: the unit its strings are parsed in and, per topology using it, its rule."""
    unit: str
    rules: dict[str, Rule]


def _both(unit: str, rule: Rule) -> Field:
    """A key every topology has, with one rule."""
    return Field(unit, {t: rule for t in TOPOLOGIES})


def _some(unit: str, rule: Rule, topologies) -> Field:
    """A key only ``topologies`` have, with one rule."""
    return Field(unit, {t: rule for t in topologies})


_ANY_TEXT = Rule("must be text", kind="text")
_POSITIVE_OHMS = _range("Ω", 0)
_EXPONENT = Rule("must be finite, from -50 to 50", low=-50.0, high=50.0)
_ABSOLUTE_ZERO = -273.15

# The one table of every file key: unit and rule. Numbers must be finite
# unless the rule says "open".
FIELDS: dict[str, Field] = {
    "name": _both("", Rule("must be one line of text", kind="text", one_line=True)),
    "topology": _both("", _choice(TOPOLOGIES)),
    "notes": _both("", _ANY_TEXT),
    "supply.vcc": _both("V", _range("V", 0, 1000)),
    "supply.vee": _some("V", Rule("must be less than 0 V and at least -1000 V", low=-1000.0,
                                  high=0.0, high_strict=True), SPLIT),
    "bias.r1": _some("Ω", _POSITIVE_OHMS, WITH_DIVIDER),
    # Collector feedback: r2 is optional, so "open" leaves it off the board.
    "bias.r2": Field("Ω", {**{t: _POSITIVE_OHMS for t in WITH_DIVIDER}, CF: _range("Ω", 0, open_ok=True)}),
    "bias.rf": _some("Ω", _POSITIVE_OHMS, (CF,)),
    # Held at least 1 µΩ: a smaller one overflows the conductances of the response.
    "bias.rb": _some("Ω", Rule("must be greater than 0 Ω (at least 1 µΩ)", low=1e-6), SPLIT),
    # At most 1e15 Ω, beyond the largest resistor made; 1e300 overflows the solver.
    "stage.rc": Field("Ω", {**{t: _range("Ω", 0, 1e15, high_shown="1e15 Ω") for t in (CE, CB, CF, CEF, CE_SPLIT)},
                            **{t: _range("Ω", 0, 1e15, low_strict=False, high_shown="1e15 Ω")
                               for t in (EF, EF_SPLIT)}}),
    "stage.re1": _some("Ω", _range("Ω", 0, low_strict=False), WITH_BYPASS),
    "stage.re2": _some("Ω", _range("Ω", 0, low_strict=False), WITH_BYPASS),
    # Not fitted: ce leaves re2 in the signal path; cb leaves the base of a
    # common-base stage on its divider; cin and cout are replaced by a direct
    # (DC) connection; cl is simply absent. See README "Keys".
    # At most 1000 F, the size of the largest supercapacitors; far larger ones
    # (1e15 F) put the response's corners beyond what a float can sweep.
    "stage.ce": _some("F", _fitted("F", 1e3), WITH_BYPASS),
    "stage.cb": _some("F", _fitted("F", 1e3), (CB,)),
    # The emitter resistor of a follower, of a common-base stage, and of the
    # follower that ce-follower adds after its gain stage.
    "stage.re": _some("Ω", _POSITIVE_OHMS, (EF, EF_SPLIT, CB, CEF)),
    "stage.cin": _both("F", _fitted("F", 1e3)),
    "stage.cout": _both("F", _fitted("F", 1e3)),
    "source.rs": _both("Ω", _range("Ω", 0, low_strict=False)),
    # At most 1000 V, the largest supply: a larger EMF overflows the swing's squares.
    "source.vpk": _both("V", _range("V", 0, 1000, low_strict=False)),
    "source.freq": _both("Hz", _range("Hz", 0)),
    # The noise band's ends; "none" takes the stage's own −3 dB corner.
    "source.noise_low": _both("Hz", Rule("must be greater than 0 Hz, or 'none' for the stage's f_low",
                                         low=0.0, low_strict=False, none_ok=True)),
    "source.noise_high": _both("Hz", Rule("must be greater than 0 Hz, or 'none' for the stage's f_high",
                                          low=0.0, low_strict=False, none_ok=True)),
    "load.rl": _both("Ω", _range("Ω", 0, open_ok=True)),
    "load.cl": _both("F", _fitted("F", 1e3)),
    "transistor.polarity": _both("", _choice(POLARITIES)),
    # Lower bounds far below any real part, where a value stops being a
    # transistor and becomes a float's underflow (5e-324 overflows 1/β).
    "transistor.beta": _both("", Rule("must be greater than 0 (at least 0.001)", low=1e-3)),
    "transistor.beta_r": _both("", Rule("must be greater than 0 (at least 0.001)", low=1e-3)),
    "transistor.va": _both("V", Rule("must be greater than 0 V (at least 0.001 V)", low=1e-3)),
    "transistor.i_s": _both("A", Rule("must be greater than 0 A (at least 1e-30 A) and less than 1 µA",
                                      low=1e-30, high=1e-6, high_strict=True)),
    "transistor.ft": _both("Hz", Rule("must be greater than 0 Hz (at least 1 Hz)", low=1.0)),
    "transistor.cmu": _both("F", _range("F", 0, low_strict=False)),
    "transistor.vceo": _both("V", _range("V", 0)),
    "transistor.pd_max": _both("W", _range("W", 0)),
    "transistor.theta_ja": _both("K/W", _range("K/W", 0)),
    "transistor.tj_max": _both("°C", _range("°C", _ABSOLUTE_ZERO)),
    # Exponents of T/T0: a real part's XTI is about 3 and XTB about 1.5 (from
    # memory); past ±50 the power overflows or underflows over the ambient range.
    "transistor.xti": _both("", _EXPONENT),
    "transistor.eg": _both("eV", _range("eV", 0, 5, high_strict=True)),
    "transistor.xtb": _both("", _EXPONENT),
    # Noise only: the signal network has no rb (model.analyses.noise).
    "transistor.rb": _both("Ω", _range("Ω", 0, 1e6, low_strict=False)),
    "transistor.kf": _both("", _range("", 0, low_strict=False)),
    "transistor.af": _both("", _range("", 0, 4)),
    # The follower of ce-follower: the same type of part as the gain
    # transistor, so it shares every parameter but β, the one that spreads
    # from part to part.
    "transistor2.beta": _some("", Rule("must be greater than 0 (at least 0.001)", low=1e-3), TWO_TRANSISTORS),
    "environment.ambient": _both("°C", _range("°C", _ABSOLUTE_ZERO, 300)),
    "parts.resistor_power": _both("W", _range("W", 0)),
    "parts.series": _both("", _choice(SERIES)),
    "estimate.vbe": _both("V", _range("V", 0, 2, high_strict=True)),
}


def keys_for(topology: str) -> tuple[str, ...]:
    """Every file key a design of this topology has, in file order."""
    return tuple(k for k, f in FIELDS.items() if topology in f.rules)


def with_article(word: str) -> str:
    """``word`` after "a" or "an" as it is spoken ("an emitter-follower");
    every word it meets (topologies, table classes) starts as it is said."""
    return ("an " if word[:1].lower() in "aeiou" else "a ") + word


def rule_for(key: str, topology: str) -> Rule:
    """The rule ``key`` follows in a design of ``topology``; DesignError if it has none."""
    field = FIELDS.get(key)
    if field is None:
        # Only keys this topology has: a suggestion the design then refuses helps nobody.
        close = difflib.get_close_matches(key, keys_for(topology), n=1)
        hint = f"; did you mean {close[0]}?" if close else ""
        raise DesignError(key, None, f"is not a design key{hint}")
    if topology not in field.rules:
        table = key.split(".")[0] + "."
        own = ", ".join(k.removeprefix(table) for k in keys_for(topology) if k.startswith(table))
        raise DesignError(key, None, f"is not used by {with_article(topology)} design, whose {table[:-1]} keys are {own}")
    return field.rules[topology]


class _Cut(str):
    """A long value's repr, cut short; shown as is so it does not look like a string."""

    def __repr__(self) -> str:
        return str(self)


def _shown(value: object) -> object:
    """The value as an error shows it: long ones cut so messages stay one readable line."""
    text = repr(value)
    return value if len(text) <= 80 else _Cut(text[:77] + "...")


def check_value(key: str, topology: str, value: object) -> float | str:
    """``value`` (number or string, e.g. "4k7") as the SI float or text ``key`` stores.

    Raises DesignError naming the key, the value and the rule it breaks.
    """
    try:
        rule = rule_for(key, topology)
    except DesignError as err:
        raise DesignError(key, _shown(value), err.rule) from None

    def broken(reason: str) -> DesignError:
        return DesignError(key, _shown(value), reason)

    if rule.kind == "text":
        if not isinstance(value, str) or (
                rule.one_line and any(unicodedata.category(c) in ("Cc", "Zl", "Zp") for c in value)):
            raise broken(rule.text)
        return value
    if rule.kind == "choice":
        typed = value.strip().casefold() if isinstance(value, str) else None
        found = [c for c in rule.choices if c.casefold() == typed]
        if not found:
            raise broken(rule.text)
        return found[0]
    if isinstance(value, bool) or not isinstance(value, (numbers.Real, str)):
        # bool is an int to Python but never a quantity to a person.
        raise broken(f"must be a number (or a string such as '4k7'); {rule.text}")
    word = value.strip().casefold() if isinstance(value, str) else None
    if rule.open_ok and word == OPEN:
        return math.inf
    if rule.none_ok and word == NONE:
        return 0.0
    try:
        number = parse_value(value, FIELDS[key].unit, allow_inf=rule.open_ok)
    except UnitError as err:
        # A misspelt number (a 'meg', an unknown prefix) breaks only the
        # spelling rule, which names its fix; the limits are no part of it.
        # No usable number at all gets what is wrong, then the limits a
        # number must keep, so the user knows what to type instead.
        raise broken(f"{err.reason}; {rule.text}" if err.reason in NO_NUMBER else err.reason) from None
    if rule.none_ok and number == 0.0:
        return 0.0  # also turns -0.0 into the one stored form of "none"
    too_low = number <= rule.low if rule.low_strict else number < rule.low
    too_high = number >= rule.high if rule.high_strict else number > rule.high
    if too_low or too_high:
        raise broken(rule.text)
    return number


def file_word(key: str, value: object) -> str | None:
    """The word the file and the Knobs show for ``value`` of ``key``: "open"
    for an infinite resistance, "none" for a part not fitted; None when the
    value is an ordinary number (or ``key`` has no such word)."""
    field = FIELDS.get(key)
    if field is None or isinstance(value, (bool, str)) or not isinstance(value, numbers.Real):
        return None
    rules = field.rules.values()
    if value == math.inf and any(r.open_ok for r in rules):
        return OPEN
    if value == 0 and any(r.none_ok for r in rules):
        return NONE
    return None
