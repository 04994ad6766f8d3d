"""Per-capacitor time constants that say which part sets each corner:
short-circuit time constants for the coupling and bypass capacitors (f_low),
open-circuit ones for the device and load capacitances (f_high), and the
Miller estimate of the input pole.  Each resistance a part sees is a linear
solve with a test current across it, not a topology formula.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from model.analyses.capacitance import DeviceCapacitance
from model.circuit.linearised import impedance_matrix, small_signal, transfer_impedances
from model.circuit.netlist import GROUND, Capacitor
from model.circuit.newton import OperatingPoint
from model.circuit.plan import DC, MIDBAND, plan_for
from model.circuit.topologies import EMF, StageCircuit


@dataclass(frozen=True)
class PartEstimate:
    """One capacitor's time constant: the resistance it sees (Ω) times its C (F).

    For a coupling or bypass capacitor the others are shorted and the device
    and load capacitances open (short-circuit time constant); for a device or
    load capacitance the others are open and the coupling capacitors shorted
    (open-circuit time constant).  ``freq`` is 1/(2πτ), the corner that part
    would set alone (Hz).
    """

    part: str
    resistance: float
    capacitance: float

    @property
    def tau(self) -> float:
        """The time constant R·C (s)."""
        return self.resistance * self.capacitance

    @property
    def freq(self) -> float:
        return 1.0 / (2.0 * math.pi * self.tau) if self.tau > 0 else math.inf


def low_estimate(parts) -> float:
    """f_low estimate (Hz): the sum of the short-circuit corners."""
    return sum((p.freq for p in parts if math.isfinite(p.freq)), 0.0)


def high_estimate(parts) -> float:
    """f_high estimate (Hz): 1/(2π Σ τ) over the open-circuit time constants."""
    total = sum(p.tau for p in parts)
    return 1.0 / (2.0 * math.pi * total) if total > 0 else math.inf


def _resistance_across(net, op, a: str, b: str, z=None) -> float:
    """Midband resistance (Ω) between nodes a and b with every source at zero;
    infinite when one of them has no conductive path at all (or, with the
    part removed, is gone from the circuit).  ``z`` reuses transfer impedances
    already solved for ``net``."""
    present = {*net.nodes, GROUND}
    if a not in present or b not in present or {a, b} & plan_for(net, MIDBAND).floating:
        return math.inf
    z = z or transfer_impedances(net, op)
    return abs(float((z(a, a) - z(a, b) - z(b, a) + z(b, b))[0]))


def short_circuit_parts(stage: StageCircuit, op: OperatingPoint) -> tuple:
    """Short-circuit time constant of each coupling and bypass capacitor."""
    caps = [cap for cap in stage.net.of_type(Capacitor) if cap.coupling]
    shared = _shorted_resistances(stage.net, op, caps)
    out = []
    for cap, r in zip(caps, shared):
        if r is None:
            r = _resistance_across(stage.net.drop(cap.name), op, cap.a, cap.b)
        out.append(PartEstimate(cap.name, r, float(cap.c[0])))
    return tuple(out)


#: A resistance that keeps less than this fraction of what the capacitor saw
#: with every capacitor open is solved directly instead: the correction's
#: relative error is then at most a few float epsilons over this ratio.
_CANCELLATION = 1e-3


def _shorted_resistances(net, op: OperatingPoint, caps) -> list:
    """The resistance (Ω) across each coupling capacitor of a single design
    with the others shorted, from one inversion of the network with every
    capacitor open: each short is an infinite conductance, a rank-one
    (Woodbury) correction, so R = z_kk − xᵀS⁻¹y, with S the transfer
    impedances between the shorted ports, y theirs for a current across
    port k and x port k's for a current across each of them (Z is not
    symmetric: the transistor's gm is not reciprocal).  None for a capacitor
    this cannot answer with confidence (a node with no DC path to a known
    one, a short that does nothing or cancels most of z_kk): it is solved
    directly."""
    plan = plan_for(net, DC)
    if net.batch != 1 or plan.floating or not caps:
        return [None] * len(caps)
    _, z = impedance_matrix(net, op, DC)
    z = z[0].tolist()
    ports = [(plan.index.get(c.a, -1), plan.index.get(c.b, -1)) for c in caps]

    def entry(i, j):
        return z[i][j] if i >= 0 and j >= 0 else 0.0

    def across(p, q):
        return entry(p[0], q[0]) - entry(p[0], q[1]) - entry(p[1], q[0]) + entry(p[1], q[1])

    zp = [[across(p, q) for q in ports] for p in ports]
    out = []
    for k in range(len(caps)):
        others = [j for j in range(len(caps)) if j != k]
        s = [[zp[i][j] for j in others] for i in others]
        coef = _small_solve(s, [zp[i][k] for i in others])
        r = zp[k][k] - sum(zp[k][i] * c for i, c in zip(others, coef)) if coef is not None else math.nan
        ok = all(zp[j][j] > 0.0 for j in others) and math.isfinite(r) and r >= _CANCELLATION * abs(zp[k][k])
        out.append(abs(r) if ok else None)
    return out


def _small_solve(s, y):
    """x with s·x = y for a small dense system of Python floats (Gaussian
    elimination with partial pivoting); None if it is singular."""
    n = len(y)
    m = [list(row) + [b] for row, b in zip(s, y)]
    for k in range(n):
        p = max(range(k, n), key=lambda i: abs(m[i][k]))
        if m[p][k] == 0.0:
            return None
        m[k], m[p] = m[p], m[k]
        for i in range(k + 1, n):
            f = m[i][k] / m[k][k]
            for j in range(k, n + 1):
                m[i][j] -= f * m[k][j]
    x = [0.0] * n
    for k in range(n - 1, -1, -1):
        x[k] = (m[k][n] - sum(m[k][j] * x[j] for j in range(k + 1, n))) / m[k][k]
    return x


def open_circuit_parts(stage: StageCircuit, op: OperatingPoint, z=None) -> tuple:
    """Open-circuit time constant of each device and load capacitance."""
    z = z or transfer_impedances(stage.net, op)
    return tuple(
        PartEstimate(cap.name, _resistance_across(stage.net, op, cap.a, cap.b, z), float(cap.c[0]))
        for cap in stage.net.of_type(Capacitor) if not cap.coupling
    )


def miller_estimate(stage: StageCircuit, op: OperatingPoint, device: DeviceCapacitance, z=None) -> float:
    """f_high (Hz) from the input pole alone: each device capacitance of the
    gain transistor that touches its input node x (the base; a common base's
    emitter) moved to x by the Miller theorem, C(1 − vy/vx) for a capacitance
    from x to y, with the midband node gains, against the resistance from x
    to ground.  For a common emitter: Cπ(1 − ve/vb) + Cμ(1 − vc/vb)."""
    z = z or transfer_impedances(stage.net, op)
    drive = small_signal(stage.net, op, excite={EMF: 1.0})
    x = stage.device_input
    vx = drive[x][0]
    if vx == 0:
        return math.inf
    c = 0.0
    for value, (a, b) in ((device.c_pi, (stage.base, stage.emitter)), (device.c_mu, (stage.base, stage.collector))):
        if x in (a, b):
            c += value * (1.0 - drive[b if x == a else a][0] / vx)
    c = c.real if isinstance(c, complex) else float(np.real(c))
    r_base = float(z(x, x)[0])
    if not r_base * c > 0:
        return math.inf
    # A base held by a near-zero resistance (bias.r2 = 1e-300 Ω is valid) has
    # no input pole to speak of: the quotient overflows to inf, which is right.
    with np.errstate(over="ignore"):
        return float(1.0 / (2.0 * math.pi * r_base * c))
