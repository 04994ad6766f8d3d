"""The one nodal core: matrix assembly and the DC operating point by Newton.
The linear solves of the circuit linearised at that point (midband, test
currents, frequency sweeps) are in :mod:`model.linear` and share this assembly.

Every topology is a builder that produces a :class:`~model.netlist.Netlist`;
nothing here knows which topology it is solving.  The netlist's shape is
compiled once into a :class:`~model.plan.Plan` (see there for how sources and
floating nodes are eliminated); each solve then assembles its matrices by
matrix products over the batch.  For the DC solve the linear network is
reduced onto the transistor terminals once, so each Newton iteration solves
a system the size of the transistor ports only.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from . import device
from .linalg import solve_batched
from .netlist import GROUND, Bjt, Netlist, Resistor
from .plan import DC, Plan, plan_for

#: Newton stops when no node moves by more than this (V) and no junction was
#: limited.  Convergence is quadratic, so the point after such a step is good to
#: far better than this; the KCL residual check (1e-9) still guards the result.
_V_TOL = 1e-9
#: The emitter junction starts where it would carry 1 mA, the collector junction
#: at zero bias: a typical small-signal stage is a few Newton steps from there.
_START_CURRENT = 1e-3
_MAX_ITER = 200


def junction_voltages(q: Bjt, v: dict):
    """(VBE, VBC) of transistor q in its forward sense, from node voltages."""
    s = q.params.sign
    return s * (v[q.b] - v[q.e]), s * (v[q.b] - v[q.c])


@dataclass(frozen=True)
class OperatingPoint:
    """The DC solution of a batch.

    voltages : node → V;  states : transistor name → JunctionState at the solution;
    converged : bool per row;  iterations : Newton iterations used;
    residual : largest KCL residual over the largest branch current, per row;
    junctions : (batch, transistor, 2) forward-sense (VBE, VBC), V.
    """

    voltages: dict
    states: dict
    converged: np.ndarray
    iterations: int
    residual: np.ndarray
    junctions: np.ndarray

    def take(self, rows) -> "OperatingPoint":
        """The solution restricted to some batch rows (an index array)."""
        return OperatingPoint(
            {n: v[rows] for n, v in self.voltages.items()},
            {k: device.JunctionState(*(getattr(st, f)[rows] for f in _STATE_FIELDS)) for k, st in self.states.items()},
            self.converged[rows],
            self.iterations,
            self.residual[rows],
            self.junctions[rows],
        )


_STATE_FIELDS = ("ic", "ib", "dic_dvbe", "dic_dvbc", "dib_dvbe", "dib_dvbc")


def admittance_values(net: Netlist, plan: Plan, omega=None, excite=None, split=False):
    """(g, V): admittances (batch, n_adm) and constraint voltages (batch, n_src).

    A capacitor's entry is jωC, or with ``split`` its capacitance C (F) alone.
    """
    real = omega is None
    g = np.empty((net.batch, len(plan.admittances)), dtype=float if real else complex)
    for k, name in enumerate(plan.admittances):
        e = net.element(name)
        g[:, k] = 1.0 / e.r if isinstance(e, Resistor) else (e.c if split else 1j * omega * e.c)
    v = np.zeros((net.batch, len(plan.constraints)))
    for k, name in enumerate(plan.constraints):
        if excite is None:
            v[:, k] = net.element(name).v
        elif name in excite:
            v[:, k] = excite[name]
    return g, v


#: From this batch size on, matrices are assembled by sparse sums rather
#: than dense products (which then mostly multiply zeros).
_SPARSE_FROM = 256


def assemble_linear(plan: Plan, g, v):
    """The linear network's A (batch, n, n) and b (batch, n)."""
    batch, n = g.shape[0], plan.n
    gv = (g[:, :, None] * v[:, None, :]).reshape(batch, -1)
    if batch < _SPARSE_FROM:
        return (g @ plan.adm_stamp).reshape(batch, n, n), gv @ plan.adm_rhs
    return (_sparse_product(g, plan.adm_terms, n * n).reshape(batch, n, n),
            _sparse_product(gv, plan.rhs_terms, n))


def _sparse_product(values, terms, width):
    """values @ M for a sparse M given as (column, ((row, coef), ...)) terms."""
    out = np.zeros((values.shape[0], width), dtype=values.dtype)
    for col, acc in _sparse_columns(values, terms):
        out[:, col] = acc
    return out


def node_dict(plan: Plan, x, v):
    """Node name → voltage (batch,), ground included, from the unknowns x."""
    if x.shape[0] < _SPARSE_FROM:
        volts = x @ plan.node_pick + v @ plan.node_coef
        cols = {node: volts[:, i] for i, node in enumerate(plan.nodes)}
    else:
        known = dict(_sparse_columns(v, plan.node_terms))
        cols = {}
        for i, node in enumerate(plan.nodes):
            k = plan.index[node]
            base = x[:, k] if k >= 0 else np.zeros(x.shape[0], dtype=x.dtype)
            cols[node] = base + known[i] if i in known else base
    return {GROUND: np.zeros(x.shape[0], dtype=x.dtype), **cols}


def _sparse_columns(values, terms):
    """(column, values @ M[:, column]) for each non-zero column of a sparse M."""
    for col, entries in terms:
        acc = entries[0][1] * values[:, entries[0][0]]
        for row, c in entries[1:]:
            acc = acc + c * values[:, row]
        yield col, acc


def operating_point(net: Netlist, start=None, max_iter: int = _MAX_ITER) -> OperatingPoint:
    """Solve the DC operating point of every row of the batch.

    Capacitors are open.  Newton with junction limiting runs on the transistor
    ports of the reduced network until every row has converged or
    ``max_iter`` is reached; rows that did not converge are flagged, never raised.
    ``start`` (batch, transistor, 2) gives first junction voltages (VBE, VBC) to
    begin from, for example a nearby solution; by default each emitter
    junction starts at the voltage for 1 mA and each collector junction at 0.
    """
    plan = plan_for(net, DC)
    bjts = net.of_type(Bjt)
    # A part at the edge of float range (a 1e-300 Ω resistor is "valid") may
    # overflow; such a row comes out non-finite and is flagged, not raised.
    with np.errstate(over="ignore", invalid="ignore"):
        g, v = admittance_values(net, plan)
        a, b = assemble_linear(plan, g, v)
    n_ports = plan.n_ports
    y, j, back = _schur(a, b, n_ports)
    pick = plan.term_pick[:n_ports]
    t_offset = v @ plan.term_coef
    dev = _stack_params([q.params for q in bjts])
    if start is None:
        u = np.stack([dev.vt * np.log(_START_CURRENT / dev.i_s), np.zeros_like(dev.vt)], axis=-1)
    else:
        u = np.array(start, dtype=float).reshape(net.batch, len(bjts), 2)
    x_ports, done, iterations = _newton(y, j, pick, t_offset, dev, u, max_iter)
    x_ports = np.where(np.isfinite(x_ports), x_ports, 0.0)
    x = _assemble(x_ports, back)
    volts = node_dict(plan, x, v)
    states = {q.name: device.evaluate(q.params, *junction_voltages(q, volts)) for q in bjts}
    residual = _kcl_residual(plan, a, b, x, g, volts, bjts, states)
    converged = done & np.isfinite(residual) & (residual <= 1e-9)
    junctions = np.stack([np.stack(junction_voltages(q, volts), axis=-1) for q in bjts], axis=1)
    return OperatingPoint(volts, states, converged, iterations, residual, junctions)


def _kcl_residual(plan, a, b, x, g, volts, bjts, states):
    """Largest |KCL sum| over the free (super)nodes over the largest branch current."""
    into = np.stack([c for q in bjts for c in _terminal_currents(q, states[q.name])], axis=1)
    r = np.einsum("bij,bj->bi", a, x) - b + into @ plan.term_pick.T
    drops = np.stack([volts[n] for n in plan.nodes], axis=1) @ plan.adm_incidence
    scale = np.maximum(_row_max(np.abs(g * drops)), _row_max(np.abs(into)))
    worst = _row_max(np.abs(r))
    with np.errstate(invalid="ignore", divide="ignore"):
        return np.where(scale > 0, worst / scale, worst)


def _terminal_currents(q: Bjt, st: device.JunctionState):
    """Currents into the collector, base and emitter of q (A)."""
    s = q.params.sign
    return s * st.ic, s * st.ib, -s * (st.ic + st.ib)


def _newton(y, j, pick, t_offset, dev, u, max_iter):
    """Newton on the port equations Y·x = J − I_device(x) for every batch row.

    Rows that have converged leave the working set whenever they make up a
    quarter of it, so a few slow rows do not make the whole batch pay for
    their extra iterations.  Returns (x_ports, converged, iterations).
    """
    batch, n_ports = j.shape
    count = dev.vt.shape[1]
    spread = np.einsum("pt,qs->tspq", pick, pick).reshape(pick.shape[1] ** 2, n_ports**2)
    x_out = np.full((batch, n_ports), np.nan)
    done_out = np.zeros(batch, dtype=bool)
    rows = np.arange(batch)
    x = np.zeros((batch, n_ports))
    done = np.zeros(batch, dtype=bool)
    iterations = 0
    with np.errstate(invalid="ignore", over="ignore", divide="ignore"):
        vt_j, v_crit = dev.vt[..., None], device.critical_voltage(_expand(dev))
        sign = dev.sign[..., None]
        for iterations in range(1, max_iter + 1):
            g_t, i_eq = _companion(dev, u)
            a = y + (g_t.reshape(rows.size, -1) @ spread).reshape(y.shape)
            b = j - (i_eq + np.einsum("bts,bs->bt", g_t, t_offset)) @ pick.T
            new = solve_batched(a, b)
            v_t = (new @ pick + t_offset).reshape(rows.size, count, 3)
            u_raw = sign * np.stack([v_t[..., 1] - v_t[..., 2], v_t[..., 1] - v_t[..., 0]], axis=-1)
            u, limited = device.limit_junction(u_raw, u, vt_j, v_crit)
            step = _row_max(np.abs(new - x))
            done |= (step <= _V_TOL * (1.0 + _row_max(np.abs(new)))) & ~limited.reshape(rows.size, -1).any(axis=1)
            x = new
            if iterations == 1:
                continue
            if done.all() or 4 * done.sum() >= rows.size:
                x_out[rows[done]], done_out[rows[done]] = x[done], True
                if done.all():
                    break
                keep = ~done
                rows, x, u, y, j, t_offset = rows[keep], x[keep], u[keep], y[keep], j[keep], t_offset[keep]
                dev, vt_j, v_crit, sign = dev.take(keep), vt_j[keep], v_crit[keep], sign[keep]
                done = done[keep]
        else:
            x_out[rows] = x
    return x_out, done_out, iterations


def _row_max(a):
    """Largest entry of each row of a (batch, n) array; 0 when n is 0."""
    if a.shape[1] == 0:
        return np.zeros(a.shape[0])
    out = a[:, 0]
    for k in range(1, a.shape[1]):
        out = np.maximum(out, a[:, k])
    return out


def _stack_params(params: list) -> device.DeviceParams:
    """Parameters of several transistors as (batch, transistor) arrays."""
    fields = ("i_s", "beta_f", "beta_r", "va", "vt", "sign")
    return device.DeviceParams(*(np.stack([getattr(p, f) for p in params], axis=1) for f in fields))


def _expand(p: device.DeviceParams) -> device.DeviceParams:
    """(batch, transistor) parameters broadcast over the two junctions."""
    fields = ("i_s", "beta_f", "beta_r", "va", "vt", "sign")
    return device.DeviceParams(*(getattr(p, f)[..., None] for f in fields))


def terminal_conductance(states: list) -> np.ndarray:
    """(batch, 3k, 3k) conductance from terminal voltages (c, b, e of each of
    the k transistors) to the currents into those terminals, block-diagonal."""
    k = len(states)
    g = np.zeros((states[0].ic.shape[0], k, 3, k, 3))
    for i, st in enumerate(states):
        a, bb, cc, d = st.dic_dvbe, st.dic_dvbc, st.dib_dvbe, st.dib_dvbc
        g[:, i, 0, i, 0], g[:, i, 0, i, 1], g[:, i, 0, i, 2] = -bb, a + bb, -a
        g[:, i, 1, i, 0], g[:, i, 1, i, 1], g[:, i, 1, i, 2] = -d, cc + d, -cc
        g[:, i, 2, i, :] = -(g[:, i, 0, i, :] + g[:, i, 1, i, :])
    return g.reshape(-1, 3 * k, 3 * k)


def _companion(dev: device.DeviceParams, u: np.ndarray):
    """Linearised terminal currents about junction voltages u = (VBE, VBC).

    Returns (g_t, i_eq): the terminal conductance (see
    :func:`_terminal_conductance`) and currents i_eq (batch, 3k) such that the
    currents into the terminals are i_eq + g_t @ v_terminal.
    """
    st = device.evaluate(dev, u[..., 0], u[..., 1])
    count = u.shape[1]
    per = [device.JunctionState(*(getattr(st, f)[:, i] for f in _STATE_FIELDS)) for i in range(count)]
    s = dev.sign
    i_c = s * (st.ic - st.dic_dvbe * u[..., 0] - st.dic_dvbc * u[..., 1])
    i_b = s * (st.ib - st.dib_dvbe * u[..., 0] - st.dib_dvbc * u[..., 1])
    i_eq = np.stack([i_c, i_b, -(i_c + i_b)], axis=-1).reshape(u.shape[0], 3 * count)
    return terminal_conductance(per), i_eq


def _schur(a, b, n_ports):
    """Reduce A x = b onto its first n_ports unknowns.

    Returns (Y, J, back) with Y x_p = J for the ports and back = (Xb, Xp) so
    that the other unknowns are Xb − Xp x_p.
    """
    if a.shape[-1] == n_ports:
        return a, b, None
    app, api = a[:, :n_ports, :n_ports], a[:, :n_ports, n_ports:]
    aip, aii = a[:, n_ports:, :n_ports], a[:, n_ports:, n_ports:]
    sol = solve_batched(aii, np.concatenate([b[:, n_ports:, None], aip], axis=2))
    xb, xp = sol[:, :, 0], sol[:, :, 1:]
    y = app - np.einsum("bij,bjk->bik", api, xp)
    j = b[:, :n_ports] - np.einsum("bij,bj->bi", api, xb)
    return y, j, (xb, xp)


def _assemble(x_ports, back):
    if back is None:
        return x_ports
    xb, xp = back
    return np.concatenate([x_ports, xb - np.einsum("bij,bj->bi", xp, x_ports)], axis=1)


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


def node_outflows(net: Netlist, v: dict, states: dict) -> dict:
    """Current (A) leaving each node through resistors and transistors.

    For a node driven by one voltage source this is the current that source
    delivers; at any other node KCL makes it zero.
    """
    currents = branch_currents(net, v, states)
    total = {n: np.zeros(net.batch) for n in (*net.nodes, GROUND)}
    for r in net.of_type(Resistor):
        total[r.a] = total[r.a] + currents[r.name]
        total[r.b] = total[r.b] - currents[r.name]
    for q in net.of_type(Bjt):
        for t in "cbe":
            node = getattr(q, t)
            total[node] = total[node] + currents[f"{q.name}.{t}"]
    return total
