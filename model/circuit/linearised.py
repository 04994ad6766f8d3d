"""Linear solves of the circuit linearised at an operating point: midband
and DC solves with test currents, transfer impedances, and frequency sweeps.
They assemble their matrices with the same plan and stamps as the Newton
solve in :mod:`model.circuit.newton`; nothing here knows which topology it solves.
"""

from __future__ import annotations

import math

import numpy as np

from model.circuit.assembly import admittance_values, assemble_linear, index_dot, node_dict, terminal_conductance
from model.circuit.dense import _LAPACK_BELOW, solve_batched
from model.circuit.netlist import GROUND, Bjt, Capacitor, Netlist, Resistor, VoltageSource, batch_rows
from model.circuit.newton import OperatingPoint
from model.circuit.plan import AC, DC, MIDBAND, Plan, plan_for


def _linearised(net: Netlist, op: OperatingPoint, plan: Plan, g, v):
    """A and b of the network in ``g``/``v`` with the transistors' linearised
    terminal conductances at ``op`` stamped in."""
    with np.errstate(over="ignore", invalid="ignore"):
        a, b = assemble_linear(plan, g, v)
    bjts = net.of_type(Bjt)
    if bjts:
        g_t = terminal_conductance([op.states[q.name] for q in bjts])
        a = a + index_dot(g_t.reshape(net.batch, -1), plan.term_spread).reshape(a.shape)
        if v.any():  # the terminals' known offsets: none when every source is zero
            b = b - index_dot(np.einsum("bts,bs->bt", g_t, index_dot(v, plan.term_coef)), plan.term_pick.T)
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


def impedance_matrix(net: Netlist, op: OperatingPoint, kind: str = MIDBAND):
    """(plan, Z): the inverse (batch, n, n) of the linearised nodal matrix of
    ``net`` at ``op`` for a MIDBAND or DC (every capacitor open) analysis,
    every source at zero; Z[:, i, j] is the voltage at unknown i for 1 A into
    unknown j (Ω).  A singular row comes out non-finite."""
    plan = plan_for(net, kind)
    g, v = admittance_values(net, plan, excite={})
    a, _ = _linearised(net, op, plan, g, v)
    return plan, _inverse(a)


def _inverse(a):
    """a⁻¹ for every batch row: on small batches one LAPACK inversion (a
    third of a solve against the identity) unless some row is singular."""
    if 0 < a.shape[0] < _LAPACK_BELOW and a.shape[-1] > 0:
        try:
            return np.linalg.inv(a)
        except np.linalg.LinAlgError:
            pass
    return solve_batched(a, np.broadcast_to(np.eye(a.shape[-1]), a.shape).copy())


def transfer_impedances(net: Netlist, op: OperatingPoint):
    """Midband transfer impedances with every source at zero: ``z(a, b)`` is
    the voltage (batch,) at node a for 1 A into node b (Ω), from one
    inversion.  Known nodes read 0 V and take current without effect."""
    plan, z = impedance_matrix(net, op)
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
    return FrequencySweep(net, op, excite=excite, inject=inject).nodes(omega)


class FrequencySweep:
    """G and C of the linearised ``net`` at ``op`` assembled once, for several
    sweeps of the same circuit (a corner search refines its grid in rounds)."""

    def __init__(self, net: Netlist, op: OperatingPoint, *, excite: dict | None = None, inject: dict | None = None):
        plan = plan_for(net, AC)
        g, v = admittance_values(net, plan, excite=excite or {}, split=True)
        is_cap = np.array([isinstance(net.element(n), Capacitor) for n in plan.admittances], dtype=bool)
        g_real, g_cap = np.where(is_cap, 0.0, g), np.where(is_cap, g, 0.0)
        a_g, b_g = _linearised(net, op, plan, g_real, v)
        with np.errstate(over="ignore", invalid="ignore"):
            a_c, b_c = assemble_linear(plan, g_cap, v)
        self.plan, self.v, self.batch = plan, v, net.batch
        self.a_g, self.a_c = a_g[:, None], a_c[:, None]
        self.b_g, self.b_c = _add_injections(plan, b_g.astype(complex), inject)[:, None], b_c[:, None]

    def _solve(self, omega):
        omega = np.asarray(omega, dtype=float).reshape(-1)
        jw = 1j * omega[None, :, None]
        a = self.a_g + jw[..., None] * self.a_c
        b = self.b_g + jw * self.b_c
        n = self.plan.n
        return solve_batched(a.reshape(-1, n, n), b.reshape(-1, n)), omega.size

    def nodes(self, omega) -> dict:
        """node → (batch, len(omega)) complex phasors at ``omega`` (rad/s)."""
        x, count = self._solve(omega)
        nodes = node_dict(self.plan, x, np.repeat(self.v, count, axis=0))
        return {node: volts.reshape(self.batch, count) for node, volts in nodes.items()}

    def node(self, name: str, omega) -> np.ndarray:
        """The phasor (batch, len(omega)) at one node alone."""
        x, count = self._solve(omega)
        i = self.plan.nodes.index(name)
        volts = x @ self.plan.node_pick[:, i] + np.repeat(self.v @ self.plan.node_coef[:, i], count)
        return volts.reshape(self.batch, count)


#: A row whose low-rank system keeps less than this fraction of a removed
#: part's 1/g is redone as a direct solve: the correction's relative error is
#: then at most a few float epsilons over this ratio, about 1e-12.
_CANCELLATION = 1e-3
#: Up to this many rows, Factored.response runs on Python floats.
_FEW_ROWS = 16


class Factored:
    """The midband linearised network of ``net`` at ``op``, factored once,
    with groups of parts added or removed as low-rank (Woodbury) corrections.

    With Z = A⁻¹ and the changes written A' = A + U·C·Uᵀ (a column of U per
    changed part: +1 and −1 at its two ends; C its ±conductance, an ideal
    source or short an infinite one), the response to a test current e is
    Z'e = Ze − ZU (C⁻¹ + UᵀZU)⁻¹ UᵀZe: a c × c solve for c changed parts.
    U is two entries a column, so every product here is a few entries of Z.
    Rows where the c × c system cancels (a removed part carried nearly all
    the current) are solved directly on the changed netlist instead.
    """

    def __init__(self, net: Netlist, op: OperatingPoint):
        self.net, self.op, self._edits = net, op, ()
        self.plan = plan_for(net, MIDBAND)
        g, v = admittance_values(net, self.plan, excite={})
        a, _ = _linearised(net, op, self.plan, g, v)
        z = _inverse(a)
        # Entry-major: each Z[i, j] below is then one contiguous (batch,) row.
        self.z = np.ascontiguousarray(z.transpose(1, 2, 0))
        self.parts, self.exact = (), True

    def changed(self, full: Netlist, tag: str, *, remove: bool) -> "Factored":
        """This network with ``full``'s parts tagged ``tag`` removed (they must
        be in it) or added."""
        out = object.__new__(Factored)
        out.__dict__ = dict(self.__dict__)
        group = [e for e in full.elements if tag in e.tags]
        # The changed netlist itself is built only if a row needs a direct solve.
        out._edits = self._edits + ((tag, remove, tuple(group)),)
        parts = _conductances(group, self.plan)
        if parts is None or (remove and any(np.isinf(g).any() for _, g in parts)):
            out.exact = False
            return out
        batch = self.net.batch
        with np.errstate(divide="ignore"):
            out.parts = self.parts + tuple(
                (ends, (-1.0 if remove else 1.0) / batch_rows(g, batch), remove)
                for ends, g in parts if ends[0] != ends[1])
        return out

    def variant(self) -> Netlist:
        """The netlist with this network's parts added and removed."""
        net = self.net
        for tag, remove, group in self._edits:
            net = net.without(tag) if remove else net.with_elements(*group)
        return net

    def _z(self, i: int, j: int):
        return self.z[i, j] if i >= 0 and j >= 0 else 0.0

    def _zu(self, i: int, ends):
        """(Z·U)[i] for one column of U."""
        return self._z(i, ends[0]) - self._z(i, ends[1])

    def response(self, into: str):
        """node → voltage (batch,) for 1 A into node ``into``; 0 at known nodes."""
        batch = self.z.shape[2]
        j = self.plan.index.get(into, -1)
        if not self.exact or j < 0:
            return self._direct(into, np.arange(batch), None)
        parts = self.parts
        if batch <= _FEW_ROWS and len(parts) <= 2:
            at, bad = self._few_rows(j)
            return self._direct(into, np.flatnonzero(bad), at) if any(bad) else at
        with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
            s = [[self._zu(ends[0], other) - self._zu(ends[1], other) + (cinv if k == m else 0.0)
                  for m, (other, _, _) in enumerate(parts)] for k, (ends, cinv, _) in enumerate(parts)]
            y = [self._z(ends[0], j) - self._z(ends[1], j) for ends, _, _ in parts]
            coef = _small_solve(s, y, batch)
            bad = np.zeros(batch, dtype=bool)
            for k, (_, cinv, removed) in enumerate(parts):
                bad |= ~np.isfinite(coef[k])
                if removed:
                    bad |= np.abs(s[k][k]) < _CANCELLATION * np.abs(cinv)

        def at(node: str):
            i = self.plan.index.get(node, -1)
            if i < 0:
                return np.zeros(batch)
            out = self.z[i, j] - sum((self._zu(i, ends) * c for (ends, _, _), c in zip(parts, coef)), 0.0)
            return batch_rows(out, batch)

        if bad.any():
            return self._direct(into, np.flatnonzero(bad), at)
        return at

    def _few_rows(self, j: int):
        """:meth:`response` row by row on Python floats, for a few rows and at
        most two changed parts: the same products, sums and closed-form
        solve in the same order (numpy's per-call cost is most of the time
        on a design and its β variants).  Returns (at, bad rows)."""
        z = self.z.transpose(2, 0, 1).tolist()
        parts = [(ends, cinv.tolist(), removed) for ends, cinv, removed in self.parts]
        coefs, bad = [], []
        for b, zb in enumerate(z):
            def entry(i, k):
                return zb[i][k] if i >= 0 and k >= 0 else 0.0

            def zu(i, ends):
                return entry(i, ends[0]) - entry(i, ends[1])

            s = [[zu(ends[0], other) - zu(ends[1], other) + (cinv[b] if k == m else 0.0)
                  for m, (other, _, _) in enumerate(parts)] for k, (ends, cinv, _) in enumerate(parts)]
            y = [entry(ends[0], j) - entry(ends[1], j) for ends, _, _ in parts]
            try:
                if len(y) == 1:
                    coef = [y[0] / s[0][0]]
                elif len(y) == 2:
                    det = s[0][0] * s[1][1] - s[0][1] * s[1][0]
                    coef = [(s[1][1] * y[0] - s[0][1] * y[1]) / det, (s[0][0] * y[1] - s[1][0] * y[0]) / det]
                else:
                    coef = []
                wrong = not all(math.isfinite(c) for c in coef)
            except ZeroDivisionError:  # numpy's quotient would be inf or nan: solved directly
                coef, wrong = [0.0] * len(y), True
            for k, (_, cinv, removed) in enumerate(parts):
                wrong = wrong or (removed and abs(s[k][k]) < _CANCELLATION * abs(cinv[b]))
            coefs.append(coef)
            bad.append(wrong)

        def at(node: str):
            i = self.plan.index.get(node, -1)
            if i < 0:
                return np.zeros(len(z))
            out = []
            for zb, coef in zip(z, coefs):
                acc = 0.0
                for (ends, _, _), c in zip(parts, coef):
                    a, b = ends
                    acc = acc + ((zb[i][a] if a >= 0 else 0.0) - (zb[i][b] if b >= 0 else 0.0)) * c
                out.append(zb[i][j] - acc)
            return np.array(out)

        return at, bad

    def _direct(self, into, rows, fast):
        """The rows ``rows`` solved directly on the changed netlist."""
        sol = small_signal(self.variant().take(rows), self.op.take(rows), inject={into: 1.0})
        if fast is None:
            return lambda node: sol[node]

        def at(node: str):
            out = np.array(fast(node), dtype=float)
            out[rows] = sol[node]
            return out

        return at


def _small_solve(s, y, batch):
    """Solve the c × c system s·x = y of (batch,) entries, c ≤ 2 in closed form."""
    c = len(y)
    s = [[batch_rows(e, batch) for e in row] for row in s]
    if c == 0:
        return []
    if c == 1:
        return [y[0] / s[0][0]]
    if c == 2:
        det = s[0][0] * s[1][1] - s[0][1] * s[1][0]
        return [(s[1][1] * y[0] - s[0][1] * y[1]) / det, (s[0][0] * y[1] - s[1][0] * y[0]) / det]
    m = np.stack([np.stack(row, axis=-1) for row in s], axis=1)
    x = solve_batched(m, np.stack([batch_rows(v, batch) for v in y], axis=-1))
    return [x[:, k] for k in range(c)]


def _conductances(group, plan: Plan):
    """((unknown at a, unknown at b), conductance S) for each part of a group
    at midband (−1 for a known node), or None if some part cannot be written so.  A source
    that ties a node the plan lacks onto one it has is a series joint, not a
    part; every other ideal source is an infinite conductance (a short)."""
    present = set(plan.nodes) | {GROUND}
    tie = {}
    parts = []
    for e in group:
        if isinstance(e, VoltageSource):
            ends = (e.plus, e.minus)
            missing = [p for p in ends if p not in present]
            if len(missing) == 1:
                tie[missing[0]] = ends[1] if missing[0] == ends[0] else ends[0]
            elif not missing:
                parts.append((ends, np.inf))
            else:
                return None
        elif isinstance(e, Resistor):
            parts.append(((e.a, e.b), 1.0 / e.r))
        elif isinstance(e, Capacitor):
            if e.coupling:
                parts.append(((e.a, e.b), np.inf))
        else:
            return None
    out = []
    for (a, b), g in parts:
        a, b = tie.get(a, a), tie.get(b, b)
        if a not in present or b not in present or {a, b} & plan.floating:
            return None
        out.append(((plan.index.get(a, -1), plan.index.get(b, -1)), g))
    return out
