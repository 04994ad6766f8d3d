"""Swing and distortion of many designs at once: the batched counterpart of
:func:`model.analyses.transfer.swing_and_distortion`, same conventions.

Every row's held circuit (coupling and bypass capacitors as sources at their
quiescent voltages) is reduced once, as in :mod:`model.analyses.transfer`;
each round below is one Newton call over every row still searching.

Swing: the edge on either side is the zero of the forward-active margin
(transfer._margin) along the EMF. transfer.py brackets it on a 99-point
grid, solves 48 points inside the bracket and extrapolates a quadratic
through the last three active ones. Here a bracket is found from the
linearised stage's own estimate and narrowed by regula falsi (Illinois) on
the margin until it is within _MARGIN_TOL (V or nepers) of zero, about ten
points a side. That zero only places the edge on transfer.py's grids (the
coarse cell and, inside it, the last active of its _FINE points; the same
span is used); its extrapolation is then replayed on those same three points
(solved in one more call), so the answer is transfer.py's own: where the
margin falls off a cliff (a follower's output reaching cut-off) the
quadratic overshoots the true excursion by up to a few tenths of a per cent,
and the edge inside a cell's first fine step reports that step's inner end.
A side still active at ±4·vcc reports the excursion there, a stage not
forward-active at rest swings 0, as transfer.py does. Rows the search cannot
settle (a point that does not converge) are handed to
transfer.swing_and_distortion itself.

Distortion: one period of the EMF at QUICK_POINTS phases first.  Those are
a subset of transfer.FFT_POINTS' phases (the same EMFs to the bit).  Where
every sample is forward-active and the upper half of that short spectrum is
below _QUICK_TAIL of the fundamental, the harmonics are those of the short
period: for a waveform that smooth they fall off geometrically, so what the
short period folds onto harmonics 1–3 or leaves out above its Nyquist bin is
below 1e-9 of the fundamental (tests/test_batch_figures.py checks the two
against each other and against analyse).  Every other row is solved at all
FFT_POINTS phases, as transfer.py does.  A period with a point that does
not converge gives NaN (see _ratios), where transfer.py reports a number.
"""

from __future__ import annotations

from dataclasses import dataclass, replace

import numpy as np

from model.analyses.transfer import (
    _FINE,
    _GRID,
    _SPAN_PER_VOLT,
    FFT_POINTS,
    IC_CUTOFF,
    VBC_SATURATION,
    _held,
    _margin,
    _period,
    swing_and_distortion,
)
from model.circuit.device import critical_voltage
from model.circuit.newton import OperatingPoint, SweepReduction
from model.circuit.topologies import StageCircuit

#: Phases of the short distortion period (a divisor of FFT_POINTS).
QUICK_POINTS = 16
#: The short period stands when its bins above QUICK_POINTS/4 are below this
#: fraction of the fundamental.
_QUICK_TAIL = 1e-9
#: An edge is settled when the margin there is within this of zero (V for
#: saturation, nepers for cut-off).
_MARGIN_TOL = 1e-10
_MAX_ROUNDS = 40


@dataclass(frozen=True)
class BatchLargeSignal:
    """Swing (V, ≥ 0) and distortion (fractions) per row, as LargeSignal's."""

    swing_up: np.ndarray
    swing_down: np.ndarray
    thd: np.ndarray
    hd2: np.ndarray
    hd3: np.ndarray


def large_signal_many(stage: StageCircuit, op: OperatingPoint, vcc, vpk, active, span) -> BatchLargeSignal:
    """Swing and distortion of every row of a built stage at its converged
    operating point ``op``.  vcc, vpk (V) per row; ``active`` marks the rows
    forward-active at rest; ``span`` (V) is what analyse passes to
    swing_and_distortion, used only for rows handed to it."""
    held = _HeldRows(stage, op)
    batch = stage.net.batch
    up, down = np.zeros(batch), np.zeros(batch)
    rows = np.flatnonzero(active)
    if rows.size:
        u, d, settled = _swing(held, op, rows, vcc[rows], span[rows])
        up[rows], down[rows] = u, d
        for r in rows[~settled]:
            one = swing_and_distortion(replace(stage, net=stage.net.take(np.array([r]))), op.take(np.array([r])),
                                       float(vcc[r]), float(vpk[r]), float(span[r]))
            up[r], down[r] = one.swing_up, one.swing_down
    thd, hd2, hd3 = (np.zeros(batch) for _ in range(3))
    driven = np.flatnonzero(vpk > 0)
    if driven.size:
        thd[driven], hd2[driven], hd3[driven], _ = _distortion(held, driven, vpk[driven])
    return BatchLargeSignal(up, down, thd, hd2, hd3)


class _HeldRows:
    """The held circuit of every row reduced once; solves chosen rows (a row
    may be picked more than once) at a few EMFs each, from the linearised
    starts transfer._predictor gives."""

    def __init__(self, stage: StageCircuit, op: OperatingPoint):
        self.red = _held(stage, op)
        self.output = stage.output
        self.out_q = op.voltages[stage.output]
        self.names = stage.transistors
        self.u_q = op.junctions  # (batch, transistor, 2)
        self.slope = self.red.slope(op)
        crit = np.stack([critical_voltage(stage.net.element(n).params) for n in self.names], axis=1)
        self.ceiling = np.stack([crit, np.minimum(crit, self.u_q[:, :, 0])], axis=2)

    def solve(self, rows, emf):
        """Rows ``rows`` (k,) at EMFs ``emf`` (k, m) V: the load voltage's
        excursion (V), the margin, whether each point is forward-active and
        whether it converged."""
        k, m = emf.shape
        start = self.u_q[rows, None] + emf[:, :, None, None] * self.slope[rows, None]
        start = np.minimum(start, self.ceiling[rows, None]).reshape(k * m, len(self.names), 2)
        sol = _subset(self.red, rows).solve(emf, start)
        out = sol.voltages[self.output].reshape(k, m) - self.out_q[rows, None]
        margin = _margin(sol).reshape(k, m)
        converged = sol.converged.reshape(k, m)
        return out, margin, (margin >= 0.0) & converged, converged


def _subset(red: SweepReduction, rows) -> SweepReduction:
    """The reduction of some rows only: each design is a (0 V, 1 V) pair of rows."""
    if rows.size == red.batch and np.array_equal(rows, np.arange(red.batch)):
        return red
    pick = (2 * rows[:, None] + np.arange(2)).ravel()
    p = red.pair

    def take(a):
        return a[pick]

    pair = replace(p, g=take(p.g), v=take(p.v), drive=take(p.drive), u0=take(p.u0), r=take(p.r),
                   dev=p.dev.map(take), sign=take(p.sign))
    return SweepReduction(rows.size, pair)


def _first_guess(held: _HeldRows, op: OperatingPoint, rows, direction):
    """|EMF| (V) where the linearised stage reaches an edge going ``direction``
    (±1 per lane): VBC at VBC_SATURATION or IC extrapolated to 0 A, the
    nearer, for whichever transistor gets there first."""
    nearest = np.full(rows.size, np.inf)
    for k, name in enumerate(held.names):
        st = op.states[name]
        s_be, s_bc = held.slope[rows, k, 0], held.slope[rows, k, 1]
        vbc_rate = direction * s_bc
        ic_rate = direction * (st.dic_dvbe[rows] * s_be + st.dic_dvbc[rows] * s_bc)
        with np.errstate(divide="ignore", invalid="ignore"):
            sat = np.where(vbc_rate > 0, (VBC_SATURATION - held.u_q[rows, k, 1]) / vbc_rate, np.inf)
            cut = np.where(ic_rate < 0, (st.ic[rows] - IC_CUTOFF) / -ic_rate, np.inf)
        nearest = np.minimum(nearest, np.minimum(sat, cut))
    return nearest


def _swing(held: _HeldRows, op: OperatingPoint, rows, vcc, span):
    """(up, down, settled) for rows forward-active at rest: two lanes a row,
    the EMF going down and up from 0 V, each bracketing its edge and then
    narrowing it by Illinois regula falsi on the margin; then read as
    transfer.py's grids would (see _as_transfer)."""
    lane_row = np.repeat(rows, 2)
    direction = np.tile([-1.0, 1.0], rows.size)
    full = np.repeat(_SPAN_PER_VOLT * vcc, 2)
    lanes = lane_row.size
    rest = np.repeat(_margin(op.take(rows)), 2)
    # Bracket ends as |EMF| along the lane: a forward-active (margin ≥ 0),
    # b not (unknown until found); *_w are Illinois' weighted margins.
    a_e, a_w = np.zeros(lanes), rest.copy()
    b_e, b_w = np.full(lanes, np.nan), np.full(lanes, np.nan)
    kept = np.zeros(lanes, dtype=np.int8)  # the end regula falsi kept last round: 1 a, −1 b
    edge_out, edge = np.full(lanes, np.nan), np.full(lanes, np.nan)
    lane_span = np.repeat(np.minimum(span, _SPAN_PER_VOLT * vcc), 2)
    by_cell = np.full(lanes, np.inf)  # the reach a side was settled on by its fine step
    done = np.zeros(lanes, dtype=bool)
    guess = _first_guess(held, op, lane_row, direction)
    probe = np.clip(np.where(np.isfinite(guess), guess, full), 1e-9 * full, full)
    for _ in range(_MAX_ROUNDS):
        todo = np.flatnonzero(~done)
        if todo.size == 0:
            break
        out, margin, active, converged = (x[:, 0] for x in held.solve(lane_row[todo], (probe * direction)[todo, None]))
        at_end = active & np.isnan(b_e[todo]) & (probe[todo] >= full[todo])
        finished = (converged & (np.abs(margin) <= _MARGIN_TOL)) | at_end
        edge_out[todo[finished]] = out[finished]
        edge[todo[finished]] = np.where(at_end[finished], np.inf, probe[todo[finished]])
        done[todo[finished]] = True
        inner, outer = active & ~finished, ~active & ~finished
        t = todo[outer]  # the point replaces b: a is kept
        a_w[t] = np.where(kept[t] == 1, 0.5 * a_w[t], a_w[t])
        kept[t] = 1
        b_e[t], b_w[t] = probe[t], np.where(converged[outer], margin[outer], np.nan)
        t = todo[inner]  # the point replaces a: b is kept (if there is one yet)
        b_w[t] = np.where(kept[t] == -1, 0.5 * b_w[t], b_w[t])
        kept[t] = np.where(np.isnan(b_e[t]), 0, -1)
        a_e[t], a_w[t] = probe[t], margin[inner]
        t = todo[~finished]
        # Bracketed inside one fine step of transfer.py's grid: that is all
        # its extrapolation needs (see _as_transfer).
        reach = np.where(a_e[t] > lane_span[t], full[t], lane_span[t])
        held_in = ~np.isnan(b_e[t]) & _cell_holds(direction[t], a_e[t], b_e[t], reach)
        edge[t[held_in]], by_cell[t[held_in]], done[t[held_in]] = a_e[t[held_in]], reach[held_in], True
        t = t[~held_in]
        probe[t] = _next_probe(a_e[t], a_w[t], b_e[t], b_w[t], rest[t], full[t])
        # A bracket as narrow as floats allow and still unsettled: handed on.
        done[t[np.abs(b_e[t] - a_e[t]) <= 1e-14 * full[t]]] = True
    # transfer.py searches both sides again out to full once either side's
    # edge lies beyond its first span; a side settled on the first span's
    # grid must then hold on the full one too, else the row is handed on.
    wide = np.repeat((edge.reshape(-1, 2) > lane_span.reshape(-1, 2)).any(axis=1), 2)
    reach = np.where(wide, full, lane_span)
    recheck = np.flatnonzero(wide & (by_cell < full))
    lost = ~_cell_holds(direction[recheck], a_e[recheck], b_e[recheck], full[recheck])
    edge[recheck[lost]] = np.nan
    inside = np.flatnonzero(np.isfinite(edge))
    if inside.size:
        edge_out[inside] = _as_transfer(held, lane_row[inside], direction[inside], edge[inside], reach[inside])
    outs = edge_out.reshape(-1, 2)
    up = np.maximum(np.fmax(outs[:, 0], outs[:, 1]), 0.0)
    down = np.maximum(-np.fmin(outs[:, 0], outs[:, 1]), 0.0)
    return up, down, np.isfinite(outs).all(axis=1)


def _as_transfer(held: _HeldRows, rows, direction, edge, reach):
    """The output excursion (V) transfer.py reports for edges at |EMF| ``edge``
    (V): its coarse grid (reach·_GRID out from rest), its _FINE points across
    the coarse cell that holds the edge, and its extrapolation from the last
    (up to three) active ones, replayed on those same points."""
    start, step, last = _fine_cell(direction, edge, reach)
    picks = np.maximum(last[:, None] + np.arange(-2, 1), 0)
    emf = picks * step[:, None] + start[:, None]
    out, margin, _, _ = held.solve(rows, emf)
    return _extrapolated(emf, margin, out, np.minimum(last + 1, 3), (1 * step + start) - start)


def _fine_cell(direction, edge, reach):
    """Where |EMF| ``edge`` (V) lies on transfer.py's grids: the start (V) and
    step (V) of the fine grid across the coarse cell that holds it (signed
    along ``direction``) and the index of the last fine point not past it."""
    outer = np.argmax(reach[:, None] * _GRID[None, 1:] > edge[:, None], axis=1) + 1
    # np.linspace(start, stop, _FINE) as numpy computes it: k·step + start.
    start, stop = direction * (reach * _GRID[outer - 1]), direction * (reach * _GRID[outer])
    step = (stop - start) / (_FINE - 1)
    with np.errstate(invalid="ignore"):
        last = np.clip(np.floor((edge - np.abs(start)) / np.abs(step)), 0, _FINE - 2).astype(int)
    last -= (direction * (last * step + start) > edge) & (last > 0)
    last += (direction * ((last + 1) * step + start) <= edge) & (last < _FINE - 2)
    return start, step, last


def _cell_holds(direction, a, b, reach):
    """Whether every |EMF| between a (included) and b lies in one fine step of
    transfer.py's grids, so an edge bracketed by them has its last active
    fine point settled."""
    start, step, last = _fine_cell(direction, a, reach)
    return b < direction * ((last + 1) * step + start)


def _extrapolated(x, m, o, count, step):
    """transfer._extrapolate on rows of the last three active points (x EMF,
    m margin, o output; the first 3 − count columns repeat the first point):
    Newton on the polynomial through them from the secant zero, kept within
    one fine step past the last point; the output is the polynomial through
    the outputs there.  One point alone reports itself."""
    x2, x1, m2, m1 = x[:, 2], x[:, 1], m[:, 2], m[:, 1]
    with np.errstate(divide="ignore", invalid="ignore"):
        edge = np.where(m2 != m1, x2 - m2 * (x2 - x1) / (m2 - m1), x2)
        moving = np.ones(x.shape[0], dtype=bool)
        for _ in range(4):
            value, slope = _lagrange(x, m, count, edge)
            moving &= slope != 0.0
            edge = np.where(moving, edge - value / slope, edge)
    edge = np.clip(edge, np.minimum(x2, x2 + step), np.maximum(x2, x2 + step))
    single = (count < 2) | (step == 0.0)
    return np.where(single, o[:, 2], _lagrange(x, o, count, np.where(single, x2, edge))[0])


def _lagrange(x, y, count, t):
    """transfer._lagrange per row through its last ``count`` (2 or 3) points."""
    value, slope = np.zeros(t.shape), np.zeros(t.shape)
    for c in (2, 3):
        cols = range(3 - c, 3)
        v, s = np.zeros(t.shape), np.zeros(t.shape)
        for i in cols:
            others = [j for j in cols if j != i]
            denom = np.ones(t.shape)
            for j in others:
                denom = denom * (x[:, i] - x[:, j])
            basis, dbasis = np.ones(t.shape), np.zeros(t.shape)
            for j in others:
                dbasis = dbasis * (t - x[:, j]) + basis
                basis = basis * (t - x[:, j])
            with np.errstate(divide="ignore", invalid="ignore"):
                v, s = v + y[:, i] * basis / denom, s + y[:, i] * dbasis / denom
        value, slope = np.where(count == c, v, value), np.where(count == c, s, slope)
    return value, slope


def _next_probe(a_e, a_w, b_e, b_w, rest, full):
    """The next |EMF| of each lane.  While no outer end is known: 1.25 times
    the zero of the margin's secant from rest through a (between 1.25 and 8
    times a, never past ``full``).  Then regula falsi on the weighted ends,
    or halving where the outer end did not converge (no margin to use)."""
    with np.errstate(divide="ignore", invalid="ignore"):
        out = np.empty_like(a_e)
        open_ = np.isnan(b_e)
        secant = np.where(rest > a_w, a_e * rest / (rest - a_w), np.inf)
        out[open_] = np.minimum(np.clip(1.25 * secant, 1.25 * a_e, 8.0 * a_e), full)[open_]
        falsi = a_e - a_w * (b_e - a_e) / (b_w - a_w)
        plain = ~open_ & np.isfinite(falsi)
        out[plain] = falsi[plain]
        half = ~open_ & ~plain
        out[half] = 0.5 * (a_e[half] + b_e[half])
    return out


def _distortion(held: _HeldRows, rows, vpk, points: int = QUICK_POINTS):
    """(thd, hd2, hd3, short) of rows driven at vpk (V, > 0): the harmonics
    of the ``points``-phase period where it stands (``short`` marks those
    rows), of every phase elsewhere.  points=FFT_POINTS solves every phase
    of every row, as transfer.py does."""
    wave, index = _period_of(points) if points < FFT_POINTS else _period(1.0)
    out, _, active, converged = held.solve(rows, vpk[:, None] * wave)
    spectrum = np.abs(np.fft.rfft(out[:, index], axis=-1))
    thd, hd2, hd3 = _ratios(spectrum, points, converged.all(axis=1))
    if points == FFT_POINTS:
        return thd, hd2, hd3, np.zeros(rows.size, dtype=bool)
    tail = spectrum[:, points // 4 + 1 :].max(axis=1)
    short = active.all(axis=1) & (tail <= _QUICK_TAIL * spectrum[:, 1])
    slow = np.flatnonzero(~short)
    if slow.size:
        wave, index = _period(1.0)
        out, _, _, converged = held.solve(rows[slow], vpk[slow, None] * wave)
        spectrum = np.abs(np.fft.rfft(out[:, index], axis=-1))
        thd[slow], hd2[slow], hd3[slow] = _ratios(spectrum, FFT_POINTS, converged.all(axis=1))
    return thd, hd2, hd3, short


def _period_of(points: int):
    """transfer._period's (distinct unit EMFs, index of each sample) for a
    period of ``points`` phases: the same sin(2πk/points) values, which are
    FFT_POINTS' own at every FFT_POINTS/points-th phase (the scalings by
    powers of two are exact)."""
    quarter = points // 4
    k = np.arange(-quarter, quarter + 1)
    wave = 1.0 * np.sin(2.0 * np.pi * k / points)
    n = np.arange(points)
    folded = np.where(n <= quarter, n, np.where(n < 3 * quarter, points // 2 - n, n - points))
    return wave, folded + quarter


def _ratios(spectrum, points: int, solved):
    """transfer._harmonics on rows of |rfft| of ``points`` samples each; NaN
    where not every sample was ``solved`` (converged): transfer.py takes such
    a period's samples as they are, and what a Newton cut short at MAX_ITER
    left there depends on the batch it ran in, so it is no figure at all."""
    fundamental = spectrum[:, 1]
    zero = fundamental == 0
    with np.errstate(divide="ignore", invalid="ignore"):
        thd = np.sqrt(np.sum(spectrum[:, 2 : points // 2] ** 2, axis=1)) / fundamental
        hd2, hd3 = spectrum[:, 2] / fundamental, spectrum[:, 3] / fundamental
    return tuple(np.where(solved, np.where(zero, 0.0, x), np.nan) for x in (thd, hd2, hd3))
