"""The Noise picture: the input-referred noise density against frequency,
log–log, with the stage's own en and in·rs beside the source's floor.

The total is the line; en, in·rs and the floor are letters at a few dozen
of the sweep's points, so the picture reads without colour."""

from __future__ import annotations

import math

import numpy as np

from model.analyses.figures import Figures
from model.design.stage import Design
from model.design.units import format_si

from .chart import Axis, Chart, Marker, Series

#: About this many lettered points across the sweep.
_LETTERED = 24


def noise_chart(design: Design, fig: Figures) -> tuple:
    """The input-referred spectrum of ``fig``'s noise (``()`` without one)."""
    n = fig.noise
    if n is None or len(n.spectrum[0]) == 0:
        return ()
    freq, total, en, in_rs, floor = (np.asarray(a, dtype=float) for a in n.spectrum)
    every = slice(None, None, max(1, freq.size // _LETTERED))
    series = [_positive(freq, total, "total input noise", None)]
    series += [_positive(freq[every], y[every], label, mark) for y, label, mark in (
        (en, "en, the stage's voltage noise", "e"), (in_rs, "in·rs, its current noise in rs", "i"),
        (floor, "rs alone, √(4kT·rs)", "r"))]
    # Both ends of the band share one legend entry, the band as the report writes it.
    band = f"{format_si(n.band[0], 'Hz')} – {format_si(n.band[1], 'Hz')}"
    markers = [Marker(f, symbol, label, text) for f, symbol, label, text in (
        (n.band[0], "B", "noise band", band), (n.band[1], "B", "noise band", band),
        (design.source.freq, "F", "signal", None))
        if math.isfinite(f) and freq[0] <= f <= freq[-1]]
    chart = Chart("Input-referred noise", Axis("f", "Hz", log=True, lo=float(freq[0]), hi=float(freq[-1])),
                  Axis("density", "V/√Hz", log=True), series=tuple(s for s in series if s.x.size),
                  markers=tuple(markers))
    return (chart,)


def _positive(x, y, label, mark) -> Series:
    """The points a log axis can show: finite and above 0 (rs = 0 has no floor)."""
    keep = np.isfinite(y) & (y > 0)
    return Series(x[keep], y[keep], label, mark)
