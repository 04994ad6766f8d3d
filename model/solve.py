"""The one nodal core: DC operating point by Newton, and linear solves of the
circuit linearised at that point.

Every topology is a builder that produces a :class:`~model.netlist.Netlist`;
nothing here knows which topology it is solving.

How a netlist becomes equations
-------------------------------
* Voltage sources (and, at midband, coupling capacitors as 0 V sources) are
  eliminated first: each node is written as an unknown plus a known offset
  (a union–find over the sources).  A node tied through sources to ground
  becomes known.  What is left is plain nodal analysis, whose matrices are
  small and well conditioned.
* Nodes with no conductive path to ground in the current analysis (the load
  side of an unloaded coupling capacitor at DC) are held at 0 V; no current
  flows there, so the choice changes nothing else.
* For the DC solve the linear network is reduced onto the transistor
  terminals once (a Schur complement), so each Newton iteration solves a
  system the size of the transistor ports only.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from . import device
from .errors import SolveError
from .linalg import solve_batched
from .netlist import GROUND, Bjt, Capacitor, Netlist, Resistor, VoltageSource, terminals

#: Newton stops when no node moves by more than this (V) and no junction was
#: limited.  Convergence is quadratic, so the point after such a step is good to
#: far better than this; the KCL residual check (1e-9) still guards the result.
_V_TOL = 1e-9
#: The emitter junction starts where it would carry 1 mA, the collector junction
#: at zero bias: a typical small-signal stage is a few Newton steps from there.
_START_CURRENT = 1e-3
_MAX_ITER = 200


@dataclass(frozen=True)
class Reduction:
    """Each node as ``x[index] + offset``; index −1 means the node is known."""

    index: dict
    offset: dict
    size: int

    def voltages(self, x: np.ndarray) -> dict:
        """Node voltages (including ground) from the unknowns x (batch, size)."""
        out = {GROUND: np.zeros(x.shape[0], dtype=x.dtype)}
        for node, i in self.index.items():
            out[node] = self.offset[node] + (x[:, i] if i >= 0 else 0.0)
        return out


def _reduce(nodes, constraints, conductive_pairs, batch, first=()) -> Reduction:
    """Eliminate ideal voltage constraints (plus, minus, volts) from ``nodes``.

    ``conductive_pairs`` are the node pairs joined by anything that conducts in
    this analysis; components with no path to ground are tied to it at 0 V.
    Unknowns listed in ``first`` are numbered first (the transistor ports).
    """
    parent = {n: n for n in (*nodes, GROUND)}
    rel = {n: np.zeros(batch) for n in parent}  # v[n] = v[parent[n]] + rel[n]

    def find(n):
        if parent[n] == n:
            return n, rel[n] * 0.0
        root, acc = find(parent[n])
        parent[n], rel[n] = root, rel[n] + acc
        return root, rel[n]

    def tie(plus, minus, volts):
        rp, op = find(plus)
        rm, om = find(minus)
        if rp == rm:
            raise SolveError(f"voltage sources form a loop through {plus} and {minus}",
                             "an ideal source or a shorted capacitor closes a loop")
        # v_rp + op = v_rm + om + volts; ground always stays a root.
        if rp == GROUND:
            parent[rm], rel[rm] = GROUND, op - om - volts
        else:
            parent[rp], rel[rp] = rm, om + volts - op

    for plus, minus, volts in constraints:
        tie(plus, minus, np.broadcast_to(np.asarray(volts), (batch,)))

    # Floating islands: join conductive pairs in a plain union–find of roots.
    group = {n: n for n in parent}

    def top(n):
        while group[n] != n:
            group[n] = group[group[n]]
            n = group[n]
        return n

    for a, b in conductive_pairs:
        group[top(find(a)[0])] = top(find(b)[0])
    grounded = top(GROUND)
    for n in nodes:
        r = find(n)[0]
        if r != GROUND and top(r) != grounded:
            tie(r, GROUND, np.zeros(batch))
            group[top(r)] = grounded

    roots = [r for r in dict.fromkeys(find(n)[0] for n in nodes) if r != GROUND]
    order = [r for r in dict.fromkeys(find(n)[0] for n in first) if r != GROUND]
    order += [r for r in roots if r not in order]
    number = {r: i for i, r in enumerate(order)}
    index, offset = {}, {}
    for n in nodes:
        root, off = find(n)
        index[n] = number.get(root, -1)
        offset[n] = off
    return Reduction(index, offset, len(order))


class _System:
    """A batch of nodal equations A x = b being stamped."""

    def __init__(self, red: Reduction, batch: int, size: int | None = None, dtype=float):
        n = red.size if size is None else size
        self.red = red
        self.a = np.zeros((batch, n, n), dtype=dtype)
        self.b = np.zeros((batch, n), dtype=dtype)

    def vccs(self, row, p, q, g):
        """Add a current g·(v_p − v_q) leaving node ``row``."""
        r = self.red.index.get(row, -1)
        if r < 0:
            return
        idx, off = self.red.index, self.red.offset
        self.b[:, r] -= g * (off.get(p, 0.0) - off.get(q, 0.0))
        if idx.get(p, -1) >= 0:
            self.a[:, r, idx[p]] += g
        if idx.get(q, -1) >= 0:
            self.a[:, r, idx[q]] -= g

    def admittance(self, na, nb, y):
        self.vccs(na, na, nb, y)
        self.vccs(nb, nb, na, y)

    def inject(self, node, current):
        """A constant current flowing *into* ``node``."""
        r = self.red.index.get(node, -1)
        if r >= 0:
            self.b[:, r] += current


def _stamp_bjt(sys: _System, q: Bjt, st: device.JunctionState, vbe0=None, vbc0=None):
    """Stamp a transistor linearised about (vbe0, vbc0) with state ``st``.

    With vbe0/vbc0 None only the small-signal conductances are stamped.
    Terminal currents are into the device, so KCL sees them leaving the node.
    """
    s = q.params.sign
    a, bb, cc, d = st.dic_dvbe, st.dic_dvbc, st.dib_dvbe, st.dib_dvbc
    sys.vccs(q.c, q.b, q.e, a)
    sys.vccs(q.c, q.b, q.c, bb)
    sys.vccs(q.b, q.b, q.e, cc)
    sys.vccs(q.b, q.b, q.c, d)
    sys.vccs(q.e, q.b, q.e, -(a + cc))
    sys.vccs(q.e, q.b, q.c, -(bb + d))
    if vbe0 is not None:
        i_c = s * (st.ic - a * vbe0 - bb * vbc0)
        i_b = s * (st.ib - cc * vbe0 - d * vbc0)
        sys.inject(q.c, -i_c)
        sys.inject(q.b, -i_b)
        sys.inject(q.e, i_c + i_b)


def junction_voltages(q: Bjt, v: dict):
    """(VBE, VBC) of transistor q in its forward sense, from node voltages."""
    s = q.params.sign
    return s * (v[q.b] - v[q.e]), s * (v[q.b] - v[q.c])


@dataclass(frozen=True)
class OperatingPoint:
    """The DC solution of a batch.

    voltages : node → V;  states : transistor name → JunctionState at the solution;
    converged : bool per row;  iterations : Newton iterations used;
    residual : largest KCL residual over the largest branch current, per row.
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


def _dc_reduction(net: Netlist, first=()) -> Reduction:
    sources = [(e.plus, e.minus, e.v) for e in net.of_type(VoltageSource)]
    pairs = [(e.a, e.b) for e in net.of_type(Resistor)]
    pairs += [(e.plus, e.minus) for e in net.of_type(VoltageSource)]
    for q in net.of_type(Bjt):
        pairs += [(q.b, q.e), (q.b, q.c)]
    return _reduce(net.nodes, sources, pairs, net.batch, first)


def operating_point(net: Netlist, start=None, max_iter: int = _MAX_ITER) -> OperatingPoint:
    """Solve the DC operating point of every row of the batch.

    Capacitors are open.  Newton with junction limiting runs on the transistor
    ports of the reduced network until every row has converged or
    ``max_iter`` is reached; rows that did not converge are flagged, never raised.
    ``start`` (batch, transistor, 2) gives first junction voltages (VBE, VBC) to
    begin from, for example a nearby solution; by default each emitter
    junction starts at the voltage for 1 mA and each collector junction at 0.
    """
    bjts = net.of_type(Bjt)
    ports = [n for q in bjts for n in (q.c, q.b, q.e)]
    red = _dc_reduction(net, first=ports)
    # A terminal joined onto ground (a CE with re1 = re2 = 0) is known: index −1, offset 0.
    n_ports = len({red.index.get(n, -1) for n in ports if red.index.get(n, -1) >= 0})

    linear = _System(red, net.batch)
    for r in net.of_type(Resistor):
        linear.admittance(r.a, r.b, 1.0 / r.r)
    y, j, back = _schur(linear.a, linear.b, n_ports)

    # Terminal voltages (batch, 3·transistors) are x_ports @ pick + t_offset,
    # and a terminal conductance block lands in the port matrix by @ spread.
    n_t = 3 * len(bjts)
    pick = np.zeros((n_ports, n_t))
    t_offset = np.zeros((net.batch, n_t))
    for t, node in enumerate(ports):
        if red.index.get(node, -1) >= 0:
            pick[red.index[node], t] = 1.0
        t_offset[:, t] = red.offset.get(node, 0.0)
    dev = _stack_params([q.params for q in bjts])
    if start is None:
        u = np.stack([dev.vt * np.log(_START_CURRENT / dev.i_s), np.zeros_like(dev.vt)], axis=-1)
    else:
        u = np.array(start, dtype=float).reshape(net.batch, len(bjts), 2)
    x_ports, done, iterations = _newton(y, j, pick, t_offset, dev, u, max_iter)
    x_ports = np.where(np.isfinite(x_ports), x_ports, 0.0)
    v = red.voltages(_assemble(x_ports, back))
    states = {q.name: device.evaluate(q.params, *junction_voltages(q, v)) for q in bjts}
    residual = kcl_residual(net, v, states, red)
    converged = done & np.isfinite(residual) & (residual <= 1e-9)
    junctions = np.stack([np.stack(junction_voltages(q, v), axis=-1) for q in bjts], axis=1)
    return OperatingPoint(v, states, converged, iterations, residual, junctions)


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
        companion = _Companion(rows.size, count)
        for iterations in range(1, max_iter + 1):
            g_t, i_eq = companion.at(dev, u)
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
                companion = _Companion(rows.size, count)
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


class _Companion:
    """Linearised terminal currents about junction voltages u = (VBE, VBC).

    ``at`` returns g_t (batch, 3k, 3k), block-diagonal over the k transistors,
    the conductance from terminal voltages (c, b, e of each) to the currents
    into the terminals, and i_eq (batch, 3k) so that the currents are
    i_eq + g_t @ v_terminal.  Buffers are reused across Newton iterations.
    """

    def __init__(self, batch: int, count: int):
        self.g = np.zeros((batch, count, 3, count, 3))
        self.i = np.zeros((batch, count, 3))
        self.diag = np.arange(count)

    def at(self, dev: device.DeviceParams, u: np.ndarray):
        st = device.evaluate(dev, u[..., 0], u[..., 1])
        a, bb, cc, d = st.dic_dvbe, st.dic_dvbc, st.dib_dvbe, st.dib_dvbc
        blk = self.g[:, self.diag, :, self.diag, :]  # (count, batch, 3, 3) copy
        blk[..., 0, 0], blk[..., 0, 1], blk[..., 0, 2] = (-bb).T, (a + bb).T, (-a).T
        blk[..., 1, 0], blk[..., 1, 1], blk[..., 1, 2] = (-d).T, (cc + d).T, (-cc).T
        blk[..., 2, :] = -(blk[..., 0, :] + blk[..., 1, :])
        self.g[:, self.diag, :, self.diag, :] = blk
        s = dev.sign
        i_c = s * (st.ic - a * u[..., 0] - bb * u[..., 1])
        i_b = s * (st.ib - cc * u[..., 0] - d * u[..., 1])
        self.i[..., 0], self.i[..., 1], self.i[..., 2] = i_c, i_b, -(i_c + i_b)
        n = self.i.shape[1] * 3
        return self.g.reshape(-1, n, n), self.i.reshape(-1, n)


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


def kcl_residual(net: Netlist, v: dict, states: dict, red: Reduction) -> np.ndarray:
    """Largest |KCL sum| over the free nodes (a supernode counts as one),
    divided by the largest branch current; per batch row.
    """
    outflow = node_outflows(net, v, states)
    sums: dict[int, np.ndarray] = {}
    for node, i in red.index.items():
        if i >= 0:
            sums[i] = sums.get(i, 0.0) + outflow[node]
    currents = branch_currents(net, v, states)
    scale = np.max(np.abs(np.stack(list(currents.values()))), axis=0) if currents else np.ones(net.batch)
    worst = np.max(np.abs(np.stack(list(sums.values()))), axis=0) if sums else np.zeros(net.batch)
    with np.errstate(invalid="ignore", divide="ignore"):
        return np.where(scale > 0, worst / scale, worst)


def small_signal(
    net: Netlist,
    op: OperatingPoint,
    *,
    omega=None,
    excite: dict | None = None,
    inject: dict | None = None,
) -> dict:
    """Solve the circuit linearised at ``op``; returns node → phasor voltage.

    With ``omega`` None this is midband: coupling capacitors are shorts and all
    other capacitors open.  Otherwise every capacitor has admittance jωC
    (``omega`` in rad/s, one per batch row or a scalar).  Every voltage source
    is zero except those named in ``excite`` (name → volts); ``inject`` adds
    test currents into nodes (node → A).
    """
    excite, inject = excite or {}, inject or {}
    sources = [(e.plus, e.minus, excite.get(e.name, 0.0)) for e in net.of_type(VoltageSource)]
    pairs = [(e.a, e.b) for e in net.of_type(Resistor)]
    pairs += [(e.plus, e.minus) for e in net.of_type(VoltageSource)]
    caps = net.of_type(Capacitor)
    if omega is None:
        sources += [(c.a, c.b, 0.0) for c in caps if c.coupling]
        pairs += [(c.a, c.b) for c in caps if c.coupling]
    else:
        pairs += [(c.a, c.b) for c in caps]
    bjts = net.of_type(Bjt)
    for q in bjts:
        pairs += [(q.b, q.e), (q.b, q.c)]
    red = _reduce(net.nodes, sources, pairs, net.batch)
    sys = _System(red, net.batch, dtype=float if omega is None else complex)
    for r in net.of_type(Resistor):
        sys.admittance(r.a, r.b, 1.0 / r.r)
    if omega is not None:
        for c in caps:
            sys.admittance(c.a, c.b, 1j * omega * c.c)
    for q in bjts:
        _stamp_bjt(sys, q, op.states[q.name])
    for node, current in inject.items():
        sys.inject(node, current)
    return red.voltages(solve_batched(sys.a, sys.b))
