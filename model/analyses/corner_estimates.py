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
from model.circuit.linearised import small_signal, transfer_impedances
from model.circuit.netlist import GROUND, Capacitor
from model.circuit.newton import OperatingPoint
from model.circuit.plan import MIDBAND, plan_for
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
    out = []
    for cap in stage.net.of_type(Capacitor):
        if cap.coupling:
            r = _resistance_across(stage.net.drop(cap.name), op, cap.a, cap.b)
            out.append(PartEstimate(cap.name, r, float(cap.c[0])))
    return tuple(out)


def open_circuit_parts(stage: StageCircuit, op: OperatingPoint, z=None) -> tuple:
    """Open-circuit time constant of each device and load capacitance."""
    z = z or transfer_impedances(stage.net, op)
    return tuple(
        PartEstimate(cap.name, _resistance_across(stage.net, op, cap.a, cap.b, z), float(cap.c[0]))
        for cap in stage.net.of_type(Capacitor) if not cap.coupling
    )


def miller_estimate(stage: StageCircuit, op: OperatingPoint, device: DeviceCapacitance, z=None) -> float:
    """f_high (Hz) from the input pole alone, each device capacitance moved
    to the base by the Miller theorem: C = Cπ(1 − ve/vb) + Cμ(1 − vc/vb), with
    the midband node gains, against the resistance from base to ground."""
    z = z or transfer_impedances(stage.net, op)
    drive = small_signal(stage.net, op, excite={EMF: 1.0})
    vb = drive[stage.base][0]
    c = (device.c_pi * (1.0 - drive[stage.emitter][0] / vb)
         + device.c_mu * (1.0 - drive[stage.collector][0] / vb)).real
    r_base = float(z(stage.base, stage.base)[0])
    if not r_base * c > 0:
        return math.inf
    # A base held by a near-zero resistance (bias.r2 = 1e-300 Ω is valid) has
    # no input pole to speak of: the quotient overflows to inf, which is right.
    with np.errstate(over="ignore"):
        return float(1.0 / (2.0 * math.pi * r_base * c))
