"""Axis scales for :mod:`tui.chart`: where values land (linear or log10),
the axis ends, and tick values with labels that tell neighbours apart.

``axis`` is a :class:`tui.chart.Axis` (label, unit, log, lo, hi).
"""

from __future__ import annotations

import math

import numpy as np

from model.design.units import format_si

from .minus_sign import minus

#: Of the data span, left either side so extremes do not sit on the frame.
MARGIN = 0.05


def finite(axis, values: np.ndarray) -> np.ndarray:
    """Which values can be placed on ``axis`` (a log axis has no room for ≤ 0)."""
    with np.errstate(invalid="ignore"):
        ok = np.isfinite(values)
        return ok & (values > 0) if axis.log else ok


def scaled(axis, values):
    """Values in the axis's drawing coordinate (decades on a log axis)."""
    values = np.asarray(values, dtype=float)
    if not axis.log:
        return values
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.log10(values)


def axis_range(axis, samples: list[np.ndarray]) -> tuple[float, float]:
    """Axis ends in drawing coordinates, widened when they would coincide."""
    data = [scaled(axis, s[finite(axis, s)]) for s in samples]
    # Bounded so that the span of the widest data still fits in a float.
    data = np.clip(np.concatenate(data), -1e300, 1e300) if data else np.empty(0)
    ends = []
    for given, pick in ((axis.lo, np.min), (axis.hi, np.max)):
        if given is not None and math.isfinite(given) and (given > 0 or not axis.log):
            ends.append(float(np.clip(scaled(axis, given), -1e300, 1e300)))
        else:
            ends.append(float(pick(data)) if data.size else math.nan)
    lo, hi = ends
    if math.isnan(lo) and math.isnan(hi):
        lo, hi = (0.0, 1.0)
    elif math.isnan(lo) or math.isnan(hi):
        lo = hi = hi if math.isnan(lo) else lo
    lo, hi = min(lo, hi), max(lo, hi)
    span = hi - lo
    if span <= 1e-12 * max(abs(lo), abs(hi), 1e-300):
        # A flat line still needs an axis: half a decade on a log axis, a
        # tenth of the value (or one unit at zero) on a linear one.
        half = 0.5 if axis.log else (abs(lo) * 0.1 or 1.0)
        return lo - half, hi + half
    return (lo - MARGIN * span if axis.lo is None else lo,
            hi + MARGIN * span if axis.hi is None else hi)


def linear_ticks(lo: float, hi: float, count: int) -> list[float]:
    """Multiples of the 1-2-5 step whose tick count comes closest to
    ``count``, preferring any step that gives at least two ticks."""
    span = hi - lo
    power = 10.0 ** math.floor(math.log10(span / max(count, 1)))
    best = None
    for factor in (0.1, 0.2, 0.5, 1, 2, 5, 10, 20):
        step = factor * power
        first, last = math.ceil(lo / step - 1e-9), math.floor(hi / step + 1e-9)
        n = last - first + 1
        score = (n < 2, abs(n - 1 - count), -step)
        if best is None or score < best[0]:
            # Whole multiples of the step, so 0.1 + 0.2 noise never reaches a label.
            best = score, [0.0 if k == 0 else k * step for k in range(first, last + 1)]
    return best[1]


def ticks(axis, lo: float, hi: float, count: int) -> list[float]:
    """Tick values in axis units between drawing coordinates ``lo`` and ``hi``."""
    if not axis.log:
        return linear_ticks(lo, hi, count)
    decades = list(range(math.ceil(lo - 1e-9), math.floor(hi + 1e-9) + 1))
    if len(decades) >= 2:
        every = max(1, math.ceil(len(decades) / max(count, 1)))
        return [10.0 ** d for d in decades if d % every == 0]
    within = [m * 10.0 ** d for d in range(math.floor(lo), math.ceil(hi) + 1) for m in (1, 2, 5)
              if lo - 1e-9 <= math.log10(m) + d <= hi + 1e-9]
    if len(within) >= 2:
        return within
    return [t for t in linear_ticks(10.0 ** lo, 10.0 ** hi, count) if t > 0]


def tick_labels(values: list[float], unit: str) -> tuple:
    """(value, text) pairs, each text the shortest format_si that tells the
    value apart from its neighbours."""
    gaps = np.diff(values)
    tolerance = 1e-3 * float(np.min(np.abs(gaps))) if gaps.size else None
    pairs = []
    for value in values:
        allowed = 1e-6 * abs(value) if tolerance is None else tolerance
        digits = next((d for d in range(1, 13) if abs(float(f"{value:.{d - 1}e}") - value) <= allowed), 12)
        pairs.append((value, minus(format_si(value, unit, digits))))
    return tuple(pairs)


def rounded_out(ends: tuple, values: list[float]) -> tuple:
    """Axis ends moved out to the multiples of the tick step just beyond
    them, and the ticks between: every value then lies between two labels."""
    if len(values) < 2:
        return ends, values
    step = values[1] - values[0]
    first, last = math.floor(ends[0] / step + 1e-9), math.ceil(ends[1] / step - 1e-9)
    ticks_out = [0.0 if k == 0 else k * step for k in range(first, last + 1)]
    return (first * step, last * step), ticks_out
