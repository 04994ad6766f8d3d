"""Large-signal transfer at midband: regions, swing and harmonic distortion.

The stage is solved point by point as the source EMF varies, with every
coupling and bypass capacitor replaced by a source at its quiescent voltage
(they are large enough to hold their charge over a signal period).  Load and
device capacitances carry no current at midband and are left open.

Forward-active edges (see README "Regions"):
  * saturation once the collector–base junction is forward biased beyond
    VBC_SATURATION (0.4 V, the usual onset of conduction of a silicon
    junction; common practice);
  * cut-off once the collector current falls below IC_CUTOFF (10 nA, the
    order of a small-signal transistor's leakage; common practice, from memory).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .solve import OperatingPoint, operating_point
from .topologies import EMF, TRANSISTOR, StageCircuit

VBC_SATURATION = 0.4  # V
IC_CUTOFF = 10e-9  # A

ACTIVE, SATURATION, CUTOFF = "active", "saturation", "cutoff"

#: Samples per period for the distortion FFT; harmonics up to 127 are resolved.
FFT_POINTS = 256
#: The swing search spans ±SPAN_PER_VOLT·vcc of EMF, log-spaced down to 1e-6 of that.
_SPAN_PER_VOLT = 4.0
_GRID = np.concatenate([[0.0], np.logspace(-6, 0, 49)])


def region_of(ic, vbc) -> np.ndarray:
    """Region per row from the forward-sense collector current (A) and VBC (V)."""
    ic, vbc = np.asarray(ic), np.asarray(vbc)
    return np.where(vbc > VBC_SATURATION, SATURATION, np.where(ic < IC_CUTOFF, CUTOFF, ACTIVE))


def _margins(op: OperatingPoint):
    """(saturation margin V, cut-off margin in nepers); both ≥ 0 while active."""
    st = op.states[TRANSISTOR]
    vbc = op.junctions[:, 0, 1]
    with np.errstate(divide="ignore", invalid="ignore"):
        cut = np.log(np.maximum(st.ic, 1e-300) / IC_CUTOFF)
    return VBC_SATURATION - vbc, cut


@dataclass(frozen=True)
class LargeSignal:
    """Swing (V, ≥ 0) and distortion (fractions) of one design.

    ``emf_edges`` are the source EMFs (V) where the stage leaves forward-active
    going down and up; ``curve_emf``/``curve_out`` the sampled transfer (V).
    """

    swing_up: float
    swing_down: float
    thd: float
    hd2: float
    hd3: float
    emf_edges: tuple
    curve_emf: np.ndarray
    curve_out: np.ndarray


def large_signal(stage: StageCircuit, op: OperatingPoint, vcc: float, vpk: float) -> LargeSignal:
    """Swing and distortion of a single-design stage at its operating point ``op``."""
    caps = {
        e.name: op.voltages[e.a] - op.voltages[e.b]
        for e in stage.net.elements
        if getattr(e, "coupling", False)
    }
    held = stage.net.coupling_as_sources(caps)
    out_q = float(op.voltages[stage.output][0])
    grid = _SPAN_PER_VOLT * vcc * np.concatenate([-_GRID[:0:-1], _GRID])
    phase = 2.0 * np.pi * np.arange(FFT_POINTS) / FFT_POINTS
    wave = vpk * np.sin(phase)
    sol = _solve_at(held, np.concatenate([grid, wave]), op.junctions[0])
    out = sol.voltages[stage.output] - out_q
    curve_out, wave_out = out[: grid.size], out[grid.size :]
    thd, hd2, hd3 = _harmonics(wave_out) if vpk > 0 else (0.0, 0.0, 0.0)

    if region_of(op.states[TRANSISTOR].ic, op.junctions[:, 0, 1])[0] != ACTIVE:
        return LargeSignal(0.0, 0.0, thd, hd2, hd3, (0.0, 0.0), grid, curve_out)
    grid_sol = sol.take(np.arange(grid.size))
    centre = grid.size // 2
    edges, outs = [], []
    for direction in (-1, 1):
        emf, o = _edge(held, stage, grid, grid_sol, centre, direction, out_q)
        edges.append(emf)
        outs.append(o)
    up = max(max(outs), 0.0)
    down = max(-min(outs), 0.0)
    return LargeSignal(up, down, thd, hd2, hd3, tuple(edges), grid, curve_out)


def _solve_at(held, emf: np.ndarray, junctions) -> OperatingPoint:
    net = held.repeat(emf.size).with_source(EMF, emf)
    return operating_point(net, start=np.repeat(junctions[None], emf.size, axis=0))


def _edge(held, stage, grid, sol, centre, direction, out_q):
    """Walk from the quiescent point in ``direction`` to the first non-active
    grid point, then close in on the edge by the Illinois false-position method.
    Returns (EMF at the edge, output excursion there)."""
    sat, cut = _margins(sol)
    margin = np.minimum(sat, np.clip(cut, -50.0, 50.0))
    idx = range(centre, grid.size) if direction > 0 else range(centre, -1, -1)
    prev = centre
    for i in idx:
        if not (margin[i] >= 0.0 and sol.converged[i]):
            break
        prev = i
    else:
        # Still active at the end of the span: the edge lies beyond it.
        return float(grid[prev]), float(sol.voltages[stage.output][prev] - out_q)
    a, fa, b, fb = grid[prev], margin[prev], grid[i], margin[i]
    if not np.isfinite(fb):
        fb = -1.0
    start = sol.junctions[prev]
    last_out = float(sol.voltages[stage.output][prev] - out_q)
    side = 0
    for _ in range(60):
        c = b - fb * (b - a) / (fb - fa) if fb != fa else 0.5 * (a + b)
        if not (min(a, b) < c < max(a, b)):
            c = 0.5 * (a + b)
        point = _solve_at(held, np.array([c]), start)
        s, k = _margins(point)
        fc = float(min(s[0], np.clip(k[0], -50.0, 50.0)))
        if not point.converged[0]:
            fc = -1.0
        if fc >= 0.0:
            a, fa, start = c, fc, point.junctions[0]
            last_out = float(point.voltages[stage.output][0] - out_q)
            if side == 1:
                fb *= 0.5
            side = 1
        else:
            b, fb = c, fc
            if side == -1:
                fa *= 0.5
            side = -1
        if abs(b - a) <= 1e-9 * max(abs(a), abs(b), 1e-6) or abs(fc) < 1e-9:
            break
    return float(a), last_out


def _harmonics(samples: np.ndarray):
    """(THD, HD2, HD3) of one period of samples, as amplitude ratios to the fundamental."""
    spectrum = np.abs(np.fft.rfft(samples))
    fundamental = spectrum[1]
    if fundamental == 0:
        return 0.0, 0.0, 0.0
    harmonics = spectrum[2 : FFT_POINTS // 2]
    thd = float(np.sqrt(np.sum(harmonics**2)) / fundamental)
    return thd, float(spectrum[2] / fundamental), float(spectrum[3] / fundamental)
