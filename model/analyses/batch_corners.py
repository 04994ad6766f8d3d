"""The −3 dB corners of many designs at once: the batched counterpart of
:func:`model.analyses.corner_search.frequency_response`'s f_low, f_high and
gain at the signal frequency, same conventions (f_low 0 when no crossing
lies above 1 µHz, f_high inf when none lies below 10 THz, both NaN without a
passband).

corner_search.py sweeps a 20-per-decade grid between the estimated corners,
widens it until both crossings are inside, and refines each crossing's cell
twice on 32-point grids before interpolating dB against log f: its answer
lies inside a final bracket 1/20/31² ≈ 5.2e-5 decade wide around the
crossing.  Here each row is probed at a passband point and on either side of
its two estimated corners (the same short- and open-circuit time constants,
:mod:`model.analyses.corner_estimates`), and each crossing is narrowed by
Illinois regula falsi on log10(|av|⁻²·av_mid² − 1), which is linear in log f
for a one-pole roll-off, to a bracket of _WIDTH decade, ending with the same
linear interpolation in dB.  With one crossing in corner_search's cell both
brackets hold it, so the two answers differ by at most 5.2e-5 + _WIDTH
decade, 1.3e-4 relative.  That the crossing bracketed is corner_search's
(the first one out from the passband on its grid) assumes the gain does not
dip below −3 dB and recover between the passband point and the bracket;
such a dip was only met at the extremes of the rule space, near 1e12 Hz,
where the solve itself is noisy at the 1e-3 dB level.  A row whose passband point is not clearly inside
the passband (within 0.29·|av_mid| of the midband gain, so that the point
nearest it is inside as well), or whose search does not settle, is handed to
frequency_response itself.  Every round is one complex solve of every row
still searching, on the network assembled once (FrequencySweep).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, replace

import numpy as np

from model.analyses.capacitance import device_capacitance, device_capacitors
from model.analyses.corner_search import _HALF_POWER_DB, _HIGHEST_DECADE, _LOWEST_DECADE, frequency_response
from model.circuit.dense import solve_batched
from model.circuit.linearised import FrequencySweep, small_signal
from model.circuit.netlist import GROUND, Capacitor
from model.circuit.newton import OperatingPoint
from model.circuit.plan import MIDBAND, plan_for
from model.circuit.topologies import EMF, FOLLOWER, TRANSISTOR, StageCircuit

#: Width (decades) of the final bracket around each crossing.
_WIDTH = 1e-6
#: How far (decades) either side of an estimated corner the first probes go.
_PROBE = 0.3
_MAX_ROUNDS = 40
#: How far (decades) each round looks outward while a crossing is not bracketed.
_GROW = 2.0
#: A passband point must be this close to the midband gain (fraction of |av|):
#: then every point nearer to it has |av| above 1/√2 of midband too.
_NEAR_MIDBAND = 1.0 - 10.0 ** (_HALF_POWER_DB / 20.0)


@dataclass(frozen=True)
class BatchResponse:
    """f_low, f_high (Hz) and |av_source| at the signal frequency (V/V) per row."""

    f_low: np.ndarray
    f_high: np.ndarray
    gain_at_freq: np.ndarray


def with_capacitances(stage: StageCircuit, gm, ft, cmu, gm2=None) -> StageCircuit:
    """The stage with every row's Cπ = gm/(2π·fT) − Cμ (floored at 0) and Cμ
    across each transistor (gm2: the follower's gm, for a stage with one)."""
    values = [(TRANSISTOR, np.maximum(gm / (2.0 * np.pi * ft) - cmu, 0.0), cmu)]
    if gm2 is not None:
        values.append((FOLLOWER, np.maximum(gm2 / (2.0 * np.pi * ft) - cmu, 0.0), cmu))
    return replace(stage, net=stage.net.with_elements(*device_capacitors(stage, values)))


def response_many(stage: StageCircuit, op: OperatingPoint, gm, ft, cmu, midband, signal_freq,
                  gm2=None) -> BatchResponse:
    """The corners of every row of a built stage at its converged ``op``, with
    Cπ = gm/(2π·fT) − Cμ (floored at 0) and Cμ across the transistor.
    gm (S), ft (Hz), cmu (F), midband av_source (V/V), signal_freq (Hz) per
    row; ``gm2`` (S) the follower's, for a stage with one."""
    full = with_capacitances(stage, gm, ft, cmu, gm2)
    est_low, est_high = _estimates(full, op)
    at = _Response(full, op)
    reference = np.abs(midband)
    lo = np.clip(np.floor(np.log10(est_low)) - 1, _LOWEST_DECADE, _HIGHEST_DECADE - 1)
    hi = np.minimum(np.maximum(np.ceil(np.log10(est_high)) + 1, lo + 1), _HIGHEST_DECADE)
    x_low, x_high = np.log10(est_low), np.log10(np.minimum(est_high, 10.0**_HIGHEST_DECADE))
    centre = np.clip(0.5 * (np.maximum(x_low, lo) + np.minimum(x_high, hi)), lo, hi)
    # One solve: the signal frequency, the passband point and two probes a
    # side (decades: the nearer to the passband first).
    probes = np.stack([centre, x_low + _PROBE, x_low - _PROBE, x_high - _PROBE, x_high + _PROBE], axis=1)
    probes[:, 1:] = np.clip(probes[:, 1:], _LOWEST_DECADE, _HIGHEST_DECADE)
    g = at(np.arange(stage.net.batch), np.column_stack([signal_freq, 10.0**probes]))
    gain_at_freq = np.abs(g[:, 0])
    with np.errstate(invalid="ignore"):
        passband = (reference > 0) & (np.abs(g[:, 1] - midband) <= _NEAR_MIDBAND * reference)
    rows = np.flatnonzero(passband)
    f_low, f_high = np.full(stage.net.batch, np.nan), np.full(stage.net.batch, np.nan)
    settled = np.zeros(stage.net.batch, dtype=bool)
    if rows.size:
        lanes = _Lanes(rows, probes[rows], np.abs(g[rows, 1:]), reference[rows])
        corner, ok = lanes.search(at)
        f_low[rows], f_high[rows] = corner[:, 0], corner[:, 1]
        settled[rows] = ok
    for r in np.flatnonzero(~settled):
        followers = () if gm2 is None else (
            (FOLLOWER, device_capacitance(float(gm2[r]), float(ft[r]), float(cmu[r]))),)
        one = frequency_response(replace(stage, net=stage.net.take(np.array([r]))), op.take(np.array([r])),
                                 device_capacitance(float(gm[r]), float(ft[r]), float(cmu[r])),
                                 float(midband[r]), float(signal_freq[r]), followers=followers)
        f_low[r], f_high[r], gain_at_freq[r] = one.f_low, one.f_high, abs(one.gain_at_freq)
    return BatchResponse(f_low, f_high, gain_at_freq)


def _estimates(stage: StageCircuit, op: OperatingPoint):
    """(f_low, f_high) estimates (Hz) per row, as corner_search._search starts
    from them: the sum of the short-circuit corners (1 µHz when there are
    none) and 1/(2π Σ τ) over the open-circuit time constants (capped at
    10 THz)."""
    batch = stage.net.batch
    low = np.zeros(batch)
    tau = np.zeros(batch)
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        for cap in stage.net.of_type(Capacitor):
            if cap.coupling:
                t = _resistance_across(stage.net.drop(cap.name), op, cap.a, cap.b) * cap.c
                corner = np.where(t > 0, 1.0 / (2.0 * math.pi * t), np.inf)
                low = low + np.where(np.isfinite(corner), corner, 0.0)
            else:
                tau = tau + _resistance_across(stage.net, op, cap.a, cap.b) * cap.c
        high = np.where(tau > 0, 1.0 / (2.0 * math.pi * tau), np.inf)
    low = np.where(low > 0, low, 10.0**_LOWEST_DECADE)
    return low, np.minimum(high, 10.0**_HIGHEST_DECADE)


def _resistance_across(net, op, a: str, b: str):
    """Midband resistance (Ω) between nodes a and b with every source at zero,
    per row; infinite where a node has no conductive path (corner_estimates)."""
    present = {*net.nodes, GROUND}
    if a not in present or b not in present or {a, b} & plan_for(net, MIDBAND).floating:
        return np.full(net.batch, np.inf)
    v = small_signal(net, op, inject={a: 1.0, b: -1.0})
    return np.abs(v[a] - v[b])


class _Response:
    """av_source (complex V/V) of chosen rows, each at its own frequencies:
    FrequencySweep's G and C assembled once, solved as G + jωC per point."""

    def __init__(self, stage: StageCircuit, op: OperatingPoint):
        self.sweep = FrequencySweep(stage.net, op, excite={EMF: 1.0})
        plan = self.sweep.plan
        i = plan.nodes.index(stage.output)
        self.pick, self.offset = plan.node_pick[:, i], self.sweep.v @ plan.node_coef[:, i]

    def __call__(self, rows, freq):
        """Rows ``rows`` (k,) at frequencies ``freq`` (k, m) Hz → (k, m)."""
        s = self.sweep
        k, m = freq.shape
        n = s.plan.n
        jw = (1j * (2.0 * np.pi * freq))[:, :, None]
        a = s.a_g[rows] + jw[..., None] * s.a_c[rows]
        b = s.b_g[rows] + jw * s.b_c[rows]
        x = solve_batched(a.reshape(-1, n, n), b.reshape(-1, n))
        return (x @ self.pick).reshape(k, m) + self.offset[rows, None]


class _Lanes:
    """Both crossings of every row as lanes (row, side): side 0 the lower
    corner (searched downward from the passband point), side 1 the upper."""

    def __init__(self, rows, probes, magnitude, reference):
        """probes (rows, 5) decades and their |av| (V/V); reference |av_mid|."""
        self.rows, self.reference = np.repeat(rows, 2), np.repeat(reference, 2)
        self.down = np.tile([True, False], rows.size)
        self.limit = np.where(self.down, _LOWEST_DECADE, _HIGHEST_DECADE).astype(float)
        f = self._f(magnitude, reference[:, None])
        # Each lane starts inside at the passband point (column 0); then the
        # probes outward of it, nearer one first (columns 1, 2 low; 3, 4 high).
        self.a, self.fa, self.ma = (np.repeat(q[:, 0], 2) for q in (probes, f, magnitude))
        self.b, self.fb, self.mb = (np.full(self.a.size, np.nan) for _ in range(3))
        near = (q[:, [1, 3]].ravel() for q in (probes, f, magnitude))
        far = (q[:, [2, 4]].ravel() for q in (probes, f, magnitude))
        for x, fx, mx in (near, far):
            self.take(np.arange(x.size), x, fx, mx)

    def _f(self, magnitude, reference):
        """log10(|av_mid|²/|av|² − 1): < 0 inside the passband, 0 at −3 dB."""
        with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
            return np.log10(np.maximum((reference / np.maximum(magnitude, 1e-300)) ** 2 - 1.0, 1e-12))

    def outward(self, x, of):
        """Whether points x of lanes ``of`` lie past a, away from the passband."""
        return np.where(self.down[of], x < self.a[of], x > self.a[of])

    def take(self, lanes, x, fx, mx):
        """Probes x (decades) with f and |av|, nearer ones first, into the
        lanes' brackets: until an outside point is found, an inside probe
        outward of a moves a there and an outside one becomes b."""
        usable = self.outward(x, lanes) & np.isnan(self.b[lanes])
        inside, outside = usable & (fx <= 0.0), usable & (fx > 0.0)
        t = lanes[inside]
        self.a[t], self.fa[t], self.ma[t] = x[inside], fx[inside], mx[inside]
        t = lanes[outside]
        self.b[t], self.fb[t], self.mb[t] = x[outside], fx[outside], mx[outside]

    def search(self, at):
        """(corners (rows, 2) Hz, settled per row)."""
        lanes = self.rows.size
        corner = np.full(lanes, np.nan)
        done = np.zeros(lanes, dtype=bool)
        kept = np.zeros(lanes, dtype=np.int8)
        wa, wb = self.fa.copy(), self.fb.copy()
        for _ in range(_MAX_ROUNDS):
            # A lane with no outside point at its search limit has no corner.
            beyond = ~done & np.isnan(self.b) & (self.a == self.limit)
            corner[beyond] = np.where(self.down[beyond], 0.0, np.inf)
            done |= beyond
            narrow = ~done & (np.abs(self.b - self.a) <= _WIDTH)
            corner[narrow] = 10.0 ** self._interpolate(np.flatnonzero(narrow))
            done |= narrow
            todo = np.flatnonzero(~done)
            if todo.size == 0:
                break
            x = self._next(todo, wa[todo], wb[todo])
            mx = np.abs(at(self.rows[todo], 10.0 ** x[:, None])[:, 0])
            fx = self._f(mx, self.reference[todo])
            was_open = np.isnan(self.b[todo])
            inside = fx <= 0.0
            t, ti = todo[inside], inside
            wb[t] = np.where((kept[t] == -1) & ~was_open[ti], 0.5 * wb[t], wb[t])
            kept[t] = np.where(was_open[ti], 0, -1)
            self.a[t], self.fa[t], self.ma[t], wa[t] = x[ti], fx[ti], mx[ti], fx[ti]
            t, to = todo[~inside], ~inside
            wa[t] = np.where(kept[t] == 1, 0.5 * wa[t], wa[t])
            kept[t] = 1
            self.b[t], self.fb[t], self.mb[t], wb[t] = x[to], fx[to], mx[to], fx[to]
        settled = done.reshape(-1, 2).all(axis=1)
        return corner.reshape(-1, 2), settled

    def _next(self, todo, wa, wb):
        """Next point (decades) of each lane: _GROW decades past a while no
        outside point is known (never past the limit); regula falsi on the
        weighted ends otherwise, kept _WIDTH/4 inside the bracket so the
        bracket closes once the iterate has settled."""
        a, b = self.a[todo], self.b[todo]
        down, limit = self.down[todo], self.limit[todo]
        grow = np.where(down, np.maximum(a - _GROW, limit), np.minimum(a + _GROW, limit))
        with np.errstate(divide="ignore", invalid="ignore"):
            falsi = a - wa * (b - a) / (wb - wa)
        lo, hi = np.minimum(a, b) + _WIDTH / 4, np.maximum(a, b) - _WIDTH / 4
        falsi = np.where(np.isfinite(falsi), np.clip(falsi, lo, hi), 0.5 * (a + b))
        return np.where(np.isnan(b), grow, falsi)

    def _interpolate(self, lanes):
        """corner_search._interpolate on the final brackets: linear in dB
        against log f (as decades; 10** is taken by the caller)."""
        ref = self.reference[lanes]
        da = 20.0 * np.log10(np.maximum(self.ma[lanes], 1e-300) / ref) - _HALF_POWER_DB
        db = 20.0 * np.log10(np.maximum(self.mb[lanes], 1e-300) / ref) - _HALF_POWER_DB
        a, b = self.a[lanes], self.b[lanes]
        with np.errstate(divide="ignore", invalid="ignore"):
            t = da / (da - db)
        return np.where(da == db, 0.5 * (a + b), a + t * (b - a))
