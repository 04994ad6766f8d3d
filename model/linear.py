"""Linear solves of the circuit linearised at an operating point: midband
and DC solves with test currents, transfer impedances, and frequency sweeps.
They assemble their matrices with the same plan and stamps as the Newton
solve in :mod:`model.solve`; nothing here knows which topology it solves.
"""

from __future__ import annotations

import numpy as np

from .linalg import solve_batched
from .netlist import Bjt, Capacitor, Netlist
from .plan import AC, DC, MIDBAND, Plan, plan_for
from .assembly import admittance_values, assemble_linear, node_dict, terminal_conductance
from .solve import OperatingPoint


def _linearised(net: Netlist, op: OperatingPoint, plan: Plan, g, v):
    """A and b of the network in ``g``/``v`` with the transistors' linearised
    terminal conductances at ``op`` stamped in."""
    with np.errstate(over="ignore", invalid="ignore"):
        a, b = assemble_linear(plan, g, v)
    bjts = net.of_type(Bjt)
    if bjts:
        g_t = terminal_conductance([op.states[q.name] for q in bjts])
        a = a + (g_t.reshape(net.batch, -1) @ plan.term_spread).reshape(a.shape)
        b = b - np.einsum("bts,bs->bt", g_t, v @ plan.term_coef) @ plan.term_pick.T
    return a, b


def _add_injections(plan: Plan, b, inject):
    for node, current in (inject or {}).items():
        i = plan.index.get(node, -1)
        if i >= 0:
            b[..., i] = b[..., i] + current
    return b


def small_signal(
    net: Netlist,
    op: OperatingPoint,
    *,
    omega=None,
    excite: dict | None = None,
    inject: dict | None = None,
    at_dc: bool = False,
) -> dict:
    """Solve the circuit linearised at ``op``; returns node → phasor voltage.

    With ``omega`` None this is midband: coupling capacitors are shorts and all
    other capacitors open; ``at_dc`` opens every capacitor instead.  Otherwise every capacitor has admittance jωC
    (``omega`` in rad/s, one per batch row or a scalar).  Every voltage source
    is zero except those named in ``excite`` (name → volts); ``inject`` adds
    test currents into nodes (node → A).
    """
    plan = plan_for(net, DC if at_dc else MIDBAND if omega is None else AC)
    with np.errstate(over="ignore", invalid="ignore"):
        g, v = admittance_values(net, plan, omega=omega, excite=excite or {})
    a, b = _linearised(net, op, plan, g, v)
    x = solve_batched(a, _add_injections(plan, b, inject))
    return node_dict(plan, x, v)


def transfer_impedances(net: Netlist, op: OperatingPoint):
    """Midband transfer impedances with every source at zero: ``z(a, b)`` is
    the voltage (batch,) at node a for 1 A into node b (Ω), from one solve
    with the identity as right-hand sides.  Known nodes read 0 V and take
    current without effect."""
    plan = plan_for(net, MIDBAND)
    g, v = admittance_values(net, plan, excite={})
    a, _ = _linearised(net, op, plan, g, v)
    z = solve_batched(a, np.broadcast_to(np.eye(plan.n), a.shape).copy())
    zero = np.zeros(net.batch)

    def lookup(at: str, into: str):
        i, j = plan.index.get(at, -1), plan.index.get(into, -1)
        return z[:, i, j] if i >= 0 and j >= 0 else zero

    return lookup


def frequency_sweep(
    net: Netlist,
    op: OperatingPoint,
    omega: np.ndarray,
    *,
    excite: dict | None = None,
    inject: dict | None = None,
) -> dict:
    """The linearised circuit at every angular frequency in ``omega`` (rad/s).

    Returns node → (batch, len(omega)) complex phasors.  The network splits
    into a real part G (resistors and transistors) and a capacitive part C,
    each assembled once; A(ω) = G + jωC for every frequency is then one
    batched complex solve rather than a loop over frequencies.  ``excite``
    and ``inject`` are as for :func:`small_signal`.
    """
    plan = plan_for(net, AC)
    omega = np.asarray(omega, dtype=float).reshape(-1)
    g, v = admittance_values(net, plan, excite=excite or {}, split=True)
    is_cap = np.array([isinstance(net.element(n), Capacitor) for n in plan.admittances], dtype=bool)
    g_real, g_cap = np.where(is_cap, 0.0, g), np.where(is_cap, g, 0.0)
    a_g, b_g = _linearised(net, op, plan, g_real, v)
    with np.errstate(over="ignore", invalid="ignore"):
        a_c, b_c = assemble_linear(plan, g_cap, v)
    jw = 1j * omega[None, :, None]
    a = a_g[:, None] + jw[..., None] * a_c[:, None]
    b = _add_injections(plan, b_g[:, None] + jw * b_c[:, None], inject)
    batch, count, n = net.batch, omega.size, plan.n
    x = solve_batched(a.reshape(batch * count, n, n), b.reshape(batch * count, n))
    nodes = node_dict(plan, x, np.repeat(v, count, axis=0))
    return {node: volts.reshape(batch, count) for node, volts in nodes.items()}
