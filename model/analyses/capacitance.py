"""Device capacitances of the hybrid-π model at the bias point, and a built
stage with them added (Sedra & Smith, and Gray, Hurst, Lewis & Meyer,
fT = gm / (2π(Cπ + Cμ))):
  * Cμ, base–collector, is the ``transistor.cmu`` key;
  * Cπ, base–emitter, is gm/(2π·fT) − Cμ, floored at 0 when the ``ft`` key
    asks for more speed than gm and Cμ allow (the FT-INCONSISTENT warning).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, replace

import numpy as np

from model.circuit.netlist import Capacitor
from model.circuit.topologies import TRANSISTOR, StageCircuit

#: Tag of the device capacitances added to a built stage.
DEVICE = "device"


CPI, CMU = "cpi", "cmu"


@dataclass(frozen=True)
class DeviceCapacitance:
    """Cπ and Cμ (F) at the bias point; ``floored`` when Cπ was raised to 0."""

    c_pi: float
    c_mu: float
    floored: bool


def device_capacitance(gm: float, ft: float, cmu: float) -> DeviceCapacitance:
    """Cπ from gm (S), fT (Hz) and Cμ (F), floored at 0."""
    total = gm / (2.0 * math.pi * ft)
    return DeviceCapacitance(max(total - cmu, 0.0), cmu, total < cmu)


def with_device_capacitance(stage: StageCircuit, caps: DeviceCapacitance, followers: tuple = ()) -> StageCircuit:
    """The stage with Cπ (b–e) and Cμ (b–c) across its transistor, and
    ``followers``' own (transistor name, DeviceCapacitance) across theirs."""
    batch = stage.net.batch
    return replace(stage, net=stage.net.with_elements(*device_capacitors(
        stage, [(TRANSISTOR, np.full(batch, caps.c_pi), np.full(batch, caps.c_mu))]
        + [(name, np.full(batch, c.c_pi), np.full(batch, c.c_mu)) for name, c in followers])))


def device_capacitors(stage: StageCircuit, values) -> tuple:
    """Cπ and Cμ capacitors from (transistor name, Cπ per row, Cμ per row);
    the gain transistor's are named cpi and cmu, a follower's cpi2 and cmu2."""
    out = []
    for k, (name, c_pi, c_mu) in enumerate(values):
        q, suffix = stage.net.element(name), "" if k == 0 else str(k + 1)
        out += [Capacitor(CPI + suffix, q.b, q.e, c_pi, coupling=False, tags=frozenset((DEVICE,))),
                Capacitor(CMU + suffix, q.b, q.c, c_mu, coupling=False, tags=frozenset((DEVICE,)))]
    return tuple(out)
