"""Quiescent dissipation: every resistor, the transistor and the supply."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .solve import OperatingPoint, branch_currents, node_outflows
from .topologies import TRANSISTOR, StageCircuit


@dataclass(frozen=True)
class Dissipation:
    """Quiescent powers in W and the supply current in A, per batch row.

    p_transistor = VCE·IC + VBE·IB (forward sense, so PNP and NPN agree);
    p_resistors maps each resistor's name to I²R.
    """

    p_transistor: np.ndarray
    p_supply: np.ndarray
    i_supply: np.ndarray
    p_resistors: dict


def dissipation(stage: StageCircuit, op: OperatingPoint) -> Dissipation:
    net, v = stage.net, op.voltages
    currents = branch_currents(net, v, op.states)
    p_res = {name: currents[name] ** 2 * net.element(name).r for name in stage.resistors}
    st = op.states[TRANSISTOR]
    vbe, vbc = op.junctions[:, 0, 0], op.junctions[:, 0, 1]
    p_q = (vbe - vbc) * st.ic + vbe * st.ib
    i_supply = node_outflows(net, v, op.states)[stage.supply]
    return Dissipation(p_q, v[stage.supply] * i_supply, i_supply, p_res)
