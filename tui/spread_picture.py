"""The Spread picture: a histogram of one figure over sampled builds, its
spec limits and the nominal marked with letters, and the yield in the title.

Computed in the picture worker on the design on show (a candidate included)
from PICTURE_SAMPLES builds with the fixed seed, so the same design always
draws the same histogram.
"""

from __future__ import annotations

import numpy as np

from model.analyses.figures import Figures
from model.design.spread_tables import figure_unit
from model.design.stage import Design
from model.spread.analysis import LEDGER_SAMPLES, sample, yield_of
from model.spread.statistics import DC_FIGURES, usable

from .chart import Axis, Chart, Marker, Series
from .spread_text import percent

#: Builds behind the picture: the ledger's count, so picture and ledger agree.
PICTURE_SAMPLES = LEDGER_SAMPLES
#: The figures the picture steps through (after the design's own spec keys).
CHOICES = ("av_loaded", "ic", "vce", "swing_down", "swing_up", "rin", "rout", "thd", "f_high", "f_low", "tj")
_BINS = 40


def figure_choices(design: Design) -> tuple:
    """The figures the picture can show, the design's spec keys first."""
    own = tuple(s.key for s in design.spec)
    return own + tuple(k for k in CHOICES if k not in own)


def spread_chart(design: Design, fig: Figures, key: str) -> tuple:
    """The histogram chart of figure ``key`` over the builds of ``design``."""
    ev = sample(design, PICTURE_SAMPLES)
    values = ev.figures[key]
    ok = usable(key, values, ev.active)
    shown = values[ok]
    # The yield first: a narrow picture cuts its title from the right.
    title = key
    y = yield_of(design, ev)
    if y is not None:
        low, high = y.all.interval
        title += f" · yield {percent(y.all.value)} ({percent(low)}–{percent(high)})"
    title += f" · {PICTURE_SAMPLES:,} builds"
    if not ev.spread.keys:
        title += " · no [tolerance]: every build is nominal"
    left_out = int((~ok).sum())
    if left_out:
        why = "unsolved" if key in DC_FIGURES else "not active"
        title += f" · {left_out:,} {why}"
    unit = figure_unit(key)
    limit = next((s for s in design.spec if s.key == key), None)
    nominal = float(getattr(fig, key))
    markers = [Marker(nominal, "N", "nominal")] if np.isfinite(nominal) else []
    if limit is not None and not limit.db:
        markers += [Marker(x, s, w) for x, s, w in ((limit.low, "m", "spec min"), (limit.high, "M", "spec max"))
                    if x is not None]
    if shown.size == 0:
        return (Chart(title, Axis(key, unit), Axis("builds", "%"), markers=tuple(markers)),)
    lo, hi = float(shown.min()), float(shown.max())
    for m in markers:  # keep the limits in view
        lo, hi = min(lo, m.x), max(hi, m.x)
    if hi <= lo:
        lo, hi = lo - max(abs(lo), 1e-12) * 0.01, hi + max(abs(hi), 1e-12) * 0.01
    counts, edges = np.histogram(shown, bins=_BINS, range=(lo, hi))
    share = 100.0 * counts / values.size
    # The outline of the bars as one stepped line: up, across, down.
    x = np.repeat(edges, 2)
    steps = np.concatenate([[0.0], np.repeat(share, 2), [0.0]])
    return (Chart(title, Axis(key, unit, lo=lo, hi=hi), Axis("builds", "%", lo=0.0),
                  series=(Series(x, steps, "share of builds per bin"),), markers=tuple(markers)),)
