"""Quiescent dissipation: every resistor, the transistor and the supply."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from model.circuit.netlist import GROUND, Bjt, Netlist, Resistor
from model.circuit.newton import OperatingPoint
from model.circuit.topologies import TRANSISTOR, StageCircuit


@dataclass(frozen=True)
class Dissipation:
    """Quiescent powers in W and the supply current in A, per batch row.

    p_transistor = VCE·IC + VBE·IB (forward sense, so PNP and NPN agree) of
    the gain transistor, ``p_transistors`` the same for each transistor by
    name; p_supply is what every supply delivers, i_supply the current from
    the positive one; p_resistors maps each resistor's name to I²R.
    """

    p_transistor: np.ndarray
    p_supply: np.ndarray
    i_supply: np.ndarray
    p_resistors: dict
    p_transistors: dict


def dissipation(stage: StageCircuit, op: OperatingPoint) -> Dissipation:
    net, v = stage.net, op.voltages
    currents = branch_currents(net, v, op.states)
    p_res = {name: currents[name] ** 2 * net.element(name).r for name in stage.resistors}
    p_q = {}
    for k, name in enumerate(stage.transistors):
        st, vbe, vbc = op.states[name], op.junctions[:, k, 0], op.junctions[:, k, 1]
        p_q[name] = (vbe - vbc) * st.ic + vbe * st.ib
    out = node_outflows(net, v, op.states, currents)
    i_supply = out[stage.supply]
    p_supply = sum(v[s] * out[s] for s in stage.supplies)
    return Dissipation(p_q[TRANSISTOR], p_supply, i_supply, p_res, p_q)


def branch_currents(net: Netlist, v: dict, states: dict) -> dict:
    """DC current of each resistor (a → b) and each transistor terminal (into it), A."""
    out = {}
    for r in net.of_type(Resistor):
        out[r.name] = (v[r.a] - v[r.b]) / r.r
    for q in net.of_type(Bjt):
        st, s = states[q.name], q.params.sign
        out[q.name + ".c"] = s * st.ic
        out[q.name + ".b"] = s * st.ib
        out[q.name + ".e"] = -s * (st.ic + st.ib)
    return out


def node_outflows(net: Netlist, v: dict, states: dict, currents: dict | None = None) -> dict:
    """Current (A) leaving each node through resistors and transistors.

    For a node driven by one voltage source this is the current that source
    delivers; at any other node KCL makes it zero.  ``currents``: the
    :func:`branch_currents` already found, if at hand.
    """
    currents = branch_currents(net, v, states) if currents is None else currents
    total = {n: np.zeros(net.batch) for n in (*net.nodes, GROUND)}
    for r in net.of_type(Resistor):
        total[r.a] = total[r.a] + currents[r.name]
        total[r.b] = total[r.b] - currents[r.name]
    for q in net.of_type(Bjt):
        for t in "cbe":
            node = getattr(q, t)
            total[node] = total[node] + currents[f"{q.name}.{t}"]
    return total
