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

from model.analyses.curves import StageCurves, stage_curves, transfer_near_q
from model.analyses.figures import Figures
from model.analyses.loadlines import LoadLines, design_load_lines
from model.circuit.topologies import FOLLOWER
from model.design.stage import TWO_TRANSISTORS, Design

from .chart import Axis, Chart, Marker, Series, Spot
from .noise_picture import noise_chart
from .readout_table import show
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
    # The corners are the Readout's own figures, written by its own formatter,
    # so the legend and the Readout never show one corner two ways.
    markers = tuple(
        Marker(f, symbol, label, show(f, "Hz")) for f, symbol, label in (
            (fig.f_low, "L", "f_low"), (fig.f_high, "H", "f_high"), (design.source.freq, "F", "signal"))
        if math.isfinite(f) and f > 0
    )
    # Ends on whole ticks: the midband gain, the curve's top, lies between two labels.
    gain = Chart("Bode of av_source", x, Axis("gain", "dB", round_ends=True),
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


#: The near-Q view is drawn when ±vpk spans less than this share of the full
#: view's EMF range, where its marks would sit within a cell or two of Q.
NEAR_Q_SHARE = 0.1
#: The near-Q view's EMF range, in multiples of vpk either side of Q, and its points.
NEAR_Q_SPAN, NEAR_Q_POINTS = 2.5, 41


def transfer_chart(design: Design, c: StageCurves) -> tuple:
    """Load voltage against source EMF with the clip points, the quiescent
    point and the requested amplitude ±vpk marked; when ±vpk is too small a
    part of that range to read, a second view around Q spans ±2.5·vpk."""
    curve = c.curve
    vpk = design.source.vpk
    # One legend entry for the pair: the marks are the same letter either side of Q.
    markers = tuple(Marker(x, "A", "±vpk", show(vpk, "V")) for x in (vpk, -vpk)) if vpk > 0 else ()
    spots = [Spot(0.0, 0.0, "Q", "quiescent")]
    # "saturation", not "saturation edge": the legend must fit two rows of half a picture.
    spots += [Spot(e.emf, e.out, _REGION_MARK[e.region][0], _REGION_MARK[e.region][1].removesuffix(" edge"))
              for e in c.edges if e.region in _REGION_MARK]
    whole = Chart(
        "Transfer",
        Axis("emf", "V", lo=float(curve.emf[0]), hi=float(curve.emf[-1])),
        Axis("v_load", "V"),
        series=(Series(curve.emf, curve.out, "v_load − quiescent"),),
        markers=markers, spots=tuple(spots),
    )
    span = float(curve.emf[-1] - curve.emf[0])
    if not 0 < 2 * vpk < NEAR_Q_SHARE * span:
        return (whole,)
    near = transfer_near_q(design, NEAR_Q_SPAN * vpk, NEAR_Q_POINTS)
    return whole, Chart(
        f"Near Q, ±{NEAR_Q_SPAN:g}·vpk",
        Axis("emf", "V", lo=float(near.emf[0]), hi=float(near.emf[-1])),
        Axis("v_load", "V"),
        series=(Series(near.emf, near.out, "v_load − quiescent"),),
        markers=markers, spots=(Spot(0.0, 0.0, "Q", "quiescent"),), marker_legend=False,
    )
