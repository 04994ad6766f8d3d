"""The DC operating point: Newton on the transistor junctions of the
linear network reduced onto them.

Every topology is a builder that produces a :class:`~model.circuit.netlist.Netlist`;
nothing here knows which topology it is solving.  The netlist's shape is
compiled once into a :class:`~model.circuit.plan.Plan` and its equations assembled by
:mod:`model.circuit.assembly`.  The linear network is then reduced, once per design,
onto the 2k junction voltages u (VBE, VBC of each of k transistors):

    u = u₀ − R·i(u)

where u₀ is what the network alone would put across the junctions, R
(2k × 2k) the network's transfer resistances between the junction ports
(polarity sign included) and i(u) the forward-sense (IC, IB) of each
transistor.  Newton on F(u) = u − u₀ + R·i(u) has the Jacobian I + R·G(u)
with G block-diagonal 2 × 2: each iteration is a few whole-array operations
on contiguous (batch, 2k) arrays (the iteration is in
:mod:`model.circuit.junction_newton`).  The iterates are those of Newton on the
full nodal equations (the elimination of the linear part is exact), so the
junction limiting and convergence behave as in a nodal solver.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from model.circuit import device
from model.circuit.assembly import admittance_values, assemble_linear, index_dot, node_dict
from model.circuit.dense import solve_dominant
from model.circuit.junction_newton import (
    _V_TOL,
    MAX_ITER,
    active_start,
    bmv,
    entry_major,
    jacobian,
    left,
    newton,
    newton_step,
    row_max,
    solve_entries,
)
from model.circuit.netlist import Bjt, Netlist
from model.circuit.plan import DC, plan_for


def junction_voltages(q: Bjt, v: dict, sign=None):
    """(VBE, VBC) of transistor q in its forward sense, from node voltages;
    ``sign`` overrides q's polarity sign (one per row of ``v``)."""
    s = q.params.sign if sign is None else sign
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
        """The solution restricted to some batch rows (an index array or a slice)."""
        return OperatingPoint(
            {n: v[rows] for n, v in self.voltages.items()},
            {k: device.JunctionState(*(getattr(st, f)[rows] for f in _STATE_FIELDS)) for k, st in self.states.items()},
            self.converged[rows],
            self.iterations,
            self.residual[rows],
            self.junctions[rows],
        )


_STATE_FIELDS = ("ic", "ib", "dic_dvbe", "dic_dvbc", "dib_dvbe", "dib_dvbc")


def operating_point(net: Netlist, start=None, max_iter: int = MAX_ITER) -> OperatingPoint:
    """Solve the DC operating point of every row of the batch.

    Capacitors are open.  Newton with junction limiting runs on the junction
    voltages of the reduced network until every row has converged or
    ``max_iter`` is reached; rows that did not converge are flagged, never raised.
    ``start`` (batch, transistor, 2) gives first junction voltages (VBE, VBC) to
    begin from, for example a nearby solution; by default each transistor
    starts where it would be if forward active (see :func:`active_start`).
    """
    return _solve(_reduce(net), start, max_iter)


def operating_sweep(net: Netlist, source: str, volts, start=None, max_iter: int = MAX_ITER) -> OperatingPoint:
    """The operating point of every design of ``net`` with voltage source
    ``source`` at each of ``volts`` (batch, m) V, or (m,) for a batch of one.

    Rows come design by design, m points each, as ``net.repeat(m)`` with the
    source set would give; the answer is the same.  The network is reduced
    once per design: the network's drive is affine in a source's voltage, so it
    is found at 0 V and 1 V and every point is a weighted sum of the two.
    ``start`` is as for :func:`operating_point`, one row per point.
    """
    return sweep_reduction(net, source).solve(volts, start, max_iter)


def sweep_reduction(net: Netlist, source: str) -> "SweepReduction":
    """``net`` reduced once for sweeps of voltage source ``source``: several
    :meth:`SweepReduction.solve` calls (a coarse grid, then a finer one) share
    the assembly and elimination."""
    plan = plan_for(net, DC)
    g, v = admittance_values(net, plan)
    v = np.repeat(v, 2, axis=0)
    v[:, plan.constraints.index(source)] = np.tile([0.0, 1.0], net.batch)
    dev = _stack_params([q.params for q in net.of_type(Bjt)])
    dev = dev.map(lambda a: np.repeat(a, 2, axis=0))
    return SweepReduction(net.batch, _reduce(net, np.repeat(g, 2, axis=0), v, dev))


@dataclass(frozen=True)
class SweepReduction:
    """A batch's DC network reduced with one source at 0 V (even rows of
    ``pair``) and 1 V (odd rows): every source voltage is a weighted sum."""

    batch: int
    pair: "_Reduced"

    def solve(self, volts, start=None, max_iter: int = MAX_ITER) -> OperatingPoint:
        """As :func:`operating_sweep` with the source at ``volts`` (V)."""
        volts = np.asarray(volts, dtype=float).reshape(self.batch, -1)
        return _solve(self.pair.along(volts), start, max_iter)

    def slope(self, op: OperatingPoint) -> np.ndarray:
        """∂u/∂(source voltage) (batch, k, 2) of the network linearised at
        ``op`` (one row per design): (I + R·G)⁻¹ ∂u₀/∂v, the small-signal
        junction voltages per volt of the source."""
        red = self.pair
        du0 = (red.u0[1::2] - red.u0[0::2]).T
        r = entry_major(red.r[0::2])
        count = len(red.bjts)
        dev = red.dev.map(lambda a: entry_major(a[0::2]))
        st = device.evaluate(dev, *entry_major(op.junctions).transpose(1, 0, 2))
        jac = jacobian(r, st, count)
        return solve_entries(jac, du0).T.reshape(self.batch, count, 2)


@dataclass(frozen=True)
class _Reduced:
    """A batch's DC network assembled and reduced onto its junctions.

    g, v: admittances and constraint voltages (see :mod:`model.circuit.assembly`);
    drive (batch, n, 1 + 2k): the unknowns for the network's own sources
    (column 0) and for a unit current into each junction (the rest);
    u0, r: the junction equations u = u0 − r·i(u), sign included.
    """

    plan: object
    bjts: list
    g: np.ndarray
    v: np.ndarray
    drive: np.ndarray
    u0: np.ndarray
    r: np.ndarray
    dev: device.DeviceParams
    sign: np.ndarray

    def along(self, t) -> "_Reduced":
        """Rows 0, 2, 4, … solved with a source at 0 V and rows 1, 3, 5, … at
        1 V, turned into t (designs, m) points per design."""
        designs, m = t.shape

        def mix(x):
            x0, x1 = x[0::2], x[1::2]
            w = t.reshape(designs, m, *([1] * (x.ndim - 1)))
            return (x0[:, None] + w * (x1 - x0)[:, None]).reshape(designs * m, *x.shape[1:])

        def same(x):
            return np.repeat(x[0::2], m, axis=0)

        dev = self.dev.map(same)
        return _Reduced(self.plan, self.bjts, same(self.g), mix(self.v),
                        np.concatenate([mix(self.drive[:, :, :1]), same(self.drive[:, :, 1:])], axis=2),
                        mix(self.u0), same(self.r), dev, same(self.sign))


def _reduce(net: Netlist, g=None, v=None, dev=None) -> _Reduced:
    """Assemble and reduce ``net``, or the rows given by admittances g,
    constraint voltages v and device parameters dev of its shape."""
    plan = plan_for(net, DC)
    bjts = net.of_type(Bjt)
    # A part at the edge of float range (a 1e-300 Ω resistor is "valid") may
    # overflow; such a row comes out non-finite and is flagged, not raised.
    with np.errstate(over="ignore", invalid="ignore", divide="ignore"):
        if g is None:
            g, v = admittance_values(net, plan)
            dev = _stack_params([q.params for q in bjts])
        a, b = assemble_linear(plan, g, v)
        sign = np.repeat(dev.sign, 2, axis=1)
        # One solve for the network's own drive and for a unit current in each
        # junction: every Newton iteration then only multiplies 2k × 2k.
        # The linear part alone: diagonally dominant, no pivoting needed.
        # The right-hand sides built entry-major (n, 1 + 2k, batch) and passed
        # as a view: the elimination's own copy then reads them contiguously.
        rhs = np.empty((plan.n, 1 + plan.unknown_drive.shape[1], g.shape[0]), dtype=np.result_type(b, float))
        rhs[:, 0] = b.T
        rhs[:, 1:] = plan.unknown_drive[:, :, None]
        drive = solve_dominant(a, rhs.transpose(2, 0, 1), plan.stamp_pattern)
        t_offset = index_dot(v, plan.term_coef)
        u0 = sign * (index_dot(drive[:, :, 0], plan.unknown_junction) + index_dot(t_offset, plan.term_junction))
        r = sign[:, :, None] * left(plan.unknown_junction.T, drive[:, :, 1:]) * sign[:, None, :]
    return _Reduced(plan, bjts, g, v, drive, u0, r, dev, sign)


def _solve(red: _Reduced, start, max_iter) -> OperatingPoint:
    batch = red.u0.shape[0]
    if start is None:
        u = active_start(red.r, red.u0, red.dev)
    else:
        u = np.array(start, dtype=float).reshape(batch, len(red.bjts), 2)
    u, done, iterations = newton(red.r, red.u0, red.dev, u, max_iter)
    with np.errstate(over="ignore", invalid="ignore", divide="ignore"):
        # The unknowns from one last linearised step, as a nodal Newton would
        # leave them: their error is then second order in that step.
        _, i = newton_step(red.r, red.u0, red.dev, u)
        x = red.drive[:, :, 0] - bmv(red.drive[:, :, 1:], red.sign * i)
    x = np.where(np.isfinite(x), x, 0.0)
    volts = node_dict(red.plan, x, red.v)
    per = [_params_of(red.dev, k) for k in range(len(red.bjts))]
    jv = [junction_voltages(q, volts, p.sign) for q, p in zip(red.bjts, per)]
    states = {q.name: device.evaluate(p, *j) for q, p, j in zip(red.bjts, per, jv)}
    # A part at the edge of float range (a 5e-324 Ω resistor is "valid") gives
    # inf·0 here; such a row's residual comes out NaN and it is flagged, not raised.
    with np.errstate(over="ignore", invalid="ignore"):
        residual, balanced = _kcl_residual(red.plan, red.g, volts, [p.sign for p in per], states)
    converged = done & np.isfinite(residual) & balanced & (residual <= _SHOWN)
    pairs = [np.stack(j, axis=-1) for j in jv]
    junctions = pairs[0][:, None] if len(pairs) == 1 else np.stack(pairs, axis=1)
    return OperatingPoint(volts, states, converged, iterations, residual, junctions)


#: The largest KCL imbalance, relative to the largest branch current, at which
#: the currents still hold the 3 significant figures every figure is shown with
#: (half a unit in the third).  Past it a resistor at the edge of float range
#: (1e-300 Ω: the rounding of a volt across it is 1e284 A) has made the branch
#: currents noise, though every node balances within δV·Σ|g| (see _kcl_residual).
_SHOWN = 5e-4


def _params_of(dev: device.DeviceParams, k: int) -> device.DeviceParams:
    """Transistor k's (batch,) parameters out of (batch, transistor) ones."""
    return dev.map(lambda a: a[:, k])


def _kcl_residual(plan, g, volts, signs, states):
    """(residual, balanced) per row.  residual: the largest |KCL sum| over the
    free (super)nodes over the largest branch current, summed from the branch
    currents at the node voltages found (a figure to show).  balanced: every
    node's |KCL sum| within what a voltage error of the Newton's own tolerance
    explains there (the acceptance test).

    Why not a bound on the relative residual: Newton stops when no junction
    moves by more than _V_TOL (1e-9 V), so it vouches for the node voltages to
    about that, not for the currents to a fixed fraction of the largest one.
    A node whose voltage is off by δV carries an imbalance of up to δV·Σ|g|,
    the sum over the conductances meeting there (resistors, and each
    transistor terminal's ∂I/∂V to either junction).  In a cut-off stage with
    a small rc (14 Ω: 71 mS) the branch currents are nanoamperes, and the
    rounding of a 9 V collector node alone (ε·9 V·71 mS ≈ 1e-16 A) is a few
    1e-9 of them: the old 1e-9 relative bound refused converged designs.
    A row that stopped unconverged is off by far more than 1e-9 V at some
    node (quadratic convergence: the last step's size), and is refused.
    Where Σ|g| is huge the allowance says nothing; _SHOWN covers that.
    """
    into = np.stack([c for s, st in zip(signs, states.values()) for c in _terminal_currents(s, st)], axis=1)
    drops = index_dot(np.stack([volts[n] for n in plan.nodes], axis=1), plan.adm_incidence)
    branch = g * drops
    r = index_dot(branch, plan.adm_unknown) + index_dot(into, plan.pick_term)
    slopes = np.stack([c for st in states.values() for c in _terminal_conductances(st)], axis=1)
    allowed = _V_TOL * (index_dot(np.abs(g), plan.adm_unknown_abs) + index_dot(slopes, plan.pick_term_abs))
    balanced = np.all(np.abs(r) <= allowed, axis=1)
    scale = np.maximum(row_max(np.abs(branch)), row_max(np.abs(into)))
    worst = row_max(np.abs(r))
    with np.errstate(invalid="ignore", divide="ignore"):
        return np.where(scale > 0, worst / scale, worst), balanced


def _terminal_conductances(st: device.JunctionState):
    """Σ|∂I/∂(VBE, VBC)| (S) of the collector, base and emitter currents."""
    gc = np.abs(st.dic_dvbe) + np.abs(st.dic_dvbc)
    gb = np.abs(st.dib_dvbe) + np.abs(st.dib_dvbc)
    return gc, gb, np.abs(st.dic_dvbe + st.dib_dvbe) + np.abs(st.dic_dvbc + st.dib_dvbc)


def _terminal_currents(s, st: device.JunctionState):
    """Currents into the collector, base and emitter (A) of a transistor of sign s."""
    return s * st.ic, s * st.ib, -s * (st.ic + st.ib)


def _stack_params(params: list) -> device.DeviceParams:
    """Parameters of several transistors as (batch, transistor) arrays."""
    if len(params) == 1:  # a column view: np.stack's own cost is most of a design's
        return params[0].map(lambda a: a[:, None])
    return device.DeviceParams(*(np.stack([getattr(p, f) for p in params], axis=1) for f in device.PARAM_FIELDS))


