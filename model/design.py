"""The design data model: one amplifier stage, its surroundings and its rules.

Every quantity is an SI float (Ω, V, A, W, F, Hz, K/W, eV) except the two
temperatures, ambient and tj_max, which are °C because that is how people
quote them. A design never exists in an invalid state: every way in (the
file, ``with_value``) ends in ``validate``.
"""

from __future__ import annotations

import dataclasses
import difflib
import math
import numbers
import unicodedata
from dataclasses import dataclass

from .errors import DesignError, UnitError
from .units import parse_value

FORMAT = 1
TOPOLOGIES = ("common-emitter", "emitter-follower")
SERIES = ("E6", "E12", "E24", "E48", "E96")
POLARITIES = ("npn", "pnp")
CE, EF = TOPOLOGIES


@dataclass(frozen=True)
class Supply:
    """vcc: supply voltage, V."""
    vcc: float


@dataclass(frozen=True)
class Bias:
    """Base divider: r1 from the supply to the base, r2 base to ground, Ω."""
    r1: float
    r2: float


@dataclass(frozen=True)
class Stage:
    """The stage's own parts, Ω and F.

    Common emitter: rc, re1 (unbypassed), re2 (bypassed by ce), ce.
    Emitter follower: rc (0 = collector tied to the supply) and re.
    Both: cin, cout. A field the topology does not use stays 0.
    """

    rc: float = 0.0
    re1: float = 0.0
    re2: float = 0.0
    ce: float = 0.0
    re: float = 0.0
    cin: float = 0.0
    cout: float = 0.0


@dataclass(frozen=True)
class Source:
    """Signal source: rs output resistance Ω, vpk EMF amplitude V, freq Hz."""
    rs: float
    vpk: float
    freq: float


@dataclass(frozen=True)
class Load:
    """rl in Ω (math.inf = no load, "open" in the file) in parallel with cl in F."""
    rl: float
    cl: float = 0.0


@dataclass(frozen=True)
class Transistor:
    """The BJT model.

    polarity "npn"/"pnp"; beta forward β at 25 °C; beta_r reverse β; va Early
    voltage V; i_s saturation current A at 25 °C; ft transition frequency Hz;
    cmu base–collector capacitance F; vceo V; pd_max W; theta_ja K/W;
    tj_max °C; xti saturation-current temperature exponent; eg band gap eV;
    xtb β temperature exponent.
    """

    polarity: str
    beta: float
    beta_r: float
    va: float
    i_s: float
    ft: float
    cmu: float
    vceo: float
    pd_max: float
    theta_ja: float
    tj_max: float
    xti: float = 3.0
    eg: float = 1.11
    xtb: float = 1.5


@dataclass(frozen=True)
class Environment:
    """ambient: air temperature around the parts, °C."""
    ambient: float = 25.0


@dataclass(frozen=True)
class Parts:
    """resistor_power: rating of every resistor, W; series: preferred values."""
    resistor_power: float = 0.25
    series: str = "E24"


@dataclass(frozen=True)
class Estimate:
    """vbe: base–emitter voltage the hand estimate assumes, V."""
    vbe: float = 0.7


@dataclass(frozen=True)
class Design:
    """One stage design; the file adds ``format = FORMAT``."""
    name: str
    topology: str
    notes: str
    supply: Supply
    bias: Bias
    stage: Stage
    source: Source
    load: Load
    transistor: Transistor
    environment: Environment
    parts: Parts
    estimate: Estimate


# Table name in the file (also the Design attribute) -> its dataclass, in file order.
TABLES = {"supply": Supply, "bias": Bias, "stage": Stage, "source": Source, "load": Load,
          "transistor": Transistor, "environment": Environment, "parts": Parts,
          "estimate": Estimate}
TEXT_KEYS = ("name", "topology", "notes")


@dataclass(frozen=True)
class Rule:
    """What a value must be; ``text`` says it in words for error messages.

    kind "number": low/high limits (strict or not); open_ok lets the string
    "open" (or +inf) stand for an infinite resistance. kind "choice": one of
    choices. kind "text": any string; one_line also refuses control characters.
    """

    text: str
    kind: str = "number"
    low: float = -math.inf
    low_strict: bool = False
    high: float = math.inf
    high_strict: bool = False
    open_ok: bool = False
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
    text += ", or 'open' for none" if open_ok else ""
    return Rule(text, low=-math.inf if low is None else low, low_strict=low_strict,
                high=math.inf if high is None else high, high_strict=high_strict, open_ok=open_ok)


def _choice(choices: tuple[str, ...]) -> Rule:
    return Rule("must be " + " or ".join(f"'{c}'" for c in choices), kind="choice", choices=choices)


@dataclass(frozen=True)
class Field:
    """A file key: the unit its strings are parsed in and, per topology using it, its rule."""
    unit: str
    rules: dict[str, Rule]


def _both(unit: str, rule: Rule) -> Field:
    return Field(unit, {t: rule for t in TOPOLOGIES})


_ANY_TEXT = Rule("must be text", kind="text")
_POSITIVE_OHMS = _range("Ω", 0)
_ABSOLUTE_ZERO = -273.15

# The one table of every file key: unit and rule. Numbers must be finite
# unless the rule says "open".
FIELDS: dict[str, Field] = {
    "name": _both("", Rule("must be one line of text", kind="text", one_line=True)),
    "topology": _both("", _choice(TOPOLOGIES)),
    "notes": _both("", _ANY_TEXT),
    "supply.vcc": _both("V", _range("V", 0, 1000)),
    "bias.r1": _both("Ω", _POSITIVE_OHMS),
    "bias.r2": _both("Ω", _POSITIVE_OHMS),
    "stage.rc": Field("Ω", {CE: _POSITIVE_OHMS, EF: _range("Ω", 0, low_strict=False)}),
    "stage.re1": Field("Ω", {CE: _range("Ω", 0, low_strict=False)}),
    "stage.re2": Field("Ω", {CE: _range("Ω", 0, low_strict=False)}),
    "stage.ce": Field("F", {CE: _range("F", 0)}),
    "stage.re": Field("Ω", {EF: _POSITIVE_OHMS}),
    "stage.cin": _both("F", _range("F", 0)),
    "stage.cout": _both("F", _range("F", 0)),
    "source.rs": _both("Ω", _range("Ω", 0, low_strict=False)),
    "source.vpk": _both("V", _range("V", 0, low_strict=False)),
    "source.freq": _both("Hz", _range("Hz", 0)),
    "load.rl": _both("Ω", _range("Ω", 0, open_ok=True)),
    "load.cl": _both("F", _range("F", 0, low_strict=False)),
    "transistor.polarity": _both("", _choice(POLARITIES)),
    "transistor.beta": _both("", _range("", 0)),
    "transistor.beta_r": _both("", _range("", 0)),
    "transistor.va": _both("V", _range("V", 0)),
    "transistor.i_s": _both("A", _range("A", 0, 1e-6, high_strict=True, high_shown="1 µA")),
    "transistor.ft": _both("Hz", _range("Hz", 0)),
    "transistor.cmu": _both("F", _range("F", 0, low_strict=False)),
    "transistor.vceo": _both("V", _range("V", 0)),
    "transistor.pd_max": _both("W", _range("W", 0)),
    "transistor.theta_ja": _both("K/W", _range("K/W", 0)),
    "transistor.tj_max": _both("°C", _range("°C", _ABSOLUTE_ZERO)),
    "transistor.xti": _both("", _range("")),
    "transistor.eg": _both("eV", _range("eV", 0, 5, high_strict=True)),
    "transistor.xtb": _both("", _range("")),
    "environment.ambient": _both("°C", _range("°C", _ABSOLUTE_ZERO, 300)),
    "parts.resistor_power": _both("W", _range("W", 0)),
    "parts.series": _both("", _choice(SERIES)),
    "estimate.vbe": _both("V", _range("V", 0, 2, high_strict=True)),
}


def keys_for(topology: str) -> tuple[str, ...]:
    """Every file key a design of this topology has, in file order."""
    return tuple(k for k, f in FIELDS.items() if topology in f.rules)


def rule_for(key: str, topology: str) -> Rule:
    """The rule ``key`` follows in a design of ``topology``; DesignError if it has none."""
    field = FIELDS.get(key)
    if field is None:
        close = difflib.get_close_matches(key, FIELDS, n=1)
        hint = f"; did you mean {close[0]}?" if close else ""
        raise DesignError(key, None, f"is not a design key{hint}")
    if topology not in field.rules:
        table = key.split(".")[0] + "."
        own = ", ".join(k.removeprefix(table) for k in keys_for(topology) if k.startswith(table))
        raise DesignError(key, None, f"is not used by a {topology} design, whose {table[:-1]} keys are {own}")
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
    if rule.open_ok and isinstance(value, str) and value.strip().casefold() == "open":
        return math.inf
    try:
        number = parse_value(value, FIELDS[key].unit, allow_inf=rule.open_ok)
    except UnitError as err:
        raise broken(f"{err.reason}; {rule.text}") from None
    too_low = number <= rule.low if rule.low_strict else number < rule.low
    too_high = number >= rule.high if rule.high_strict else number > rule.high
    if too_low or too_high:
        raise broken(rule.text)
    return number


def default_design(topology: str = CE) -> Design:
    """A sensible starting design of ``topology`` with a generic small-signal NPN."""
    if topology not in TOPOLOGIES:
        raise DesignError("topology", _shown(topology), _choice(TOPOLOGIES).text)
    if topology == CE:
        supply, bias = Supply(9.0), Bias(56e3, 10e3)
        stage = Stage(rc=6.8e3, re1=220.0, re2=1e3, ce=100e-6, cin=10e-6, cout=10e-6)
        source, load = Source(1e3, 10e-3, 1e3), Load(100e3, 0.0)
    else:
        supply, bias = Supply(12.0), Bias(10e3, 10e3)
        stage = Stage(rc=0.0, re=2.2e3, cin=10e-6, cout=100e-6)
        source, load = Source(1e3, 1.0, 1e3), Load(10e3, 0.0)
    transistor = Transistor("npn", beta=200.0, beta_r=2.0, va=100.0, i_s=1e-14, ft=250e6,
                            cmu=3e-12, vceo=40.0, pd_max=0.5, theta_ja=200.0, tj_max=150.0)
    return Design("untitled", topology, "", supply, bias, stage, source, load,
                  transistor, Environment(), Parts(), Estimate())


def get_value(design: Design, key: str) -> object:
    """The stored value of ``key`` ("name" or "table.key", e.g. "stage.rc")."""
    rule_for(key, design.topology)
    if "." not in key:
        return getattr(design, key)
    table, attr = key.split(".")
    return getattr(getattr(design, table), attr)


def with_values(design: Design, values: dict[str, object]) -> Design:
    """A copy of ``design`` with each key set (numbers or unit strings), validated."""
    top: dict[str, object] = {}
    tables: dict[str, dict[str, object]] = {}
    for key, value in values.items():
        if key == "topology":
            raise DesignError(key, _shown(value),
                              "cannot change in place; start from default_design(topology)")
        checked = check_value(key, design.topology, value)
        if "." in key:
            table, attr = key.split(".")
            tables.setdefault(table, {})[attr] = checked
        else:
            top[key] = checked
    for table, changes in tables.items():
        top[table] = dataclasses.replace(getattr(design, table), **changes)
    return validate(dataclasses.replace(design, **top))


def with_value(design: Design, key: str, value: object) -> Design:
    """A copy of ``design`` with ``key`` set to ``value`` (number or unit string), validated."""
    return with_values(design, {key: value})


def validate(design: Design) -> Design:
    """``design`` with every number as a float, or DesignError for the first broken rule.

    Stage fields the topology does not use must keep their default (0), so
    that what the file shows is the whole design.
    """
    topology = check_value("topology", CE, design.topology)
    top: dict[str, object] = {k: check_value(k, topology, getattr(design, k)) for k in TEXT_KEYS}
    keys = keys_for(topology)
    for table, cls in TABLES.items():
        part = getattr(design, table)
        if type(part) is not cls:
            raise DesignError(table, _shown(part), f"must be a {cls.__name__}")
        values = {}
        for f in dataclasses.fields(cls):
            key, value = f"{table}.{f.name}", getattr(part, f.name)
            if key in keys:
                values[f.name] = check_value(key, topology, value)
            elif value != f.default:
                raise DesignError(key, _shown(value),
                                  f"is not used by a {topology} design and must stay {f.default!r}")
        top[table] = cls(**values)
    return dataclasses.replace(design, **top)


def design_to_dict(design: Design) -> dict:
    """The TOML-ready dict of ``design``: format first, then text keys, then tables.

    Only the keys of the design's topology appear; an open load is "open".
    """
    design = validate(design)
    data: dict[str, object] = {"format": FORMAT}
    data.update({k: getattr(design, k) for k in TEXT_KEYS})
    keys = keys_for(design.topology)
    for table in TABLES:
        part = getattr(design, table)
        entries = {}
        for key in keys:
            if key.startswith(table + "."):
                attr = key.split(".")[1]
                value = getattr(part, attr)
                entries[attr] = "open" if value == math.inf else value
        data[table] = entries
    return data


def design_from_dict(data: dict, path: str | None = None) -> Design:
    """The Design a parsed file describes; missing keys and tables take the defaults.

    Raises DesignError naming the file (``path``), key, value and rule.
    """
    try:
        return _from_dict(data)
    except DesignError as err:
        raise (err.in_file(path) if path else err) from None


def _from_dict(data: dict) -> Design:
    if "format" not in data:
        raise DesignError("format", None, f"is missing; a design file starts with format = {FORMAT}")
    fmt = data["format"]
    if type(fmt) is not int or fmt != FORMAT:
        raise DesignError("format", _shown(fmt),
                          f"must be {FORMAT}, the only design format this version reads")
    topology = check_value("topology", CE, data.get("topology", CE))
    allowed = ("format",) + TEXT_KEYS + tuple(TABLES)
    values: dict[str, object] = {}
    for name, content in data.items():
        if name not in allowed:
            close = difflib.get_close_matches(name, allowed, n=1)
            hint = f"did you mean {close[0]}? " if close else ""
            raise DesignError(name, _shown(content),
                              f"is not a design key or table; {hint}expected {', '.join(allowed)}")
        if name in TABLES:
            if not isinstance(content, dict):
                raise DesignError(name, _shown(content), "must be a table of keys")
            values.update({f"{name}.{k}": v for k, v in content.items()})
        elif name in ("name", "notes"):
            values[name] = content
    return with_values(default_design(topology), values)
