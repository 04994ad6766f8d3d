"""The numba-compiled Newton loop; imported only by :func:`model.kernel.load`.

Row by row it takes exactly the steps of :func:`model.solve.newton` (see
there): the device equations of :func:`model.device.evaluate`, the limiting
of :func:`model.device.limit_junction` and the same convergence test.
"""

from __future__ import annotations

import math

import numpy as np
from numba import njit

from .device import _EXP_LIMIT


@njit(cache=True)
def exp_limited(x):
    """exp(x) continued linearly above the limit, and its slope (device._exp_limited)."""
    slope = math.exp(min(x, _EXP_LIMIT))
    return slope * (1.0 + max(x - _EXP_LIMIT, 0.0)), slope


@njit(cache=True)
def limit(v_new, v_old, vt, v_crit):
    """One junction's step limited as in device.limit_junction; (voltage, limited)."""
    if not (v_new > v_crit and abs(v_new - v_old) > 2.0 * vt):
        return v_new, False
    if v_old > 0.0:
        arg = 1.0 + (v_new - v_old) / vt
        return (v_old + vt * math.log(max(arg, 1e-300)) if arg > 0.0 else v_crit), True
    return vt * math.log(max(v_new / vt, 1e-300)), True


@njit(cache=True)
def eliminate(m, x):
    """Gaussian elimination with partial pivoting, in place: x becomes m⁻¹x."""
    n = x.size
    for k in range(n):
        p = k
        for i in range(k + 1, n):
            if abs(m[i, k]) > abs(m[p, k]):
                p = i
        if p != k:
            for j in range(n):
                m[k, j], m[p, j] = m[p, j], m[k, j]
            x[k], x[p] = x[p], x[k]
        for i in range(k + 1, n):
            f = m[i, k] / m[k, k]
            for j in range(k, n):
                m[i, j] -= f * m[k, j]
            x[i] -= f * x[k]
    for k in range(n - 1, -1, -1):
        acc = x[k]
        for j in range(k + 1, n):
            acc -= m[k, j] * x[j]
        x[k] = acc / m[k, k]


@njit(cache=True)
def newton_rows(r, u0, i_s, beta_f, beta_r, va, vt, v_crit, u, tol, max_iter):
    """Newton on u − u₀ + R·i(u) = 0 row by row, u (batch, k, 2) updated in
    place; parameters (batch, k).  Returns (converged per row, most iterations)."""
    batch, count = i_s.shape
    n = 2 * count
    done = np.zeros(batch, dtype=np.bool_)
    used = 0
    cur = np.empty(n)
    g = np.empty((count, 2, 2))
    jac = np.empty((n, n))
    rhs = np.empty(n)
    for b in range(batch):
        for it in range(1, max_iter + 1):
            for t in range(count):
                vbe, vbc = u[b, t, 0], u[b, t, 1]
                e_f, de_f = exp_limited(vbe / vt[b, t])
                e_r, de_r = exp_limited(vbc / vt[b, t])
                i_f, i_r = i_s[b, t] * (e_f - 1.0), i_s[b, t] * (e_r - 1.0)
                g_f, g_r = i_s[b, t] * de_f / vt[b, t], i_s[b, t] * de_r / vt[b, t]
                early = 1.0 - vbc / va[b, t]
                cur[2 * t] = (i_f - i_r) * early - i_r / beta_r[b, t]
                cur[2 * t + 1] = i_f / beta_f[b, t] + i_r / beta_r[b, t]
                g[t, 0, 0] = g_f * early
                g[t, 0, 1] = -g_r * early - (i_f - i_r) / va[b, t] - g_r / beta_r[b, t]
                g[t, 1, 0] = g_f / beta_f[b, t]
                g[t, 1, 1] = g_r / beta_r[b, t]
            for m in range(n):
                acc = u[b, m // 2, m % 2] - u0[b, m]
                for j in range(n):
                    acc += r[b, m, j] * cur[j]
                rhs[m] = -acc
                for t in range(count):
                    for c in range(2):
                        jac[m, 2 * t + c] = r[b, m, 2 * t] * g[t, 0, c] + r[b, m, 2 * t + 1] * g[t, 1, c]
                jac[m, m] += 1.0
            if n == 2:
                det = jac[0, 0] * jac[1, 1] - jac[0, 1] * jac[1, 0]
                s0 = (jac[1, 1] * rhs[0] - jac[0, 1] * rhs[1]) / det
                s1 = (jac[0, 0] * rhs[1] - jac[1, 0] * rhs[0]) / det
                rhs[0], rhs[1] = s0, s1
            else:
                eliminate(jac, rhs)
            moved = 0.0
            size = 0.0
            limited = False
            for t in range(count):
                for a in range(2):
                    old = u[b, t, a]
                    new, hit = limit(old + rhs[2 * t + a], old, vt[b, t], v_crit[b, t])
                    limited = limited or hit
                    moved = max(moved, abs(new - old))
                    size = max(size, abs(new))
                    u[b, t, a] = new
            if moved <= tol * (1.0 + size) and not limited and it > 1:
                done[b] = True
                break
        used = max(used, it)
    return done, used


def warm_up():
    """Compile now (or read the cache), so a caller that got the kernel never waits."""
    one = np.ones((1, 1))
    newton_rows(np.zeros((1, 2, 2)), np.zeros((1, 2)), one * 1e-14, one * 100.0, one, one * 100.0,
                one * 0.025, one * 0.7, np.zeros((1, 1, 2)), 1e-9, 3)
