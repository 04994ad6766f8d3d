"""Newton on the junction voltages of a network reduced onto its transistors:
F(u) = u − u₀ + R·i(u) = 0, with R and u₀ from :mod:`model.circuit.newton`.

The iteration, its closed-form 2×2 steps per transistor (2k×2k for k),
the forward-active start and the logarithmic junction limiting; a
written-out path for one transistor on small working sets, which performs
the same operations in the same order as the general one.
"""

from __future__ import annotations

import numpy as np

from model.circuit import device
from model.circuit.dense import solve_batched

#: Newton stops when no node moves by more than this (V) and no junction was
#: limited.  Convergence is quadratic, so the point after such a step is good to
#: far better than this; the KCL check (each node within _V_TOL·Σ|g|, see
#: model.circuit.newton) still guards the result.
_V_TOL = 1e-9
#: Where the start's fixed-point iteration on VBE begins: the junction at 1 mA.
_START_CURRENT = 1e-3
MAX_ITER = 200
#: From this batch size on, one Newton step copies its inputs entry-major.
_COPY_FROM = 256
#: Up to this many rows, one transistor's Newton runs on Python floats
#: (about 2 µs a row and iteration, against some 35 µs for a numpy iteration).
_SCALAR_UPTO = 16


def entry_major(a):
    """(batch, …) → (…, batch), contiguous.  (A plain transpose: np.moveaxis
    costs several times the copy on the small arrays of one design.)"""
    return np.ascontiguousarray(a.transpose(*range(1, a.ndim), 0))


def newton(r, u0, dev: device.DeviceParams, u, max_iter: int = MAX_ITER):
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
    inputs = [r.reshape(batch, -1), u0, *(getattr(dev, f) for f in device.PARAM_FIELDS), v_crit]
    pack = np.empty((sum(a.shape[1] for a in inputs), batch))
    at = 0
    for a in inputs:
        pack[at : at + a.shape[1]] = a.T
        at += a.shape[1]
    u = entry_major(u.reshape(batch, -1)).reshape(count, 2, batch)
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
            if count == 1 and rows.size <= _SCALAR_UPTO:
                u_one, done_one, iterations = _scalar_loop(pack, u, done, iterations - 1, max_iter)
                u_out[..., rows], done_out[rows] = u_one, done_one
                break
            if count == 1 and rows.size < _COPY_FROM:
                u_one, done_one, iterations = _one_loop(pack, r, u0, dev, u, vt_j, v_crit, pack[betas], done,
                                                        iterations - 1, max_iter)
                u_out[..., rows], done_out[rows] = u_one, done_one
                break
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


def _one_loop(pack, r, u0, dev, u, vt, v_crit, betas, done, iterations: int, max_iter: int):
    """:func:`newton`'s loop for one transistor on fewer than _COPY_FROM rows,
    from iteration ``iterations`` + 1 on (inputs as :func:`_one_iteration`
    takes them, ``pack`` and ``done`` as newton has them).  Rows leave the
    working set as in newton, but are frozen where they are instead of moved
    out: on a design's few hundred rows the copies of a shrinking working set
    cost more than iterating every row.  The last few rows go on in
    :func:`_scalar_loop`.  Every row stops at the same iterate as in newton.
    Returns (u, converged, iterations)."""
    frozen = np.zeros_like(done)
    working = done.size
    for iterations in range(iterations + 1, max_iter + 1):
        if working <= _SCALAR_UPTO:
            rest = np.flatnonzero(~frozen)
            u_rest, frozen[rest], iterations = _scalar_loop(pack[:, rest], u[..., rest], done[rest],
                                                            iterations - 1, max_iter)
            u = u.copy()
            u[..., rest] = u_rest
            break
        u_new, moved, limited = _one_iteration(r, u0, dev, u, vt, v_crit, betas)
        magnitude = np.abs(u_new[0])  # the larger of the two, as a maximum over both axes
        done |= (moved <= _V_TOL * (1.0 + np.maximum(magnitude[0], magnitude[1]))) & ~limited
        u = np.where(frozen, u, u_new) if working < done.size else u_new
        if iterations == 1:
            continue
        n_done = np.count_nonzero(done) - (done.size - working)
        if 4 * n_done >= working:
            frozen = done.copy()
            working -= n_done
            if working == 0:
                break
    return u, frozen, iterations


def _scalar_loop(pack, u, done, iterations: int, max_iter: int):
    """:func:`_one_loop` on Python floats, for a working set of a few rows
    (a design's operating point and its β variants, the last unconverged
    points of a sweep), where one numpy call per operation costs more than
    the arithmetic of every row.
    Each row goes through the same operations in the same order as in
    :func:`_one_iteration` (exp and log from numpy, which give the same
    floats on a scalar as on an array; the rest IEEE arithmetic either
    way), and rows are retired by the same rule, so every row stops on the
    same iterate.  ``pack``, ``u`` and ``done`` as newton has them."""
    rows = pack.T.tolist()
    us = u[0].T.tolist()
    done = done.tolist()
    frozen = [False] * len(us)
    working = len(us)
    for iterations in range(iterations + 1, max_iter + 1):
        for j, (p, (vbe, vbc)) in enumerate(zip(rows, us)):
            if frozen[j]:
                continue
            new_e, new_c, moved, limited = _scalar_iteration(p, vbe, vbc)
            size = _nan_max(abs(new_e), abs(new_c))
            done[j] = done[j] or (moved <= _V_TOL * (1.0 + size) and not limited)
            us[j] = [new_e, new_c]
        if iterations == 1:
            continue
        n_done = sum(done) - (len(us) - working)
        if 4 * n_done >= working:
            frozen = list(done)
            working -= n_done
            if working == 0:
                break
    return np.array(us).T[None], np.array(frozen, dtype=bool), iterations


def _scalar_iteration(p, vbe: float, vbc: float):
    """:func:`_one_iteration` for one row of newton's pack ``p`` (a list of
    floats): (new VBE, new VBC, largest move, whether either was limited)."""
    s0, s1 = _scalar_linearised(p, vbe, vbc)[:2]
    vt, v_crit = p[10], p[12]
    new_e, new_c = vbe + s0, vbc + s1
    limited = False
    out = []
    for new, old in ((new_e, vbe), (new_c, vbc)):
        if new > v_crit and abs(new - old) > 2.0 * vt:  # device.limit_junction, written out
            limited = True
            if old > 0.0:
                arg = 1.0 + (new - old) / vt
                new = old + vt * float(np.log(max(arg, 1e-300))) if arg > 0.0 else v_crit
            else:
                new = vt * float(np.log(max(new / vt, 1e-300)))
        out.append(float(new))
    new_e, new_c = out
    return new_e, new_c, _nan_max(abs(new_e - vbe), abs(new_c - vbc)), limited


def _scalar_linearised(p, vbe: float, vbc: float):
    """:func:`_one_transistor` for one row of newton's pack ``p``: the step,
    (IC, IB), ∂IC/∂(VBE, VBC) and ∂IB/∂(VBE, VBC), as floats."""
    try:
        return _scalar_step(p, vbe, vbc)
    except ZeroDivisionError:  # numpy's quotient by zero (inf or nan), on numpy scalars
        return tuple(float(x) for x in _scalar_step([np.float64(x) for x in p], np.float64(vbe), np.float64(vbc)))


def _scalar_step(p, vbe, vbc):
    """:func:`_scalar_linearised` without the guard: the same device
    equations and 2 × 2 solve as :func:`_one_transistor`, term for term in
    the same order."""
    r00, r01, r10, r11, u0e, u0c, i_s, beta_f, beta_r, va, vt = p[:11]
    (e_e, slope_e), (e_c, slope_c) = _scalar_exp(vbe / vt), _scalar_exp(vbc / vt)
    i_f, i_r = i_s * (e_e - 1.0), i_s * (e_c - 1.0)
    g_f, g_r = i_s * slope_e / vt, i_s * slope_c / vt
    f_beta, r_beta, gf_beta, gr_beta = i_f / beta_f, i_r / beta_r, g_f / beta_f, g_r / beta_r
    early = 1.0 - vbc / va
    net = i_f - i_r
    ic = net * early - r_beta
    ib = f_beta + r_beta
    d_vbe = g_f * early
    d_vbc = -(g_r * early) - net / va - gr_beta
    f0 = (u0e - vbe) - (r00 * ic + r01 * ib)
    f1 = (u0c - vbc) - (r10 * ic + r11 * ib)
    m00 = (r00 * d_vbe + r01 * gf_beta) + 1.0
    m01 = r00 * d_vbc + r01 * gr_beta
    m10 = r10 * d_vbe + r11 * gf_beta
    m11 = (r10 * d_vbc + r11 * gr_beta) + 1.0
    det = m00 * m11 - m01 * m10
    return (m11 * f0 - m01 * f1) / det, (m00 * f1 - m10 * f0) / det, ic, ib, d_vbe, d_vbc, gf_beta, gr_beta


def _scalar_exp(x):
    """(exp, slope) of device._exp_limited for one float: exp(x) itself up to
    the linear continuation (NaN stays NaN)."""
    if x <= device._EXP_LIMIT:
        e = float(np.exp(x))
        return e, e
    slope = float(np.exp(x if x != x else device._EXP_LIMIT))
    return slope * (1.0 + _nan_max(x - device._EXP_LIMIT, 0.0)), slope


def _nan_max(a, b):
    """np.maximum of two floats: NaN if either is."""
    return a if a > b or a != a else b


def _unpack(pack, count: int):
    """Views of :func:`newton`'s packed inputs: r (2k, 2k, b), u0 (2k, b), the
    (k, b) device parameters, and VT and the critical voltage as (k, 1, b)."""
    n = 2 * count
    at = n * n + n
    dev = device.DeviceParams(*(pack[at + j * count : at + (j + 1) * count] for j in range(len(device.PARAM_FIELDS))))
    v_crit = pack[at + len(device.PARAM_FIELDS) * count :]
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


def active_start(r, u0, dev: device.DeviceParams):
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
        if count == 1 and u0.shape[0] <= _SCALAR_UPTO:
            try:
                return _scalar_start(r, u0, dev, crit)
            except ZeroDivisionError:  # a row with no resistance to its base: the arrays give inf or nan
                pass
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


def _scalar_start(r, u0, dev, crit):
    """:func:`active_start` for one transistor on Python floats, row by row
    (the same operations in the same order, numpy's logarithms)."""
    rows = np.concatenate([r.reshape(-1, 4), u0, dev.beta_f, dev.vt, dev.i_s, crit], axis=1).tolist()
    out = []
    for r_ee, r_ec, r_ce, r_cc, u0_e, u0_c, beta, vt, i_s, v_crit in rows:
        per_ib_e = r_ee * beta + r_ec
        vbe = vt * float(np.log(_START_CURRENT / i_s))
        for _ in range(3):
            ib = _nan_max((u0_e - vbe) / per_ib_e, 0.0)
            vbe = vt * float(np.log1p(beta * ib / i_s)) if ib > 0.0 else u0_e
        vbc = u0_c - (r_ce * beta + r_cc) * ib
        out.append([[_nan_min(vbe, v_crit), _nan_min(vbc, v_crit)]])
    out = np.array(out)
    return np.where(np.isfinite(out), out, 0.0)


def _nan_min(a, b):
    """np.minimum of two floats: NaN if either is."""
    return a if a < b or a != a else b


def newton_step(r, u0, dev: device.DeviceParams, u):
    """The Newton step (batch, k, 2) from junction voltages u (batch, k, 2), and
    the forward-sense (IC, IB) (batch, 2k) the linearised devices carry after it."""
    if u.shape[1] == 1 and u.shape[0] <= _SCALAR_UPTO:
        rows = np.concatenate([r.reshape(-1, 4), u0, dev.i_s, dev.beta_f, dev.beta_r, dev.va, dev.vt], axis=1)
        out = [_scalar_linearised(p, vbe, vbc) for p, (vbe, vbc) in zip(rows.tolist(), u[:, 0].tolist())]
        step = np.array([[s0, s1] for s0, s1, *_ in out])
        i = np.array([[ic + (dv0 * s0 + dv1 * s1), ib + (gb0 * s0 + gb1 * s1)]
                      for s0, s1, ic, ib, dv0, dv1, gb0, gb1 in out])
        return step[:, None], i
    if u.shape[1] == 1 and u.shape[0] < _COPY_FROM:
        # Contiguous entry-major copies: strided reads cost more than the copies
        # (the device fields, (batch, 1), transpose contiguous as they are).
        step, (ic, ib), d_ic, g_beta = _one_transistor(
            entry_major(r), entry_major(u0), dev.map(lambda a: a.T), entry_major(u[:, 0]))
        i = np.empty((u.shape[0], 2))
        i[:, 0] = ic + (d_ic[0] * step[0] + d_ic[1] * step[1])
        i[:, 1] = ib + (g_beta[0] * step[0] + g_beta[1] * step[1])
        return step.T[:, None], i
    # Entry-major views on a design's few rows (one step reads each entry
    # once); contiguous copies on big batches, where strided reads cost more.
    em = entry_major if u.shape[0] >= _COPY_FROM else (lambda a: a.transpose(*range(1, a.ndim), 0))
    step, i = _step(em(r), em(u0), dev.map(em), em(u))
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
    step = solve_entries(jacobian(r, st, count), minus_f)
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


def jacobian(r, st: device.JunctionState, count: int):
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


def solve_entries(m, f):
    """Solve m (n, n, b) · x = f (n, b) for every b; 2 × 2 in closed form."""
    if m.shape[0] == 2:
        det = m[0, 0] * m[1, 1] - m[0, 1] * m[1, 0]
        return np.stack([m[1, 1] * f[0] - m[0, 1] * f[1], m[0, 0] * f[1] - m[1, 0] * f[0]]) / det
    return solve_batched(m.transpose(2, 0, 1), f.T).T


def row_max(a):
    """Largest entry of each row of a (batch, n) array; 0 when n is 0."""
    if a.shape[1] == 0:
        return np.zeros(a.shape[0])
    out = a[:, 0]
    for k in range(1, a.shape[1]):
        out = np.maximum(out, a[:, k])
    return out


# Products of many tiny matrices: a loop over the short inner axis with
# whole-batch operations beats einsum and matmul, which go matrix by matrix.
def bmv(m, x):
    """m (b, n, p) @ x (b, p) for every batch row b."""
    out = np.zeros(m.shape[:2], dtype=np.result_type(m, x))
    for j in range(x.shape[1]):
        out += m[:, :, j] * x[:, j, None]
    return out


def left(c, x):
    """A constant c (n, p) times x (b, p, q) for every batch row b; summed
    entry-major (each x[:, j] of an entry-major x is then contiguous)."""
    out = np.zeros((c.shape[0], x.shape[2], x.shape[0]))
    for i, j in zip(*np.nonzero(c)):
        out[i] += c[i, j] * x[:, j].T
    return out.transpose(2, 0, 1)
