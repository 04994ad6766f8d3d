"""Keyboard stepping of design values: the preferred series for parts, and a
sensible increment for plain numbers."""

from __future__ import annotations

from model.design import eseries
from model.design.stage import FIELDS, NONE, POLARITIES, SERIES, file_word
from model.errors import DesignError

#: Plain numbers step linearly by these amounts (in the key's unit).
LINEAR_STEPS = {
    "supply.vcc": 0.5,
    "supply.vee": 0.5,
    "environment.ambient": 5.0,
    "transistor.tj_max": 5.0,
    "transistor.vceo": 5.0,
    "transistor.beta": 10.0,
    "transistor2.beta": 10.0,
    "transistor.beta_r": 0.5,
    "transistor.va": 10.0,
    "transistor.theta_ja": 10.0,
    "transistor.xti": 0.5,
    "transistor.eg": 0.01,
    "transistor.xtb": 0.1,
    "estimate.vbe": 0.01,
}
#: Where a part stepped up from 0 (a zero-ohm link or a capacitor not
#: fitted) lands.  A bypass capacitor not fitted is open, the bottom of its
#: scale, so stepping up fits one: 1 µF, where a bypass across a few tens of
#: ohms of re starts to act in the audio band, so further steps walk its
#: corner down through it; a common base's cb likewise.  A load
#: capacitance starts at 1 pF.
_FROM_ZERO = {"Ω": 10.0, "F": 1e-12, "stage.ce": 1e-6, "stage.cb": 1e-6}
#: Capacitors whose "none" is a wire in their place, the far end of their
#: scale (a coupling capacitor's corner falls to DC as it grows): no series
#: value neighbours it, so stepping is refused.
_WIRED_WHEN_NONE = ("stage.cin", "stage.cout")


def step(key: str, value: float, n: int, series: str) -> float:
    """``value`` of ``key`` moved ``n`` steps: along ``series`` for parts and
    other positive quantities, by LINEAR_STEPS for plain numbers.

    From 0 a part steps up to a first value (see _FROM_ZERO); stepping below
    a capacitor not fitted, or either way from a coupling capacitor not
    fitted (a direct connection), raises DesignError.
    """
    if key in LINEAR_STEPS:
        return round(value + n * LINEAR_STEPS[key], 10)
    if value <= 0:
        return _from_zero(key, value, n)
    return eseries.step(value, series, n)


def step_decade(key: str, value: float, n: int) -> float:
    """``value`` times 10**n for parts; plain numbers move 10 steps instead.
    From 0 as :func:`step`."""
    if key in LINEAR_STEPS:
        return step(key, value, 10 * n, "E24")
    if value <= 0:
        return _from_zero(key, value, n)
    return eseries.step_decade(value, n)


def _from_zero(key: str, value: float, n: int) -> float:
    if key in _WIRED_WHEN_NONE:
        raise DesignError(key, NONE, "is not fitted (a direct connection), which has no neighbouring "
                          "value: type one to fit a capacitor")
    if n > 0:
        return _FROM_ZERO.get(key, _FROM_ZERO.get(FIELDS[key].unit, 1.0))
    if file_word(key, value) == NONE:
        raise DesignError(key, NONE, "is not fitted; there is nothing below none")
    return value


def choices(key: str) -> tuple:
    """The allowed words of a choice key (polarity, series), else ()."""
    return {"transistor.polarity": POLARITIES, "parts.series": SERIES}.get(key, ())
