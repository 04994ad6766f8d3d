"""The workbench's pictures as charts: Bode plot, noise (in
:mod:`tui.noise_picture`), load lines, transfer curve and the spread (in
:mod:`tui.spread_picture`); the knob effects are a table
of text rows (:mod:`tui.sensitivity_text`), drawn by the pictures pane.

Each builder turns the engine's results into :class:`~tui.chart.Chart`
objects: the Bode plot from the figures' response, the load lines and the
transfer from :func:`model.analyses.curves.stage_curves`, which the picture worker
calls.  Marks are letters explained in the legend, so every picture reads
without colour.
"""

from __future__ import annotations

import math

import numpy as np

from model.analyses.curves import StageCurves, stage_curves
from model.analyses.figures import Figures
from model.analyses.loadlines import LoadLines, design_load_lines
from model.circuit.topologies import FOLLOWER
from model.design.stage import TWO_TRANSISTORS, Design

from .chart import Axis, Chart, Marker, Series, Spot
from .noise_picture import noise_chart
from .spread_picture import spread_chart

BODE, NOISE, LOAD_LINES, TRANSFER, SPREAD = "Bode", "noise", "load lines", "transfer", "spread"
KNOB_EFFECTS = "knob effects"
#: The follower's own load lines, for a stage with one.
FOLLOWER_LINES = "q2 load lines"
#: The pictures in the order F6 steps through them.
PICTURES = (BODE, NOISE, LOAD_LINES, TRANSFER, SPREAD, KNOB_EFFECTS)


def pictures_for(design: Design) -> tuple:
    """The pictures F6 steps through for ``design``: a two-transistor stage
    has the follower's load lines after the gain transistor's."""
    if design.topology not in TWO_TRANSISTORS:
        return PICTURES
    at = PICTURES.index(LOAD_LINES) + 1
    return PICTURES[:at] + (FOLLOWER_LINES,) + PICTURES[at:]
_REGION_MARK = {"saturation": ("S", "saturation edge"), "cutoff": ("X", "cut-off edge")}


def charts_for(kind: str, design: Design, fig: Figures, spread_key: str = "av_loaded") -> tuple:
    """The charts of picture ``kind`` for an analysed design (``()`` if the
    figures behind it were not computed); ``spread_key`` is the figure the
    Spread picture shows."""
    if kind == BODE:
        return bode(design, fig)
    if not fig.large_signal:
        return ()
    if kind == SPREAD:
        return spread_chart(design, fig, spread_key)
    if kind == NOISE:
        return noise_chart(design, fig)
    if kind == FOLLOWER_LINES:
        return follower_chart(design_load_lines(design, FOLLOWER)) if design.topology in TWO_TRANSISTORS else ()
    curves = stage_curves(design, fig.emf_edges)
    if kind == LOAD_LINES:
        return load_line_chart(curves, "Load lines of q1" if design.topology in TWO_TRANSISTORS else "Load lines")
    return transfer_chart(design, curves)


def bode(design: Design, fig: Figures) -> tuple:
    """Gain (dB) above phase (°) of av_source against log frequency."""
    r = fig.response
    if r is None:
        return ()
    x = Axis("f", "Hz", log=True, lo=float(r.freq[0]), hi=float(r.freq[-1]))
    markers = tuple(
        Marker(f, symbol, label) for f, symbol, label in (
            (r.f_low, "L", "f_low"), (r.f_high, "H", "f_high"), (design.source.freq, "F", "signal"))
        if math.isfinite(f) and f > 0
    )
    gain = Chart("Bode of av_source", x, Axis("gain", "dB"),
                 series=(Series(r.freq, r.magnitude_db(), "gain"),), markers=markers, x_ticks=False)
    # The same marks as above, explained once: the rows go to the curve.
    phase = Chart("Bode phase", x, Axis("phase", "°"),
                  series=(Series(r.freq, r.phase_deg(), "phase"),), markers=markers, marker_legend=False)
    return gain, phase


def load_line_chart(c: StageCurves, title: str = "Load lines") -> tuple:
    """The DC and AC load lines in the IC–VCE plane, the Q-point, and where
    the large-signal path leaves forward-active (saturation, cut-off)."""
    spots = [Spot(e.vce, e.ic, *_REGION_MARK[e.region]) for e in c.edges if e.region in _REGION_MARK]
    return _lines_chart(title, c.lines, spots, float(np.nanmax(c.curve.vce)), [e.ic for e in c.edges])


def follower_chart(ll: LoadLines) -> tuple:
    """The follower's DC and AC load lines and its Q-point (the swing's
    edges are marked on the gain transistor's picture, whose path the
    large-signal sweep follows)."""
    return _lines_chart("Load lines of q2 (follower)", ll, [], 0.0, [])


def _lines_chart(title: str, ll: LoadLines, spots: list, vce_reached: float, ic_reached: list) -> tuple:
    right = max(ll.vce_open, ll.ac_vce_cutoff, vce_reached) * 1.02
    vce = np.linspace(0.0, right, 24)
    dc_ic = ll.dc_ic(vce)
    top = max(ll.dc_ic(0.0), ll.ac_ic(0.0), ll.ic_q * 2.0, *ic_reached) * 1.05
    keep = (dc_ic >= 0) & (dc_ic <= top)
    ac_vce = np.linspace(0.0, ll.ac_vce_cutoff, 160)
    spots = [Spot(ll.vce_q, ll.ic_q, "Q", "Q-point"), *spots]
    return (Chart(
        title,
        Axis("VCE", "V", lo=0.0, hi=right),
        Axis("IC", "A", lo=0.0, hi=top),
        series=(
            Series(vce[keep], dc_ic[keep], "DC load line", mark="·"),
            Series(ac_vce, ll.ac_ic(ac_vce), "AC load line", mark=None),
        ),
        spots=tuple(spots),
    ),)


def transfer_chart(design: Design, c: StageCurves) -> tuple:
    """Load voltage against source EMF with the clip points, the quiescent
    point and the requested amplitude ±vpk marked."""
    curve = c.curve
    vpk = design.source.vpk
    markers = tuple(Marker(x, "A", label) for x, label in ((vpk, "+vpk"), (-vpk, "−vpk")) if vpk > 0)
    spots = [Spot(0.0, 0.0, "Q", "quiescent")]
    spots += [Spot(e.emf, e.out, *_REGION_MARK[e.region]) for e in c.edges if e.region in _REGION_MARK]
    return (Chart(
        "Transfer",
        Axis("emf", "V", lo=float(curve.emf[0]), hi=float(curve.emf[-1])),
        Axis("v_load", "V"),
        series=(Series(curve.emf, curve.out, "v_load − quiescent"),),
        markers=markers, spots=tuple(spots),
    ),)
