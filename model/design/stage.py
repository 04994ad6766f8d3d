"""The design data model: one amplifier stage and its surroundings (the keys'
units and rules are in :mod:`model.design.fields`).

Every quantity is an SI float (Ω, V, A, W, F, Hz, K/W, eV) except the two
temperatures, ambient and tj_max, which are °C because that is how people
quote them. A design never exists in an invalid state: every way in (the
file, ``with_value``) ends in ``validate``.
"""

from __future__ import annotations

import dataclasses
import difflib
from dataclasses import dataclass

# The keys and their rules live in fields.py; they are re-exported here because
# callers think of them as part of the design.
from model.design.fields import (  # noqa: F401
    CB,
    CE,
    CE_SPLIT,
    CEF,
    CF,
    EF,
    EF_SPLIT,
    FIELDS,
    FOLLOWERS,
    FORMAT,
    NONE,
    OPEN,
    POLARITIES,
    SERIES,
    SPLIT,
    TOPOLOGIES,
    TWO_TRANSISTORS,
    WITH_BYPASS,
    WITH_DIVIDER,
    Field,
    Rule,
    _choice,
    _shown,
    check_value,
    file_word,
    keys_for,
    rule_for,
    with_article,
)
from model.design.spread_tables import (
    Tolerance,
    check_spread_value,
    get_spread,
    is_spread_key,
    spread_from_dict,
    spread_to_dict,
    with_spread,
)
from model.errors import DesignError


@dataclass(frozen=True)
class Supply:
    """vcc: the (positive) supply voltage, V; vee: the negative rail of a
    split supply, V (below 0; 0 where the topology has none)."""
    vcc: float
    vee: float = 0.0


@dataclass(frozen=True)
class Bias:
    """The base bias, Ω.

    Divider: r1 from the supply to the base, r2 base to ground.  Collector
    feedback: rf from the collector to the base, r2 (math.inf = not fitted)
    base to ground.  Split supply: rb from the base to ground.  A field the
    topology does not use stays 0.
    """
    r1: float = 0.0
    r2: float = 0.0
    rf: float = 0.0
    rb: float = 0.0


@dataclass(frozen=True)
class Stage:
    """The stage's own parts, Ω and F.

    Common emitter (and collector feedback): rc, re1 (unbypassed), re2
    (bypassed by ce), ce.  Emitter follower: rc (0 = collector tied to the
    supply) and re.  Common base: rc, re, and cb from the base to ground.
    ce-follower: the common emitter's parts, and re, the follower's emitter
    resistor.  Every topology: cin, cout.  A field the topology does not use
    stays 0.

    A capacitor of 0 is not fitted ("none" in the file): without ce, re2 is
    in the signal path too; without cin the source is wired straight to the
    base, and without cout the load straight to the output terminal, so
    their DC paths become part of the bias.
    """

    rc: float = 0.0
    re1: float = 0.0
    re2: float = 0.0
    ce: float = 0.0
    cb: float = 0.0
    re: float = 0.0
    cin: float = 0.0
    cout: float = 0.0


@dataclass(frozen=True)
class Source:
    """Signal source: rs output resistance Ω, vpk EMF amplitude V, freq Hz;
    noise_low and noise_high (Hz) the band the noise is integrated over,
    0 ("none") for the stage's own −3 dB corner."""
    rs: float
    vpk: float
    freq: float
    noise_low: float = 0.0
    noise_high: float = 0.0


@dataclass(frozen=True)
class Load:
    """rl in Ω (math.inf = no load, "open" in the file) in parallel with cl in F
    (0 = not fitted, "none" in the file)."""
    rl: float
    cl: float = 0.0


@dataclass(frozen=True)
class Transistor:
    """The BJT model.

    polarity "npn"/"pnp"; beta forward β at 25 °C; beta_r reverse β; va Early
    voltage V; i_s saturation current A at 25 °C; ft transition frequency Hz;
    cmu base–collector capacitance F; vceo V; pd_max W; theta_ja K/W;
    tj_max °C; xti saturation-current temperature exponent; eg band gap eV;
    xtb β temperature exponent; rb base spreading resistance Ω (for noise
    only); kf, af the base current's flicker-noise coefficient and exponent.
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
    rb: float = 100.0
    kf: float = 0.0
    af: float = 1.0


@dataclass(frozen=True)
class SecondTransistor:
    """The follower of a ce-follower stage: the same type of part as
    ``transistor``, so it shares every parameter but its forward β at 25 °C
    (0 where the topology has no second transistor)."""
    beta: float = 0.0


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
    """One stage design; the file adds ``format = FORMAT``.

    ``tolerance`` and ``spec`` (a tuple of Limits) are the optional spread
    tables (see :mod:`model.design.spread_tables`).
    """
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
    transistor2: SecondTransistor = SecondTransistor()
    tolerance: Tolerance = Tolerance()
    spec: tuple = ()


# Table name in the file (also the Design attribute) -> its dataclass, in file order.
TABLES = {"supply": Supply, "bias": Bias, "stage": Stage, "source": Source, "load": Load,
          "transistor": Transistor, "transistor2": SecondTransistor, "environment": Environment,
          "parts": Parts, "estimate": Estimate}
TEXT_KEYS = ("name", "topology", "notes")



#: The parts of each topology's starting design: a working stage on the
#: generic part below, at about 1 mA (common practice for a small-signal stage).
_STARTS = {
    CE: (Supply(9.0), Bias(56e3, 10e3),
         Stage(rc=6.8e3, re1=220.0, re2=1e3, ce=100e-6, cin=10e-6, cout=10e-6),
         Source(1e3, 10e-3, 1e3), Load(100e3)),
    EF: (Supply(12.0), Bias(10e3, 10e3), Stage(re=2.2e3, cin=10e-6, cout=100e-6),
         Source(1e3, 1.0, 1e3), Load(10e3)),
    # A low-impedance source into the emitter: cin must be large against rin ≈ re.
    CB: (Supply(12.0), Bias(33e3, 10e3), Stage(rc=4.7e3, re=2.2e3, cb=10e-6, cin=100e-6, cout=10e-6),
         Source(50.0, 10e-3, 1e3), Load(10e3)),
    CF: (Supply(9.0), Bias(r2=27e3, rf=82e3),
         Stage(rc=3.3e3, re1=100.0, re2=560.0, ce=100e-6, cin=10e-6, cout=10e-6),
         Source(1e3, 10e-3, 1e3), Load(47e3)),
    CEF: (Supply(12.0), Bias(56e3, 10e3),
          Stage(rc=6.8e3, re1=220.0, re2=1e3, ce=100e-6, re=1e3, cin=10e-6, cout=100e-6),
          Source(1e3, 10e-3, 1e3), Load(600.0)),
    # Split supplies: the base sits near 0 V on rb, so the source is wired
    # straight to it (no cin), as a DC-coupled front end is.
    CE_SPLIT: (Supply(9.0, -9.0), Bias(rb=10e3),
               Stage(rc=3.9e3, re1=220.0, re2=7.5e3, ce=100e-6, cout=10e-6),
               Source(1e3, 10e-3, 1e3), Load(100e3)),
    EF_SPLIT: (Supply(12.0, -12.0), Bias(rb=10e3), Stage(re=5.6e3, cout=100e-6),
               Source(1e3, 1.0, 1e3), Load(10e3)),
}


def default_design(topology: str = CE) -> Design:
    """A sensible starting design of ``topology`` with a generic small-signal NPN."""
    if topology not in TOPOLOGIES:
        raise DesignError("topology", _shown(topology), _choice(TOPOLOGIES).text)
    supply, bias, stage, source, load = _STARTS[topology]
    transistor = Transistor("npn", beta=200.0, beta_r=2.0, va=100.0, i_s=1e-14, ft=250e6,
                            cmu=3e-12, vceo=40.0, pd_max=0.5, theta_ja=200.0, tj_max=150.0)
    second = SecondTransistor(200.0) if topology in TWO_TRANSISTORS else SecondTransistor()
    return Design("untitled", topology, "", supply, bias, stage, source, load,
                  transistor, Environment(), Parts(), Estimate(), second)


def with_topology(design: Design, topology: str) -> Design:
    """``design`` as a stage of another ``topology``: every key both have
    keeps its value, the keys only the new one has start from its
    :func:`default_design`, and spread entries for keys it lacks are dropped.
    The ledger logs the keys left behind as changes to "none", so undo brings
    them back."""
    topology = check_value("topology", CE, topology)
    if topology == design.topology:
        return design
    start = default_design(topology)
    keep = {k for k in set(keys_for(design.topology)) & set(keys_for(topology))
            if _fits(k, topology, get_value(design, k))}
    tables = {}
    for table, cls in TABLES.items():
        ours, theirs = getattr(design, table), getattr(start, table)
        tables[table] = cls(**{f.name: getattr(ours if f"{table}.{f.name}" in keep else theirs, f.name)
                               for f in dataclasses.fields(cls)})
    spread = {}
    for key in spread_from_dict(spread_to_dict(design.tolerance, design.spec)):
        try:
            check_known(key, topology)
        except DesignError:
            spread[key] = NONE
    tolerance, spec = with_spread(design.tolerance, design.spec, spread) if spread else (design.tolerance, design.spec)
    return validate(dataclasses.replace(design, topology=topology, tolerance=tolerance, spec=spec, **tables))


def _fits(key: str, topology: str, value: object) -> bool:
    """Whether ``value`` meets ``key``'s rule in ``topology`` (an emitter
    follower's rc of 0 does not meet a gain stage's)."""
    try:
        check_value(key, topology, value)
    except DesignError:
        return False
    return True


def check_key(key: str, topology: str, value: object):
    """``value`` in the stored form of any design key, spread keys included;
    DesignError naming the key, value and rule."""
    if is_spread_key(key):
        return check_spread_value(key, topology, value)
    return check_value(key, topology, value)


def check_known(key: str, topology: str) -> None:
    """DesignError unless ``key`` is a key a design of ``topology`` can hold."""
    if is_spread_key(key):
        check_spread_value(key, topology, NONE)  # "none" is valid for every spread key it knows
    else:
        rule_for(key, topology)


def knows(key: str, topology: str) -> bool:
    """Whether a design of ``topology`` can hold ``key``."""
    try:
        check_known(key, topology)
    except DesignError:
        return False
    return True


def get_value(design: Design, key: str) -> object:
    """The stored value of ``key`` ("name" or "table.key", e.g. "stage.rc");
    a tolerance or spec key that is absent is None."""
    check_known(key, design.topology)
    if is_spread_key(key):
        return get_spread(design.tolerance, design.spec, key)
    if "." not in key:
        return getattr(design, key)
    table, attr = key.split(".")
    return getattr(getattr(design, table), attr)


def with_values(design: Design, values: dict[str, object]) -> Design:
    """A copy of ``design`` with each key set (numbers or unit strings), validated."""
    if "topology" in values:
        # A new topology first; then the other keys by its rules.  A key it
        # lacks set to "none" is one the ledger left behind: nothing to set.
        values = dict(values)
        design = with_topology(design, values.pop("topology"))
        own = set(keys_for(design.topology))
        values = {k: v for k, v in values.items()
                  if not (k not in own and not is_spread_key(k) and _is_none(v))}
    top: dict[str, object] = {}
    tables: dict[str, dict[str, object]] = {}
    spread: dict[str, object] = {}
    for key, value in values.items():
        checked = check_key(key, design.topology, value)
        if is_spread_key(key):
            spread[key] = checked
        elif "." in key:
            table, attr = key.split(".")
            tables.setdefault(table, {})[attr] = checked
        else:
            top[key] = checked
    for table, changes in tables.items():
        top[table] = dataclasses.replace(getattr(design, table), **changes)
    if spread:
        top["tolerance"], top["spec"] = with_spread(design.tolerance, design.spec, spread)
    return validate(dataclasses.replace(design, **top))


def _is_none(value: object) -> bool:
    return isinstance(value, str) and value.strip().casefold() == NONE


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
            raise DesignError(table, _shown(part), f"must be {with_article(cls.__name__)}")
        values = {}
        for f in dataclasses.fields(cls):
            key, value = f"{table}.{f.name}", getattr(part, f.name)
            if key in keys:
                values[f.name] = check_value(key, topology, value)
            elif value != f.default:
                raise DesignError(key, _shown(value),
                                  f"is not used by {with_article(topology)} design and must stay {f.default!r}")
        top[table] = cls(**values)
    top["tolerance"], top["spec"] = _checked_spread(design, topology)
    checked = dataclasses.replace(design, **top)
    _check_wiring(checked)
    return checked


def _checked_spread(design: Design, topology: str) -> tuple:
    """The design's spread tables re-read through their rules (as the file
    would write them), so a Design built by hand is held to them too."""
    tolerance, spec = design.tolerance, design.spec
    if type(tolerance) is not Tolerance or not isinstance(spec, tuple):
        raise DesignError("tolerance", _shown(tolerance), "must be a Tolerance and spec a tuple of Limits")
    if tolerance == Tolerance() and not spec:
        return tolerance, spec
    flat = spread_from_dict(spread_to_dict(tolerance, spec))
    return with_spread(Tolerance(), (), {k: check_spread_value(k, topology, v) for k, v in flat.items()})


def _check_wiring(design: Design) -> None:
    """Rules across keys: a direct connection in place of cin must not put
    the source's ideal 0 V straight across the base–emitter junction."""
    s = design.stage
    if design.topology in WITH_BYPASS and s.cin == 0 and design.source.rs == 0 and s.re1 == 0 and s.re2 == 0:
        # Nothing would limit the junction current: VBE is fixed at the
        # emitter's rail voltage (vcc for a PNP, vee on a split supply), so
        # no operating point exists.
        raise DesignError("stage.cin", NONE, "with source.rs, stage.re1 and stage.re2 all 0, the source "
                          "would be wired straight across the base-emitter junction; fit cin or give "
                          "one of them a resistance")
    if design.topology == CB and s.cin == 0 and design.source.rs == 0:
        # The source would hold the emitter at 0 V and the divider the base:
        # VBE fixed by the divider, with nothing to limit the current.
        raise DesignError("stage.cin", NONE, "with source.rs 0, the source would hold the emitter of a "
                          "common-base stage at 0 V across the base-emitter junction; fit cin or give "
                          "source.rs a resistance")
    low, high = design.source.noise_low, design.source.noise_high
    if low > 0 and high > 0 and not low < high:
        raise DesignError("source.noise_high", high, f"must be above source.noise_low ({low:g} Hz): "
                          "the noise band runs from low to high")


def design_to_dict(design: Design) -> dict:
    """The TOML-ready dict of ``design``: format first, then text keys, then tables.

    Only the keys of the design's topology appear; an open load is "open"
    and a capacitor not fitted is "none" (see ``fields.file_word``).
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
                word = file_word(key, value)
                entries[attr] = value if word is None else word
        if entries:  # a table the topology has no key in is left out
            data[table] = entries
    data.update(spread_to_dict(design.tolerance, design.spec))
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
    allowed = ("format",) + TEXT_KEYS + tuple(TABLES) + ("tolerance", "spec")
    values: dict[str, object] = spread_from_dict(data)
    for name, content in data.items():
        if name not in allowed:
            # Only names this topology has (no transistor2 for a one-transistor stage).
            own = [n for n in allowed if n not in TABLES or any(k.startswith(n + ".") for k in keys_for(topology))]
            close = difflib.get_close_matches(name, own, n=1)
            hint = f"did you mean {close[0]}? " if close else ""
            raise DesignError(name, _shown(content),
                              f"is not a design key or table; {hint}expected {', '.join(own)}")
        if name in TABLES:
            if not isinstance(content, dict):
                raise DesignError(name, _shown(content), "must be a table of keys")
            values.update({f"{name}.{k}": v for k, v in content.items()})
        elif name in ("name", "notes"):
            values[name] = content
    return with_values(default_design(topology), values)
