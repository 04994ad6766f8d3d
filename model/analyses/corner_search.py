"""Frequency response: the linearised stage swept over frequency with every
capacitor in place, and its exact −3 dB corners.

The corners are where |av_source| falls to 1/√2 of its midband value, found
on the computed response: a log grid brackets each crossing, two finer grids
narrow it, and the last step interpolates dB against log frequency.  The
per-part estimates that start the search are in :mod:`corner_estimates`.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from model.analyses.capacitance import (
    DeviceCapacitance,
    with_device_capacitance,
)
from model.analyses.corner_estimates import (
    PartEstimate,
    high_estimate,
    low_estimate,
    miller_estimate,
    open_circuit_parts,
    short_circuit_parts,
)
from model.circuit.linearised import FrequencySweep, transfer_impedances
from model.circuit.newton import OperatingPoint
from model.circuit.topologies import EMF, StageCircuit

POINTS_PER_DECADE = 20


#: Points of each refining grid inside a bracket; two rounds narrow a
#: 1/20-decade bracket to about 5e-5 decade before the final interpolation.
#: The search grid is always POINTS_PER_DECADE dense.
_REFINE = 32


#: Exponents 0 … 1 of a refining grid's geometric steps.
_STEPS = np.linspace(0.0, 1.0, _REFINE)


_HALF_POWER_DB = -10.0 * math.log10(2.0)


#: Widest the search goes: the corners of any audio-to-RF stage lie inside.
_LOWEST_DECADE, _HIGHEST_DECADE = -6, 13


_WIDEN = 3


@dataclass(frozen=True)
class Response:
    """The response of av_source = v_load / v_emf over frequency.

    freq (Hz) and gain (complex V/V) are the sweep; ``midband`` is av_source
    at midband (V/V, signed).  f_low and f_high are the exact −3 dB points
    (Hz): f_low 0 if none lies above 1 µHz (always so when no coupling or
    bypass capacitor is fitted: the stage is flat to DC), f_high inf if none
    below 10 THz, both NaN if the gain never comes within 3 dB of midband.
    Capacitors not fitted are not in the netlist, so they have no estimate.
    """

    freq: np.ndarray
    gain: np.ndarray
    midband: float
    f_low: float
    f_high: float
    low_parts: tuple
    high_parts: tuple
    f_high_miller: float
    signal_freq: float
    gain_at_freq: complex
    device: DeviceCapacitance

    @property
    def bandwidth(self) -> float:
        return self.f_high - self.f_low

    @property
    def f_low_estimate(self) -> float:
        """Sum of the short-circuit corners (Hz), the usual estimate of f_low."""
        return low_estimate(self.low_parts)

    @property
    def f_high_estimate(self) -> float:
        """1/(2π Σ τ) over the open-circuit time constants (Hz)."""
        return high_estimate(self.high_parts)

    @property
    def low_by(self) -> PartEstimate | None:
        """The coupling or bypass capacitor whose corner alone is highest."""
        return max(self.low_parts, key=lambda p: p.freq, default=None)

    @property
    def high_by(self) -> PartEstimate | None:
        """The device or load capacitance with the largest time constant."""
        return max(self.high_parts, key=lambda p: p.tau, default=None)

    def magnitude_db(self) -> np.ndarray:
        """20·log10|av_source| at each sweep frequency (dB)."""
        with np.errstate(divide="ignore"):
            return 20.0 * np.log10(np.abs(self.gain))

    def phase_deg(self) -> np.ndarray:
        """Phase (°), continuous along the sweep; near 180° at midband for an
        inverting stage and near 0° for a follower."""
        return _phase(self.gain, self.midband)

    @property
    def phase_at_freq(self) -> float:
        """Phase at the signal frequency (°), on the same branch as phase_deg()."""
        raw = math.degrees(np.angle(self.gain_at_freq))
        curve = float(np.interp(math.log10(self.signal_freq), np.log10(self.freq), self.phase_deg()))
        return raw + 360.0 * round((curve - raw) / 360.0)


def frequency_response(stage: StageCircuit, op: OperatingPoint, device: DeviceCapacitance, midband_gain: float,
             signal_freq: float, *, per_decade: int = POINTS_PER_DECADE, points: int | None = None,
             followers: tuple = ()) -> Response:
    """The response of a single-design stage with ``device`` capacitances
    across its transistor.

    ``midband_gain`` is av_source at midband (V/V); ``signal_freq`` (Hz) the
    frequency of ``gain_at_freq``.  The sweep spans whole decades from one
    below the lower corner to one above the upper, ``per_decade`` points a
    decade, or ``points`` points in all when that is given.  ``followers``:
    (transistor name, DeviceCapacitance) of each transistor after the first.
    """
    stage = with_device_capacitance(stage, device, followers)
    z = transfer_impedances(stage.net, op)
    low, high = short_circuit_parts(stage, op), open_circuit_parts(stage, op, z)
    # The corners are searched on a grid of fixed density, so they do not
    # depend on how densely the caller wants the sweep it keeps.
    at = _sweeper(stage, op)
    freq, gain, lo, hi, (centre, below, above) = _search(at, midband_gain, low, high)
    f_low, f_high, at_signal = _corners(at, freq, below, above, abs(midband_gain), signal_freq)
    if centre is None:
        f_low = f_high = math.nan
    # The sweep kept spans whole decades from one below the exact f_low to one
    # above the exact f_high, and always the signal frequency.
    want_lo = math.floor(math.log10(f_low)) - 1 if math.isfinite(f_low) and f_low > 0 else lo
    if not low:
        # No coupling or bypass capacitor is fitted: flat to DC (f_low = 0),
        # and two decades below the signal show that as well as ten would.
        want_lo = math.floor(math.log10(signal_freq)) - 2
    want_hi = math.ceil(math.log10(f_high)) + 1 if math.isfinite(f_high) else hi
    want_lo = max(min(want_lo, math.floor(math.log10(signal_freq))), _LOWEST_DECADE)
    want_hi = min(max(want_hi, math.ceil(math.log10(signal_freq)), want_lo + 1), _HIGHEST_DECADE)
    if (want_lo, want_hi, per_decade, points) != (lo, hi, POINTS_PER_DECADE, None):
        freq = _grid(want_lo, want_hi, per_decade, points)
        gain = at(freq)
    return Response(freq=freq, gain=gain, midband=midband_gain, f_low=f_low, f_high=f_high,
                    low_parts=low, high_parts=high, f_high_miller=miller_estimate(stage, op, device, z),
                    signal_freq=signal_freq, gain_at_freq=at_signal, device=device)


def _search(at, midband_gain, low, high):
    """Sweep whole decades around the estimated corners, widening a side
    whose crossing is not inside yet.  Returns (freq, gain, lo, hi, brackets)."""
    est_low = low_estimate(low) or 10.0 ** _LOWEST_DECADE
    est_high = min(high_estimate(high), 10.0 ** _HIGHEST_DECADE)
    # A valid but tiny coupling capacitor (1e-20 F) puts its estimate past the
    # highest decade: start the search one decade below it, never above.
    lo = min(max(math.floor(math.log10(est_low)) - 1, _LOWEST_DECADE), _HIGHEST_DECADE - 1)
    hi = min(max(math.ceil(math.log10(est_high)) + 1, lo + 1), _HIGHEST_DECADE)
    while True:
        freq = _grid(lo, hi, POINTS_PER_DECADE, None)
        gain = at(freq)
        centre, below, above = _brackets(gain, midband_gain)
        wider_lo = below is None and centre is not None and lo > _LOWEST_DECADE
        wider_hi = above is None and centre is not None and hi < _HIGHEST_DECADE
        if not (wider_lo or wider_hi):
            return freq, gain, lo, hi, (centre, below, above)
        lo = max(lo - _WIDEN, _LOWEST_DECADE) if wider_lo else lo
        hi = min(hi + _WIDEN, _HIGHEST_DECADE) if wider_hi else hi


def _grid(lo: int, hi: int, per_decade: int, points: int | None) -> np.ndarray:
    """Log-spaced frequencies (Hz) over decades lo to hi: per_decade a decade,
    or ``points`` in all when given."""
    count = points if points else (hi - lo) * per_decade + 1
    return np.logspace(lo, hi, count)


def sweep(stage: StageCircuit, op: OperatingPoint, freq: np.ndarray) -> np.ndarray:
    """av_source (complex V/V) at each frequency (Hz) of a single-design stage:
    the load voltage for a 1 V EMF, with every capacitor the netlist holds."""
    return _sweeper(stage, op)(freq)


def _sweeper(stage: StageCircuit, op: OperatingPoint):
    """:func:`sweep` as a function of the frequencies alone (Hz), the
    network assembled once for every call."""
    solver = FrequencySweep(stage.net, op, excite={EMF: 1.0})
    return lambda freq: solver.node(stage.output, 2.0 * np.pi * np.asarray(freq, dtype=float))[0]


def _brackets(gain: np.ndarray, midband_gain: float):
    """(centre, below, above): the grid index nearest the midband gain, and the
    index pairs around the half-power crossings either side of it (None if none).

    The centre is not the peak: a follower into a capacitive load peaks near
    its upper corner, far from midband.
    """
    reference = abs(midband_gain)
    if not reference > 0:
        return None, None, None
    magnitude = np.abs(gain)
    centre = int(np.argmin(np.abs(gain - midband_gain)))
    inside = magnitude >= reference * 10.0 ** (_HALF_POWER_DB / 20.0)
    if not inside[centre]:
        return None, None, None
    out_below = np.flatnonzero(~inside[:centre])
    out_above = np.flatnonzero(~inside[centre:])
    below = (int(out_below[-1]), int(out_below[-1]) + 1) if out_below.size else None
    above = (centre + int(out_above[0]) - 1, centre + int(out_above[0])) if out_above.size else None
    return centre, below, above


def _corners(at, freq, below, above, reference, signal_freq):
    """Refine both crossings on finer grids, all in one solve per round; the
    first round also evaluates the signal frequency."""
    spans = [(freq[b[0]], freq[b[1]]) for b in (below, above) if b is not None]
    at_signal = None
    for round_ in range(2):
        grids = [_geometric(span[0], span[1]) if math.isfinite(span[0]) else np.full(_REFINE, 1.0)
                 for span in spans]
        extra = [np.array([signal_freq])] if round_ == 0 else []
        f = np.concatenate(grids + extra) if grids or extra else np.zeros(0)
        g = at(f)
        if round_ == 0:
            at_signal = complex(g[-1])
        mags = [np.abs(g[k * _REFINE:(k + 1) * _REFINE]) for k in range(len(grids))]
        spans = [_narrow(grid, m, reference) for grid, m in zip(grids, mags)]
    found = iter(_interpolate(s, reference) for s in spans)
    f_low = next(found) if below is not None else 0.0
    f_high = next(found) if above is not None else math.inf
    return f_low, f_high, at_signal


def _geometric(a: float, b: float) -> np.ndarray:
    """_REFINE frequencies (Hz) in geometric progression from a to b, ends
    exact (np.geomspace's checks cost more than the arithmetic here)."""
    out = a * (b / a) ** _STEPS
    out[0], out[-1] = a, b
    return out


def _narrow(grid, magnitude, reference):
    """The adjacent grid pair that straddles the crossing, with their distances
    from −3 dB (dB); all NaN if the finer grid finds no crossing at all."""
    db = 20.0 * np.log10(np.maximum(magnitude, 1e-300) / reference) - _HALF_POWER_DB
    changes = np.flatnonzero(np.diff(np.sign(db)) != 0)
    if changes.size == 0:
        return math.nan, math.nan, math.nan, math.nan
    k = int(changes[0])
    return grid[k], grid[k + 1], db[k], db[k + 1]


def _interpolate(span, reference) -> float:
    """The crossing (Hz), linear in dB against log frequency inside ``span``."""
    a, b, *rest = span
    if not math.isfinite(a):
        return math.nan
    if rest[0] == rest[1]:
        return float(math.sqrt(a * b))
    da, db = rest
    t = da / (da - db)
    return float(10.0 ** (math.log10(a) + t * (math.log10(b) - math.log10(a))))


def _phase(gain, midband_gain) -> np.ndarray:
    """Unwrapped phase (°), on the branch that puts the point nearest midband
    closest to 180° for an inverting stage and 0° for a follower."""
    if gain.size == 0:
        return np.zeros(0)
    phase = np.degrees(np.unwrap(np.angle(gain)))
    ref = phase[int(np.argmin(np.abs(gain - midband_gain)))]
    if not np.isfinite(ref):  # a degenerate sweep (a 1e-300 Ω source): no branch to choose
        return phase
    target = 180.0 if midband_gain < 0 else 0.0
    return phase + 360.0 * round((target - ref) / 360.0)
