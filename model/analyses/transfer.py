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

from model.analyses.regions import ACTIVE, CUTOFF, SATURATION
from model.circuit.device import critical_voltage
from model.circuit.newton import OperatingPoint, sweep_reduction
from model.circuit.topologies import EMF, TRANSISTOR, StageCircuit

VBC_SATURATION = 0.4  # V
IC_CUTOFF = 10e-9  # A

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
    """(saturation margin (V), cut-off margin (nepers, clipped)), each
    (row, transistor); both ≥ 0 while that transistor is active."""
    vbc = op.junctions[:, :, 1]
    ic = np.stack([op.states[name].ic for name in op.states], axis=1)
    with np.errstate(divide="ignore", invalid="ignore"):
        cut = np.log(np.maximum(ic, 1e-300) / IC_CUTOFF)
    return VBC_SATURATION - vbc, np.clip(cut, -50.0, 50.0)


def _margin(op: OperatingPoint):
    """How far each row is inside forward-active: the smallest over every
    transistor of the saturation and cut-off margins; ≥ 0 while all are active."""
    sat, cut = _margins(op)
    return np.min(np.minimum(sat, cut), axis=1)


def limiter(op: OperatingPoint, row: int) -> str:
    """Which transistor leaves forward-active first at ``row``, and how:
    "q2 cutoff", "q1 saturation" (the smallest margin there)."""
    sat, cut = _margins(op)
    k, kind = divmod(int(np.argmin(np.stack([sat[row], cut[row]], axis=1))), 2)
    return f"{list(op.states)[k]} {(SATURATION, CUTOFF)[kind]}"


def all_active(op: OperatingPoint) -> np.ndarray:
    """Per row: every transistor forward-active."""
    ok = np.ones(op.junctions.shape[0], dtype=bool)
    for k, name in enumerate(op.states):
        ok &= region_of(op.states[name].ic, op.junctions[:, k, 1]) == ACTIVE
    return ok


def _sweep(span: float) -> np.ndarray:
    """The coarse EMF grid (V): symmetric about 0, log-spaced out to ±span."""
    return span * np.concatenate([-_GRID[:0:-1], _GRID])


@dataclass(frozen=True)
class LargeSignal:
    """Swing (V, ≥ 0) and distortion (fractions) of one design.

    ``emf_edges`` are the source EMFs (V) where the stage leaves forward-active
    going down and up; ``curve_emf``/``curve_out`` the sampled transfer (V).
    ``limits`` says what ends the output's swing up and down ("q1
    saturation", "q2 cutoff"; "" where no edge was reached).
    """

    swing_up: float
    swing_down: float
    thd: float
    hd2: float
    hd3: float
    emf_edges: tuple
    curve_emf: np.ndarray
    curve_out: np.ndarray
    limits: tuple = ("", "")


def swing_and_distortion(stage: StageCircuit, op: OperatingPoint, vcc: float, vpk: float,
                 span: float | None = None) -> LargeSignal:
    """Swing and distortion of a single-design stage at its operating point ``op``.

    ``span`` (V) is how far either side of zero the EMF sweep first looks for
    the edges; a side whose edge lies beyond it is searched again out to the
    full ±4·vcc.  A good guess (a few times vcc/|av_source|) saves most of the
    Newton work, since points far past an edge converge slowly.  The held
    circuit is reduced once; the coarse grid and the distortion period are one
    Newton call, the fine grids inside both edge brackets one more.
    """
    held = _held(stage, op)
    predict = _predictor(stage, op, held)
    out_q = float(op.voltages[stage.output][0])
    full = _SPAN_PER_VOLT * vcc
    span = full if span is None else min(span, full)
    grid = _sweep(span)
    wave, period = _period(vpk)
    points = np.concatenate([grid, wave])
    sol = _solve_at(held, points, predict(points))
    out = sol.voltages[stage.output] - out_q
    curve_out = out[: grid.size]
    thd, hd2, hd3 = _harmonics(out[grid.size :][period]) if vpk > 0 else (0.0, 0.0, 0.0)

    if not all_active(op)[0]:
        return LargeSignal(0.0, 0.0, thd, hd2, hd3, (0.0, 0.0), grid, curve_out)
    coarse = sol.take(slice(0, grid.size))
    brackets = _brackets(coarse, grid)
    if span < full and any(i == j for i, j in brackets):
        grid = _sweep(full)
        coarse = _solve_at(held, grid, predict(grid))
        curve_out = coarse.voltages[stage.output] - out_q
        brackets = _brackets(coarse, grid)
    edges, outs, why = _edges(held, stage, grid, brackets, curve_out, out_q, _between(grid, coarse, predict))
    up = max(max(outs), 0.0)
    down = max(-min(outs), 0.0)
    top, bottom = (1, 0) if outs[1] >= outs[0] else (0, 1)
    return LargeSignal(up, down, thd, hd2, hd3, tuple(edges), grid, curve_out, (why[top], why[bottom]))


def _period(vpk: float):
    """One period of vpk·sin at FFT_POINTS phases as (distinct EMFs, index of
    each sample into them): sin(π − x) = sin x, so samples k and N/2 − k are
    the same point and only N/2 + 1 need solving."""
    return vpk * _UNIT_WAVE, _FOLDED


def _unit_period():
    """sin at the N/2 + 1 distinct phases −π/2 … π/2, and each of the N
    samples' index into them (see :func:`_period`)."""
    quarter = FFT_POINTS // 4
    k = np.arange(-quarter, quarter + 1)
    n = np.arange(FFT_POINTS)
    folded = np.where(n <= quarter, n, np.where(n < 3 * quarter, FFT_POINTS // 2 - n, n - FFT_POINTS))
    return np.sin(2.0 * np.pi * k / FFT_POINTS), folded + quarter


_UNIT_WAVE, _FOLDED = _unit_period()
_UNIT_WAVE.flags.writeable = _FOLDED.flags.writeable = False


@dataclass(frozen=True)
class TransferCurve:
    """The stage solved at each source EMF (V) with the capacitors holding their
    quiescent voltages: the load voltage's excursion ``out`` (V) and the
    transistor's forward-sense ``ic`` (A), ``vce`` and ``vbc`` (V) at each."""

    emf: np.ndarray
    out: np.ndarray
    ic: np.ndarray
    vce: np.ndarray
    vbc: np.ndarray

    @property
    def region(self) -> np.ndarray:
        return region_of(self.ic, self.vbc)


def _held(stage: StageCircuit, op: OperatingPoint):
    """The stage with each coupling and bypass capacitor replaced by a source
    at its quiescent voltage (V): the circuit of the large-signal transfer,
    reduced once for sweeps of the source EMF."""
    return sweep_reduction(stage.net.coupling_as_sources({
        e.name: op.voltages[e.a] - op.voltages[e.b] for e in stage.net.elements if getattr(e, "coupling", False)
    }), EMF)


def transfer_curve(stage: StageCircuit, op: OperatingPoint, emf: np.ndarray) -> TransferCurve:
    """The large-signal transfer of a single-design stage at the EMFs ``emf``."""
    held = _held(stage, op)
    sol = _solve_at(held, emf, _predictor(stage, op, held)(emf))
    vbe, vbc = sol.junctions[:, 0, 0], sol.junctions[:, 0, 1]
    out = sol.voltages[stage.output] - float(op.voltages[stage.output][0])
    return TransferCurve(emf, out, sol.states[TRANSISTOR].ic, vbe - vbc, vbc)


def _brackets(coarse: OperatingPoint, grid):
    """For each direction, (last active, first non-active) grid indices."""
    active = (_margin(coarse) >= 0.0) & coarse.converged
    return [_bracket(active, grid.size // 2, step) for step in (-1, 1)]


def _edges(held, stage, grid, brackets, curve_out, out_q, predict):
    """Solve a fine grid inside both brackets at once and extrapolate the
    active side's margin to zero.  Returns (edge EMFs, output excursions,
    what ends each: see :func:`limiter`)."""
    fine = np.concatenate([np.linspace(grid[i], grid[j], _FINE) for i, j in brackets])
    fine_sol = _solve_at(held, fine, predict(fine))
    f_margin = _margin(fine_sol)
    f_active = (f_margin >= 0.0) & fine_sol.converged
    f_out = fine_sol.voltages[stage.output] - out_q
    edges, outs, why = [], [], []
    for k, (i, j) in enumerate(brackets):
        if i == j:  # still active at the end of the span: the edge lies beyond it
            edges.append(float(grid[i]))
            outs.append(float(curve_out[i]))
            why.append("")
            continue
        part = slice(k * _FINE, (k + 1) * _FINE)
        emf, o = _extrapolate(fine[part], f_margin[part], f_active[part], f_out[part])
        edges.append(emf)
        outs.append(o)
        outside = np.flatnonzero(~f_active[part] & fine_sol.converged[part])
        why.append(limiter(fine_sol, k * _FINE + int(outside[0])) if outside.size else "")
    return edges, outs, why


#: Points of the fine grid inside each coarse bracket.
_FINE = 48


def _predictor(stage: StageCircuit, op: OperatingPoint, held):
    """Newton starts for the sweep: the junction voltages the linearised stage
    predicts at each EMF, kept below the critical voltage so a point far past
    an edge does not start with a wildly forward-biased junction."""
    slope = held.slope(op)[0]
    # A saturating collector junction ends below the conducting emitter
    # junction's voltage, so it starts no higher than the quiescent VBE.
    ceiling = []
    for k, name in enumerate(stage.transistors):
        crit = critical_voltage(stage.net.element(name).params)[0]
        ceiling.append([crit, min(crit, float(op.junctions[0, k, 0]))])
    ceiling = np.array(ceiling)

    def predict(emf):
        u = op.junctions[0] + emf[:, None, None] * slope
        return np.minimum(u, ceiling)

    return predict


def _between(grid, coarse: OperatingPoint, predict):
    """Newton starts warm from a solved sweep: at EMFs between its points, the
    junction voltages of the nearest one.  (Interpolating would cut across the
    kink at a region's edge, and a start on the kink's chord is a poor one.)"""
    ok = coarse.converged

    def start(emf):
        if ok.sum() < 2:
            return predict(emf)
        x, u = grid[ok], coarse.junctions[ok]
        right = np.clip(np.searchsorted(x, emf), 1, x.size - 1)
        nearest = np.where(emf - x[right - 1] < x[right] - emf, right - 1, right)
        return u[nearest]

    return start


def _solve_at(held, emf: np.ndarray, junctions) -> OperatingPoint:
    """The held circuit (reduced) solved at each EMF (V); ``junctions`` is one start for
    all points (transistor, 2) or one per point (point, transistor, 2)."""
    if junctions.ndim == 2:
        junctions = np.repeat(junctions[None], emf.size, axis=0)
    return held.solve(emf, start=junctions)


def _bracket(active, centre, step):
    """(last active, first non-active) grid indices walking out from ``centre``;
    both equal the last index if the walk never leaves the active region."""
    i = centre
    while 0 <= i + step < active.size:
        if not active[i + step]:
            return i, i + step
        i += step
    return i, i


def _extrapolate(emf, margin, active, out):
    """Edge EMF and output excursion from the active points next to the edge.

    The margin is smooth on the active side and kinks at the edge, so the
    zero is found by a quadratic through the last three active points rather
    than by interpolating across the kink.
    """
    last = int(np.flatnonzero(~active)[0]) - 1 if (~active).any() else active.size - 1
    if last < 0:
        return float(emf[0]), float(out[0])
    pts = slice(max(last - 2, 0), last + 1)
    x, m, o = ([float(v) for v in a[pts]] for a in (emf, margin, out))
    step = float(emf[1] - emf[0]) if emf.size > 1 else 0.0
    if len(x) < 2 or step == 0.0:
        return x[-1], o[-1]
    # Newton on the interpolating polynomial, from the secant estimate.
    edge = x[-1] - m[-1] * (x[-1] - x[-2]) / (m[-1] - m[-2]) if m[-1] != m[-2] else x[-1]
    for _ in range(4):
        value, slope = _lagrange(x, m, edge)
        if slope == 0.0:
            break
        edge -= value / slope
    lo, hi = sorted((x[-1], x[-1] + step))
    edge = min(max(edge, lo), hi)
    return edge, _lagrange(x, o, edge)[0]


def _lagrange(xs: list, ys: list, t: float):
    """Value and slope at t of the polynomial through the points (xs, ys)."""
    value = slope = 0.0
    for i, (xi, yi) in enumerate(zip(xs, ys)):
        others = [xj for j, xj in enumerate(xs) if j != i]
        denom = 1.0
        for xj in others:
            denom *= xi - xj
        basis, dbasis = 1.0, 0.0
        for xj in others:
            dbasis = dbasis * (t - xj) + basis
            basis *= t - xj
        value += yi * basis / denom
        slope += yi * dbasis / denom
    return value, slope


def _harmonics(samples: np.ndarray):
    """(THD, HD2, HD3) of one period of samples, as amplitude ratios to the fundamental."""
    spectrum = np.abs(np.fft.rfft(samples))
    fundamental = spectrum[1]
    if fundamental == 0:
        return 0.0, 0.0, 0.0
    harmonics = spectrum[2 : FFT_POINTS // 2]
    thd = float(np.sqrt(np.sum(harmonics**2)) / fundamental)
    return thd, float(spectrum[2] / fundamental), float(spectrum[3] / fundamental)
