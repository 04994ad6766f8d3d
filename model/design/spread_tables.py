"""The design's two optional spread tables, ``[tolerance]`` and ``[spec]``.

``[tolerance]`` says how far each build may stray from the nominal design:
resistors and capacitors by a relative tolerance (with per-part overrides
under ``[tolerance.parts]``), β and i_s by a range, the ambient by a range
in °C, all drawn from one ``distribution``.  ``[spec]`` gives the range each
figure must stay in for a build to pass.

Their entries are design keys like any other, so the ledger logs a change to
one: ``tolerance.resistors``, ``tolerance.beta``, ``tolerance.parts.stage.rc``,
``spec.av_loaded``.  The word ``"none"`` stands for an entry that is absent,
so a change can add or remove one.  In the file a range is an array
``[min, max]``; on the command line it is written ``min..max``.
"""

from __future__ import annotations

import math
import numbers
from dataclasses import dataclass

from model.design.fields import NONE, _shown, keys_for, with_article
from model.design.units import parse_value
from model.errors import DesignError, UnitError

UNIFORM, NORMAL = "uniform", "normal"
DISTRIBUTIONS = (UNIFORM, NORMAL)

#: The parts a relative tolerance can apply to; the board's own parts take
#: ``resistors``/``capacitors`` by default, the source, load and supply only
#: when ``[tolerance.parts]`` names them.
BOARD_RESISTORS = ("bias.r1", "bias.r2", "bias.rf", "bias.rb", "stage.rc", "stage.re1", "stage.re2", "stage.re")
BOARD_CAPACITORS = ("stage.ce", "stage.cb", "stage.cin", "stage.cout")
OTHER_PARTS = ("source.rs", "load.rl", "load.cl", "supply.vcc", "supply.vee")
TOLERANCE_PARTS = BOARD_RESISTORS + BOARD_CAPACITORS + OTHER_PARTS

#: Every figure a spec can be set on, with the unit its limits are read in.
SPEC_UNITS = {
    "ic": "A", "ib": "A", "vbe": "V", "vce": "V", "vb": "V", "ve": "V", "vc": "V",
    "gm": "", "r_pi": "Ω", "ro": "Ω", "beta_ac": "",
    "av_open": "", "av_loaded": "", "av_source": "", "rin": "Ω", "rin_base": "Ω", "rout": "Ω",
    "swing_up": "V", "swing_down": "V", "thd": "", "hd2": "", "hd3": "",
    "p_transistor": "W", "p_supply": "W", "i_supply": "A", "tj": "°C",
    "f_low": "Hz", "f_high": "Hz", "bandwidth": "Hz", "gain_at_freq": "",
    # Noise (model.analyses.noise_figures): en_total in V/√Hz, the others in dB.
    "en_total": "V", "nf_db": "", "snr_db": "",
}
#: Gains: their limits may be given in dB ("20 dB"), which bound 20·log10|gain|.
GAINS = ("av_open", "av_loaded", "av_source", "gain_at_freq")


def figure_unit(key: str) -> str:
    """The unit a figure is shown in: SPEC_UNITS', with V/V for the gains,
    V/√Hz for a noise density and dB for the noise figure and SNR."""
    if key in GAINS:
        return "V/V"
    return {"en_total": "V/√Hz", "nf_db": "dB", "snr_db": "dB"}.get(key, SPEC_UNITS.get(key, ""))
#: Fractions: their limits may be given in per cent ("1 %").
FRACTIONS = ("thd", "hd2", "hd3")

_RANGE_WORDS = "[min, max] in the file or min..max on the command line"
_RELATIVE_RULE = "must be a relative tolerance from 0 to 0.5 (e.g. 0.01 or '1 %'), or 'none'"


@dataclass(frozen=True)
class Tolerance:
    """How far a build strays from nominal; None where the file gives nothing.

    resistors, capacitors: relative (0.01 = ±1 %); beta: (min, max) forward β;
    i_s: (min, max) factor on the saturation current; ambient: (min, max) °C;
    distribution: "uniform", or "normal" with ±tolerance and the range ends
    at ±3σ; parts: ((key, relative), …) overrides, in TOLERANCE_PARTS order.
    """

    resistors: float | None = None
    capacitors: float | None = None
    beta: tuple | None = None
    i_s: tuple | None = None
    ambient: tuple | None = None
    distribution: str | None = None
    parts: tuple = ()

    @property
    def shape(self) -> str:
        return self.distribution or UNIFORM

    def relative(self, key: str) -> float:
        """The relative tolerance of part ``key`` (0 when it has none)."""
        own = dict(self.parts)
        if key in own:
            return own[key]
        if key in BOARD_RESISTORS:
            return self.resistors or 0.0
        if key in BOARD_CAPACITORS:
            return self.capacitors or 0.0
        return 0.0


@dataclass(frozen=True)
class Limit:
    """One spec: ``key`` must lie in [low, high] (None = no limit on that side).
    With ``db`` the limits are in dB and bound 20·log10|figure|."""

    key: str
    low: float | None
    high: float | None
    db: bool = False

    def bounds(self) -> tuple[float, float]:
        """(low, high) with ±inf for a missing end, in the limit's own scale."""
        return (-math.inf if self.low is None else self.low, math.inf if self.high is None else self.high)


_TOLERANCE_SCALARS = ("resistors", "capacitors")
_TOLERANCE_RANGES = ("beta", "i_s", "ambient")


def is_spread_key(key: str) -> bool:
    return key.startswith(("tolerance.", "spec."))


def spread_keys(topology: str) -> tuple[str, ...]:
    """Every tolerance and spec key a design of ``topology`` may hold."""
    used = set(keys_for(topology))
    parts = tuple(f"tolerance.parts.{k}" for k in TOLERANCE_PARTS if k in used)
    own = tuple(f"tolerance.{k}" for k in _TOLERANCE_SCALARS + _TOLERANCE_RANGES + ("distribution",))
    return own + parts + tuple(f"spec.{k}" for k in SPEC_UNITS)


def check_spread_value(key: str, topology: str, value: object):
    """The stored form of ``value`` for spread key ``key``: a float, a
    (min, max) tuple, a Limit, a distribution name, or None for "none".
    Raises DesignError naming the key, the value and the rule."""
    if key not in spread_keys(topology):
        raise DesignError(key, _shown(value), _unknown(key, topology))
    if _is_none(value):
        return None
    name = key.split(".", 1)[1]
    if key.startswith("spec."):
        return _limit(key, name, value)
    if name == "distribution":
        word = value.strip().casefold() if isinstance(value, str) else None
        if word not in DISTRIBUTIONS:
            raise DesignError(key, _shown(value), "must be 'uniform' or 'normal', or 'none'")
        return word
    if name in _TOLERANCE_SCALARS or name.startswith("parts."):
        number = _number(key, value, "", _RELATIVE_RULE, percent=True)
        if not 0.0 <= number <= 0.5:
            raise DesignError(key, _shown(value), _RELATIVE_RULE)
        return number
    return _tolerance_range(key, name, value)


def _unknown(key: str, topology: str) -> str:
    if key.startswith("spec."):
        return "is not a figure a spec can bound; figures: " + ", ".join(SPEC_UNITS)
    if key.startswith("tolerance.parts."):
        own = [k for k in TOLERANCE_PARTS if k in keys_for(topology)]
        return f"names no part of {with_article(topology)} design; parts: {', '.join(own)}"
    return "is not a tolerance key; expected resistors, capacitors, beta, i_s, ambient, distribution or parts.KEY"


def _is_none(value) -> bool:
    return isinstance(value, str) and value.strip().casefold() == NONE


def _ends(key: str, value, rule: str) -> tuple:
    """The two ends of a range given as a two-item list or "min..max" text."""
    if isinstance(value, str) and ".." in value:
        ends = value.split("..")
    elif isinstance(value, (list, tuple)):
        ends = list(value)
    else:
        ends = None
    if ends is None or len(ends) != 2:
        raise DesignError(key, _shown(value), rule)
    return ends


def _number(key: str, value, unit: str, rule: str, *, percent: bool = False) -> float:
    if isinstance(value, bool) or not isinstance(value, (numbers.Real, str)):
        raise DesignError(key, _shown(value), rule)
    scale = 1.0
    if percent and isinstance(value, str) and value.strip().endswith("%"):
        value, scale = value.strip()[:-1], 0.01
    try:
        return parse_value(value, unit) * scale
    except UnitError as err:
        raise DesignError(key, _shown(value), f"{err.reason}; {rule}") from None


_RANGE_RULES = {
    # A spread's β draws are squared by its statistics: 1e6 is far past any
    # real part (a Darlington pair's β is some thousands, from memory) and
    # keeps them finite.
    "beta": ("", 0.0, 1e6, "must be a range of forward β, above 0 and at most 1e6"),
    "i_s": ("", 0.0, 100.0, "must be a range of factors on i_s, above 0 and at most 100"),
    "ambient": ("°C", -273.15, 300.0, "must be a range of ambient temperatures above -273.15 °C and at most 300 °C"),
}


def _tolerance_range(key: str, name: str, value) -> tuple:
    unit, low, high, words = _RANGE_RULES[name]
    rule = f"{words}: {_RANGE_WORDS} with min ≤ max, or 'none'"
    lo, hi = (_number(key, v, unit, rule) for v in _ends(key, value, rule))
    if not (low < lo <= hi <= high):
        raise DesignError(key, _shown(value), rule)
    return (lo, hi)


def _limit(key: str, name: str, value) -> Limit:
    unit = SPEC_UNITS[name]
    words = f"must be {_RANGE_WORDS}, either end 'none'"
    if name in GAINS:
        words += "; a gain's limits may both be in dB ('20 dB'), bounding its magnitude"
    if name in FRACTIONS:
        words += "; a distortion's limits may be in per cent ('1 %')"
    ends = _ends(key, value, words)
    parsed, db_ends = [], []
    for end in ends:
        if _is_none(end):
            parsed.append(None)
            continue
        text = end.strip() if isinstance(end, str) else None
        db = text is not None and text.casefold().endswith("db")
        if db and name not in GAINS:
            raise DesignError(key, _shown(value), "takes no dB limits; only the gains do: " + ", ".join(GAINS))
        body = text[:-2] if db else end
        parsed.append(_number(key, body, unit, words, percent=name in FRACTIONS))
        db_ends.append(db)
    low, high = parsed
    if low is None and high is None:
        raise DesignError(key, _shown(value), "has no limit at either end; give one, or set the spec to 'none'")
    if len(set(db_ends)) > 1:
        raise DesignError(key, _shown(value), "gives one limit in dB and the other in V/V; use one scale for both")
    if low is not None and high is not None and low > high:
        raise DesignError(key, _shown(value), "has min above max; write [min, max]")
    return Limit(name, low, high, bool(db_ends and db_ends[0]))


def file_value(stored):
    """A stored spread value as the file (and the ledger) writes it."""
    if stored is None:
        return NONE
    if isinstance(stored, Limit):
        def end(x):
            if x is None:
                return NONE
            if not stored.db:
                return x
            # Short when exact ("20 dB"), else every digit, so the file reads back the same limit.
            return f"{x:g} dB" if float(f"{x:g}") == x else f"{x!r} dB"
        return [end(stored.low), end(stored.high)]
    if isinstance(stored, tuple):
        return list(stored)
    return stored


def get_spread(tolerance: Tolerance, spec: tuple, key: str):
    """The stored value of spread key ``key`` (None when absent)."""
    if key.startswith("spec."):
        return next((s for s in spec if s.key == key[5:]), None)
    name = key[len("tolerance."):]
    if name.startswith("parts."):
        return dict(tolerance.parts).get(name[6:])
    return getattr(tolerance, name)


def with_spread(tolerance: Tolerance, spec: tuple, values: dict) -> tuple:
    """(Tolerance, spec) with each checked spread value of ``values`` set or removed."""
    own = {f: getattr(tolerance, f) for f in _TOLERANCE_SCALARS + _TOLERANCE_RANGES + ("distribution",)}
    parts = dict(tolerance.parts)
    limits = {s.key: s for s in spec}
    for key, stored in values.items():
        if key.startswith("spec."):
            _put(limits, key[5:], stored)
        elif key.startswith("tolerance.parts."):
            _put(parts, key[len("tolerance.parts."):], stored)
        else:
            own[key[len("tolerance."):]] = stored
    ordered_parts = tuple((k, parts[k]) for k in TOLERANCE_PARTS if k in parts)
    ordered_spec = tuple(limits[k] for k in SPEC_UNITS if k in limits)
    return Tolerance(**own, parts=ordered_parts), ordered_spec


def _put(table: dict, name: str, stored) -> None:
    if stored is None:
        table.pop(name, None)
    else:
        table[name] = stored


def spread_to_dict(tolerance: Tolerance, spec: tuple) -> dict:
    """The TOML-ready ``tolerance`` and ``spec`` tables; a table with nothing in it is left out."""
    out: dict = {}
    tol = {f: file_value(getattr(tolerance, f)) for f in _TOLERANCE_SCALARS + _TOLERANCE_RANGES + ("distribution",)
           if getattr(tolerance, f) is not None}
    if tolerance.parts:
        nested: dict = {}
        for key, rel in tolerance.parts:
            table, attr = key.split(".")
            nested.setdefault(table, {})[attr] = rel
        tol["parts"] = nested
    if tol:
        out["tolerance"] = tol
    if spec:
        out["spec"] = {s.key: file_value(s) for s in spec}
    return out


def spread_from_dict(data: dict) -> dict:
    """The flat spread keys ("tolerance.beta": [100, 400], …) of a file's tables."""
    flat: dict = {}
    for table in ("tolerance", "spec"):
        if table not in data:
            continue
        content = data[table]
        if not isinstance(content, dict):
            raise DesignError(table, _shown(content), "must be a table of keys")
        for name, value in content.items():
            if table == "tolerance" and name == "parts":
                flat.update(_parts_keys(value))
            else:
                flat[f"{table}.{name}"] = value
    return flat


def _parts_keys(parts) -> dict:
    """``[tolerance.parts]`` (dotted keys ``stage.rc = 0.05`` or sub-tables) as flat keys."""
    if not isinstance(parts, dict):
        raise DesignError("tolerance.parts", _shown(parts), "must be a table such as stage.rc = 0.05")
    flat = {}
    for table, content in parts.items():
        if not isinstance(content, dict):
            raise DesignError(f"tolerance.parts.{table}", _shown(content),
                              "must name a part as table.key, e.g. stage.rc = 0.05")
        for attr, value in content.items():
            flat[f"tolerance.parts.{table}.{attr}"] = value
    return flat
