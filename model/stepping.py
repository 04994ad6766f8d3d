"""Keyboard stepping of design values: the preferred series for parts, and a
sensible increment for plain numbers."""

from __future__ import annotations

from . import eseries
from .design import FIELDS, POLARITIES, SERIES

#: Plain numbers step linearly by these amounts (in the key's unit).
LINEAR_STEPS = {
    "supply.vcc": 0.5,
    "environment.ambient": 5.0,
    "transistor.tj_max": 5.0,
    "transistor.vceo": 5.0,
    "transistor.beta": 10.0,
    "transistor.beta_r": 0.5,
    "transistor.va": 10.0,
    "transistor.theta_ja": 10.0,
    "transistor.xti": 0.5,
    "transistor.eg": 0.01,
    "transistor.xtb": 0.1,
    "estimate.vbe": 0.01,
}
#: Where a part stepped up from 0 (an absent resistor or capacitor) lands.
_FROM_ZERO = {"Ω": 10.0, "F": 1e-12}


def step(key: str, value: float, n: int, series: str) -> float:
    """``value`` of ``key`` moved ``n`` steps: along ``series`` for parts and
    other positive quantities, by LINEAR_STEPS for plain numbers."""
    if key in LINEAR_STEPS:
        return round(value + n * LINEAR_STEPS[key], 10)
    if value <= 0:
        return _FROM_ZERO.get(FIELDS[key].unit, 1.0) if n > 0 else value
    return eseries.step(value, series, n)


def step_decade(key: str, value: float, n: int) -> float:
    """``value`` times 10**n for parts; plain numbers move 10 steps instead."""
    if key in LINEAR_STEPS:
        return step(key, value, 10 * n, "E24")
    if value <= 0:
        return value
    return eseries.step_decade(value, n)


def choices(key: str) -> tuple:
    """The allowed words of a choice key (polarity, series), else ()."""
    return {"transistor.polarity": POLARITIES, "parts.series": SERIES}.get(key, ())
