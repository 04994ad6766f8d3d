"""The data behind the workbench's load-line and transfer pictures: the load
lines and a uniform large-signal sweep wide enough to show both clip points."""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from model.analyses.figures import design_values
from model.analyses.loadlines import LoadLines, load_lines
from model.analyses.transfer import ACTIVE, TransferCurve, transfer_curve
from model.analyses.unsolved import unsolved_message
from model.circuit.newton import operating_point
from model.circuit.topologies import build
from model.design.stage import Design
from model.errors import SolveError

#: Points of the sweep, and how far past the farther edge it runs.
CURVE_POINTS = 161
_BEYOND = 1.4


@dataclass(frozen=True)
class Edge:
    """Where the stage leaves forward-active: EMF and load excursion (V), the
    transistor's IC (A) and VCE (V) there, and the region it goes into."""

    emf: float
    out: float
    ic: float
    vce: float
    region: str


@dataclass(frozen=True)
class StageCurves:
    lines: LoadLines
    curve: TransferCurve
    edges: tuple


def stage_curves(design: Design, emf_edges: tuple) -> StageCurves:
    """Load lines and the transfer over ±1.4× the farther of ``emf_edges`` (V),
    with the edges themselves among the points."""
    stage = build(design.topology, design_values([design]))
    op = _solved(design, stage)
    finite = [abs(e) for e in emf_edges if math.isfinite(e)]
    span = _BEYOND * max(finite) if finite and max(finite) > 0 else 0.1
    inside = [e for e in emf_edges if math.isfinite(e) and e != 0.0]
    # The edges are solved as points of their own: the curve kinks there, and
    # interpolating across the kink would put the clip marks off the curve.
    curve = transfer_curve(stage, op, np.union1d(np.linspace(-span, span, CURVE_POINTS), inside))
    edges = tuple(_edge(curve, e) for e in inside)
    return StageCurves(load_lines(stage, op), curve, edges)


def transfer_near_q(design: Design, half: float, points: int) -> TransferCurve:
    """The transfer at ``points`` EMFs over ±``half`` (V) around Q: a small
    amplitude's close-up, where the whole picture's points are too far apart."""
    stage = build(design.topology, design_values([design]))
    return transfer_curve(stage, _solved(design, stage), np.linspace(-half, half, points))


def _solved(design: Design, stage):
    op = operating_point(stage.net)
    if not op.converged[0]:
        raise SolveError(*unsolved_message(design, float(op.residual[0]), op.iterations))
    return op


def _edge(curve: TransferCurve, emf: float) -> Edge:
    at = {name: float(np.interp(emf, curve.emf, getattr(curve, name))) for name in ("out", "ic", "vce")}
    beyond = np.flatnonzero((curve.emf > emf) if emf > 0 else (curve.emf < emf))
    regions = curve.region
    past = regions[beyond[0] if emf > 0 else beyond[-1]] if beyond.size else ACTIVE
    return Edge(emf, at["out"], at["ic"], at["vce"], str(past))
