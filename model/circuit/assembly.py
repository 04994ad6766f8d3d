"""Assembling the nodal equations of a netlist from its compiled plan.

Every linear solve and the DC Newton start here: element values become
admittances g (batch, n_adm) and constraint voltages V (batch, n_src), and a
plan (see :mod:`model.circuit.plan`) turns them into A (batch, n, n) and b (batch, n)
by matrix products, or by sparse sums for big batches where a dense product
would mostly multiply zeros.
"""

from __future__ import annotations

import numpy as np

from model.circuit.netlist import GROUND, Netlist, Resistor
from model.circuit.plan import Plan

#: From this batch size on, matrices are assembled by sparse sums rather
#: than dense products.
SPARSE_FROM = 256


def admittance_values(net: Netlist, plan: Plan, omega=None, excite=None, split=False):
    """(g, V): admittances (batch, n_adm) and constraint voltages (batch, n_src).

    A capacitor's entry is jωC, or with ``split`` its capacitance C (F) alone.
    """
    real = omega is None
    # Filled entry-major (each entry one contiguous row) on big batches, and
    # returned as the (batch, …) transposes: the sparse sums read by entry.
    big = net.batch >= SPARSE_FROM
    g = np.empty((len(plan.admittances), net.batch) if big else (net.batch, len(plan.admittances)),
                 dtype=float if real else complex)
    cols = g if big else g.T
    for k, name in enumerate(plan.admittances):
        e = net.element(name)
        cols[k] = 1.0 / e.r if isinstance(e, Resistor) else (e.c if split else 1j * omega * e.c)
    v = np.zeros((len(plan.constraints), net.batch) if big else (net.batch, len(plan.constraints)))
    rows = v if big else v.T
    for k, name in enumerate(plan.constraints):
        if excite is None:
            rows[k] = net.element(name).v
        elif name in excite:
            rows[k] = excite[name]
    return (g.T, v.T) if big else (g, v)


def assemble_linear(plan: Plan, g, v):
    """The linear network's A (batch, n, n) and b (batch, n)."""
    batch, n = g.shape[0], plan.n
    if batch < SPARSE_FROM:
        gv = (g[:, :, None] * v[:, None, :]).reshape(batch, -1)
        return (g @ plan.adm_stamp).reshape(batch, n, n), gv @ plan.adm_rhs
    # b's terms are products g[a]·V[s] for a few (admittance, source) pairs:
    # formed as needed rather than all of them.
    pairs = v.shape[1]
    b = np.zeros((n, batch), dtype=np.result_type(g, v))
    for col, entries in plan.rhs_terms:
        for row, c in entries:
            b[col] += c * (g[:, row // pairs] * v[:, row % pairs])
    return _sparse_product(g, plan.adm_terms, n * n).reshape(batch, n, n), b.T


def _sparse_product(values, terms, width):
    """values @ M for a sparse M given as (column, ((row, coef), ...)) terms.

    Built column by column in a (width, batch) array, so each write is
    contiguous, and returned as its (batch, width) transpose: a view whose
    columns stay contiguous for the entry-major elimination that reads them."""
    out = np.zeros((width, values.shape[0]), dtype=values.dtype)
    for col, acc in _sparse_columns(values, terms):
        out[col] = acc
    return out.T


def index_dot(x, c):
    """x (b, p) @ c (p, q) for a constant c of a few ±1 entries (a plan's
    index matrix), one whole-batch operation per entry: a BLAS product of
    such thin matrices costs far more than the arithmetic, except on small
    batches, where numpy's fixed cost per call dominates and one product wins."""
    if x.shape[0] < SPARSE_FROM:
        return x @ c
    # Summed entry-major (each column one contiguous row), returned transposed.
    out = np.zeros((c.shape[1], x.shape[0]), dtype=np.result_type(x, c))
    for i, j in zip(*np.nonzero(c)):
        out[j] += c[i, j] * x[:, i]
    return out.T


def node_dict(plan: Plan, x, v):
    """Node name → voltage (batch,), ground included, from the unknowns x."""
    if x.shape[0] < SPARSE_FROM:
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
