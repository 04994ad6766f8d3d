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
on contiguous (batch, 2k) arrays.  The iterates are those of Newton on the
full nodal equations (the elimination of the linear part is exact), so the
junction limiting and convergence behave as in a nodal solver.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from model.circuit import device
from model.circuit.assembly import admittance_values, assemble_linear, index_dot, node_dict
from model.circuit.dense import solve_batched, solve_dominant
from model.circuit.netlist import Bjt, Netlist
from model.circuit.plan import DC, plan_for

#: Newton stops when no node moves by more than this (V) and no junction was
#: limited.  Convergence is quadratic, so the point after such a step is good to
#: far better than this; the KCL residual check (1e-9) still guards the result.
_V_TOL = 1e-9
#: Where the start's fixed-point iteration on VBE begins: the junction at 1 mA.
_START_CURRENT = 1e-3
_MAX_ITER = 200
#: From this batch size on, one Newton step copies its inputs entry-major.
_COPY_FROM = 256


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


def operating_point(net: Netlist, start=None, max_iter: int = _MAX_ITER) -> OperatingPoint:
    """Solve the DC operating point of every row of the batch.

    Capacitors are open.  Newton with junction limiting runs on the junction
    voltages of the reduced network until every row has converged or
    ``max_iter`` is reached; rows that did not converge are flagged, never raised.
    ``start`` (batch, transistor, 2) gives first junction voltages (VBE, VBC) to
    begin from, for example a nearby solution; by default each transistor
    starts where it would be if forward active (see :func:`_active_start`).
    """
    return _solve(_reduce(net), start, max_iter)


def operating_sweep(net: Netlist, source: str, volts, start=None, max_iter: int = _MAX_ITER) -> OperatingPoint:
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
    dev = device.DeviceParams(*(np.repeat(getattr(dev, f), 2, axis=0) for f in _PARAM_FIELDS))
    return SweepReduction(net.batch, _reduce(net, np.repeat(g, 2, axis=0), v, dev))


@dataclass(frozen=True)
class SweepReduction:
    """A batch's DC network reduced with one source at 0 V (even rows of
    ``pair``) and 1 V (odd rows): every source voltage is a weighted sum."""

    batch: int
    pair: "_Reduced"

    def solve(self, volts, start=None, max_iter: int = _MAX_ITER) -> OperatingPoint:
        """As :func:`operating_sweep` with the source at ``volts`` (V)."""
        volts = np.asarray(volts, dtype=float).reshape(self.batch, -1)
        return _solve(self.pair.along(volts), start, max_iter)

    def slope(self, op: OperatingPoint) -> np.ndarray:
        """∂u/∂(source voltage) (batch, k, 2) of the network linearised at
        ``op`` (one row per design): (I + R·G)⁻¹ ∂u₀/∂v, the small-signal
        junction voltages per volt of the source."""
        red = self.pair
        du0 = (red.u0[1::2] - red.u0[0::2]).T
        r = _entry_major(red.r[0::2])
        count = len(red.bjts)
        dev = _entry_major_params(device.DeviceParams(*(getattr(red.dev, f)[0::2] for f in _PARAM_FIELDS)))
        st = device.evaluate(dev, *_entry_major(op.junctions).transpose(1, 0, 2))
        jac = _jacobian(r, st, count)
        return _solve_entries(jac, du0).T.reshape(self.batch, count, 2)


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

        dev = device.DeviceParams(*(same(getattr(self.dev, f)) for f in _PARAM_FIELDS))
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
        r = sign[:, :, None] * _left(plan.unknown_junction.T, drive[:, :, 1:]) * sign[:, None, :]
    return _Reduced(plan, bjts, g, v, drive, u0, r, dev, sign)


def _solve(red: _Reduced, start, max_iter) -> OperatingPoint:
    batch = red.u0.shape[0]
    if start is None:
        u = _active_start(red.r, red.u0, red.dev)
    else:
        u = np.array(start, dtype=float).reshape(batch, len(red.bjts), 2)
    u, done, iterations = newton(red.r, red.u0, red.dev, u, max_iter)
    with np.errstate(over="ignore", invalid="ignore", divide="ignore"):
        # The unknowns from one last linearised step, as a nodal Newton would
        # leave them: their error is then second order in that step.
        _, i = newton_step(red.r, red.u0, red.dev, u)
        x = red.drive[:, :, 0] - _bmv(red.drive[:, :, 1:], red.sign * i)
    x = np.where(np.isfinite(x), x, 0.0)
    volts = node_dict(red.plan, x, red.v)
    per = [_params_of(red.dev, k) for k in range(len(red.bjts))]
    jv = [junction_voltages(q, volts, p.sign) for q, p in zip(red.bjts, per)]
    states = {q.name: device.evaluate(p, *j) for q, p, j in zip(red.bjts, per, jv)}
    # A part at the edge of float range (a 5e-324 Ω resistor is "valid") gives
    # inf·0 here; such a row's residual comes out NaN and it is flagged, not raised.
    with np.errstate(over="ignore", invalid="ignore"):
        residual = _kcl_residual(red.plan, red.g, volts, [p.sign for p in per], states)
    converged = done & np.isfinite(residual) & (residual <= 1e-9)
    pairs = [np.stack(j, axis=-1) for j in jv]
    junctions = pairs[0][:, None] if len(pairs) == 1 else np.stack(pairs, axis=1)
    return OperatingPoint(volts, states, converged, iterations, residual, junctions)


def _params_of(dev: device.DeviceParams, k: int) -> device.DeviceParams:
    """Transistor k's (batch,) parameters out of (batch, transistor) ones."""
    return device.DeviceParams(*(getattr(dev, f)[:, k] for f in _PARAM_FIELDS))


def _kcl_residual(plan, g, volts, signs, states):
    """Largest |KCL sum| over the free (super)nodes over the largest branch
    current, summed from the branch currents at the node voltages found."""
    into = np.stack([c for s, st in zip(signs, states.values()) for c in _terminal_currents(s, st)], axis=1)
    drops = index_dot(np.stack([volts[n] for n in plan.nodes], axis=1), plan.adm_incidence)
    branch = g * drops
    r = index_dot(branch, plan.adm_unknown) + index_dot(into, plan.term_pick.T)
    scale = np.maximum(_row_max(np.abs(branch)), _row_max(np.abs(into)))
    worst = _row_max(np.abs(r))
    with np.errstate(invalid="ignore", divide="ignore"):
        return np.where(scale > 0, worst / scale, worst)


def _terminal_currents(s, st: device.JunctionState):
    """Currents into the collector, base and emitter (A) of a transistor of sign s."""
    return s * st.ic, s * st.ib, -s * (st.ic + st.ib)


def newton(r, u0, dev: device.DeviceParams, u, max_iter: int = _MAX_ITER):
    """Newton on F(u) = u − u₀ + R·i(u) for every batch row, in numpy.

    r (batch, 2k, 2k), u0 (batch, 2k) in V and Ω; dev holds (batch, k)
    parameters; u (batch, k, 2) the first junction voltages.  Rows that have
    converged leave the working set whenever they make up a quarter of it,
    so a few slow rows do not make the whole batch pay for their extra
    iterations.  Returns (u, converged, iterations).
    """
    batch, count = u.shape[0], u.shape[1]
    # Every per-row input entry-major in one (rows, batch) array: each
    # operation below then runs over one contiguous batch axis, and dropping
    # the converged rows is one indexing instead of one per input.
    with np.errstate(invalid="ignore", over="ignore", divide="ignore"):
        v_crit = device.critical_voltage(dev)
    inputs = [r.reshape(batch, -1), u0, *(getattr(dev, f) for f in _PARAM_FIELDS), v_crit]
    pack = np.empty((sum(a.shape[1] for a in inputs), batch))
    at = 0
    for a in inputs:
        pack[at : at + a.shape[1]] = a.T
        at += a.shape[1]
    u = _entry_major(u.reshape(batch, -1)).reshape(count, 2, batch)
    u_out = np.full((count, 2, batch), np.nan)
    done_out = np.zeros(batch, dtype=bool)
    rows = np.arange(batch)
    done = np.zeros(batch, dtype=bool)
    iterations = 0
    # βF and βR of a single transistor: adjacent rows of the pack.
    betas = slice(inputs[0].shape[1] + inputs[1].shape[1] + count, inputs[0].shape[1] + inputs[1].shape[1] + 3 * count)
    with np.errstate(invalid="ignore", over="ignore", divide="ignore"):
        r, u0, dev, vt_j, v_crit = _unpack(pack, count)
        for iterations in range(1, max_iter + 1):
            # Written out for one transistor where numpy's per-call cost
            # dominates; on big batches the general step's memory traffic is less.
            if count == 1 and rows.size < _COPY_FROM:
                u_new, moved, limited = _one_iteration(r, u0, dev, u, vt_j, v_crit, pack[betas])
            else:
                step, _ = _step(r, u0, dev, u, currents=False)
                u_new, limited = device.limit_junction(u + step, u, vt_j, v_crit)
                moved = np.abs(u_new - u).max(axis=(0, 1))
                limited = limited.any(axis=(0, 1))
            size = np.abs(u_new).max(axis=(0, 1))
            done |= (moved <= _V_TOL * (1.0 + size)) & ~limited
            u = u_new
            if iterations == 1:
                continue
            n_done = np.count_nonzero(done)
            if 4 * n_done >= rows.size:
                u_out[..., rows[done]], done_out[rows[done]] = u[..., done], True
                if n_done == rows.size:
                    break
                keep = ~done
                rows, u, pack, done = rows[keep], u[..., keep], pack[:, keep], done[keep]
                r, u0, dev, vt_j, v_crit = _unpack(pack, count)
        else:
            u_out[..., rows] = u
    return u_out.transpose(2, 0, 1).copy(), done_out, iterations


def _unpack(pack, count: int):
    """Views of :func:`newton`'s packed inputs: r (2k, 2k, b), u0 (2k, b), the
    (k, b) device parameters, and VT and the critical voltage as (k, 1, b)."""
    n = 2 * count
    at = n * n + n
    dev = device.DeviceParams(*(pack[at + j * count : at + (j + 1) * count] for j in range(len(_PARAM_FIELDS))))
    v_crit = pack[at + len(_PARAM_FIELDS) * count :]
    return pack[: n * n].reshape(n, n, -1), pack[n * n : at], dev, dev.vt[:, None], v_crit[:, None]


def _one_transistor(r, u0, dev, u, betas=None):
    """:func:`_step` for one transistor in fewer whole-array operations (on a
    design's few hundred sweep points numpy's per-call cost dominates): the
    same device equations and 2 × 2 solve, term for term in the same order, so
    the same rounding.  r (2, 2, b), u0 (2, b), dev (1, b), u (2, b) in the
    forward sense.  Returns the step (2, b), the currents (IC, IB) and the
    columns of ∂(IC, IB)/∂(VBE, VBC): ∂IC (2, b) and ∂IB (2, b)."""
    x = u / dev.vt
    if x.max() <= device._EXP_LIMIT:  # below the linear continuation, exp alone is exact
        e = slope = np.exp(x)
    else:
        e, slope = device._exp_limited(x)
    both = dev.i_s * (e - 1.0)  # IF, IR
    g = dev.i_s * slope / dev.vt  # dIF/dVBE, dIR/dVBC
    # (IF/βF, IR/βR) and (gF/βF, gR/βR) in one division each; newton's
    # packed inputs hold βF and βR in adjacent rows, a view.
    betas = np.concatenate([dev.beta_f, dev.beta_r]) if betas is None else betas
    per_beta, g_beta = both / betas, g / betas
    early = 1.0 - u[1] / dev.va[0]
    net = both[0] - both[1]
    ic = net * early - per_beta[1]
    ib = per_beta[0] + per_beta[1]
    d_ic = g * early
    d_ic[1] = -d_ic[1] - net / dev.va[0] - g_beta[1]
    minus_f = (u0 - u) - (r[:, 0] * ic + r[:, 1] * ib)
    jac = r[:, 0:1] * d_ic + r[:, 1:2] * g_beta
    m00, m11, m01, m10 = jac[0, 0] + 1.0, jac[1, 1] + 1.0, jac[0, 1], jac[1, 0]
    det = m00 * m11 - m01 * m10
    step = np.empty_like(minus_f)
    np.divide(m11 * minus_f[0] - m01 * minus_f[1], det, out=step[0])
    np.divide(m00 * minus_f[1] - m10 * minus_f[0], det, out=step[1])
    return step, (ic, ib), d_ic, g_beta


def _one_iteration(r, u0, dev, u, vt, v_crit, betas=None):
    """One limited Newton iteration of a single transistor on entry-major
    arrays (u (1, 2, b)): (new u, largest move per row, whether any of the
    row's junctions was limited), as the general loop computes them."""
    step = _one_transistor(r, u0, dev, u[0], betas)[0]
    u_new = u + step[None]
    moved = np.abs(u_new - u)
    big = (u_new > v_crit) & (moved > 2.0 * vt)
    if big.any():
        u_new, big = device.limit_junction(u_new, u, vt, v_crit)
        moved = np.abs(u_new - u)
    return u_new, np.maximum(moved[0, 0], moved[0, 1]), big[0, 0] | big[0, 1]


def _active_start(r, u0, dev: device.DeviceParams):
    """First junction voltages (batch, k, 2) if each transistor were forward
    active with IC = βF·IB (Early and coupling between transistors left out):
    IB from the network's own two-port, u = u₀ − R·i, and VBE = VT·ln(IC/IS)
    by a few fixed-point rounds (the logarithm is flat, so they settle fast).
    A cut-off transistor starts at u₀; both voltages stay below the critical
    voltage so a saturated guess cannot start Newton on a runaway exponential.
    """
    count = dev.vt.shape[1]
    out = np.empty((u0.shape[0], count, 2))
    with np.errstate(invalid="ignore", over="ignore", divide="ignore"):
        crit = device.critical_voltage(dev)
        for t in range(count):
            e, c = 2 * t, 2 * t + 1
            beta, vt, i_s = dev.beta_f[:, t], dev.vt[:, t], dev.i_s[:, t]
            per_ib_e = r[:, e, e] * beta + r[:, e, c]
            vbe = vt * np.log(_START_CURRENT / i_s)
            for _ in range(3):
                ib = np.maximum((u0[:, e] - vbe) / per_ib_e, 0.0)
                vbe = np.where(ib > 0.0, vt * np.log1p(beta * ib / i_s), u0[:, e])
            vbc = u0[:, c] - (r[:, c, e] * beta + r[:, c, c]) * ib
            out[:, t, 0] = np.minimum(vbe, crit[:, t])
            out[:, t, 1] = np.minimum(vbc, crit[:, t])
        return np.where(np.isfinite(out), out, 0.0)


def newton_step(r, u0, dev: device.DeviceParams, u):
    """The Newton step (batch, k, 2) from junction voltages u (batch, k, 2), and
    the forward-sense (IC, IB) (batch, 2k) the linearised devices carry after it."""
    if u.shape[1] == 1 and u.shape[0] < _COPY_FROM:
        step, (ic, ib), d_ic, g_beta = _one_transistor(
            r.transpose(1, 2, 0), u0.T, device.DeviceParams(*(getattr(dev, f).T for f in _PARAM_FIELDS)), u[:, 0].T)
        i = np.empty((u.shape[0], 2))
        i[:, 0] = ic + (d_ic[0] * step[0] + d_ic[1] * step[1])
        i[:, 1] = ib + (g_beta[0] * step[0] + g_beta[1] * step[1])
        return step.T[:, None], i
    # Entry-major views on a design's few rows (one step reads each entry
    # once); contiguous copies on big batches, where strided reads cost more.
    em = _entry_major if u.shape[0] >= _COPY_FROM else (lambda a: a.transpose(*range(1, a.ndim), 0))
    step, i = _step(em(r), em(u0), device.DeviceParams(*(em(getattr(dev, f)) for f in _PARAM_FIELDS)), em(u))
    return step.transpose(2, 0, 1), i.T


def _step(r, u0, dev, u, currents: bool = True):
    """:func:`newton_step` on entry-major arrays: r (2k, 2k, b), u0 (2k, b),
    dev (k, b), u (k, 2, b).  Returns the step (k, 2, b) and currents (2k, b),
    or None for the currents unless ``currents`` (the loop needs only the step)."""
    count = u.shape[0]
    st = device.evaluate(dev, u[:, 0], u[:, 1])
    i = np.stack([st.ic, st.ib], axis=1).reshape(2 * count, -1)
    # −F(u) = (u₀ − u) − R·i: the same rounding as negating F afterwards.
    minus_f = (u0 - u.reshape(2 * count, -1)) - _matvec(r, i)
    step = _solve_entries(_jacobian(r, st, count), minus_f)
    if not currents:
        return step.reshape(count, 2, -1), None
    g = _conductances(st)
    di = np.empty_like(step)
    for t in range(count):
        for a in range(2):
            di[2 * t + a] = g[a][0][t] * step[2 * t] + g[a][1][t] * step[2 * t + 1]
    return step.reshape(count, 2, -1), i + di


def _conductances(st: device.JunctionState):
    """G's 2 × 2 blocks: g[a][c][t] = ∂(IC, IB)[a]/∂(VBE, VBC)[c] of transistor t."""
    return ((st.dic_dvbe, st.dic_dvbc), (st.dib_dvbe, st.dib_dvbc))


def _jacobian(r, st: device.JunctionState, count: int):
    """I + R·G (2k, 2k, b) on entry-major arrays; G is block-diagonal: each
    transistor's 2 × 2 ∂(IC, IB)/∂(VBE, VBC)."""
    g = _conductances(st)
    jac = np.empty_like(r)
    for t in range(count):
        for c in range(2):
            jac[:, 2 * t + c] = r[:, 2 * t] * g[0][c][t] + r[:, 2 * t + 1] * g[1][c][t]
    jac[np.arange(2 * count), np.arange(2 * count)] += 1.0
    return jac


def _matvec(m, x):
    """m (n, p, b) times x (p, b) for every b."""
    out = m[:, 0] * x[0]
    for j in range(1, x.shape[0]):
        out += m[:, j] * x[j]
    return out


def _solve_entries(m, f):
    """Solve m (n, n, b) · x = f (n, b) for every b; 2 × 2 in closed form."""
    if m.shape[0] == 2:
        det = m[0, 0] * m[1, 1] - m[0, 1] * m[1, 0]
        return np.stack([m[1, 1] * f[0] - m[0, 1] * f[1], m[0, 0] * f[1] - m[1, 0] * f[0]]) / det
    return solve_batched(m.transpose(2, 0, 1), f.T).T


def _entry_major(a):
    """(batch, …) → (…, batch), contiguous.  (A plain transpose: np.moveaxis
    costs several times the copy on the small arrays of one design.)"""
    return np.ascontiguousarray(a.transpose(*range(1, a.ndim), 0))


def _entry_major_params(p: device.DeviceParams) -> device.DeviceParams:
    return device.DeviceParams(*(_entry_major(getattr(p, f)) for f in _PARAM_FIELDS))


_PARAM_FIELDS = ("i_s", "beta_f", "beta_r", "va", "vt", "sign")


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
    if len(params) == 1:  # a column view: np.stack's own cost is most of a design's
        return device.DeviceParams(*(getattr(params[0], f)[:, None] for f in fields))
    return device.DeviceParams(*(np.stack([getattr(p, f) for p in params], axis=1) for f in fields))


# Products of many tiny matrices: a loop over the short inner axis with
# whole-batch operations beats einsum and matmul, which go matrix by matrix.
def _bmv(m, x):
    """m (b, n, p) @ x (b, p) for every batch row b."""
    out = np.zeros(m.shape[:2], dtype=np.result_type(m, x))
    for j in range(x.shape[1]):
        out += m[:, :, j] * x[:, j, None]
    return out


def _left(c, x):
    """A constant c (n, p) times x (b, p, q) for every batch row b; summed
    entry-major (each x[:, j] of an entry-major x is then contiguous)."""
    out = np.zeros((c.shape[0], x.shape[2], x.shape[0]))
    for i, j in zip(*np.nonzero(c)):
        out[i] += c[i, j] * x[:, j].T
    return out.transpose(2, 0, 1)
