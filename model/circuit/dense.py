"""Batched solves of many small dense linear systems.

numpy's ``linalg.solve`` calls LAPACK once per matrix, which costs about a
microsecond each; for 100,000 designs of 3×3 that dominates everything else.
Gaussian elimination written over the batch axis does the same arithmetic in
a few dozen whole-array operations.  Small batches go to LAPACK, whose fixed
cost per call is lower than our Python loop's.
"""

from __future__ import annotations

import numpy as np

#: Below this batch size LAPACK is quicker than the vectorised elimination.
_LAPACK_BELOW = 256


def solve_batched(a: np.ndarray, b: np.ndarray) -> np.ndarray:
    """Solve ``a[k] @ x[k] = b[k]`` for every batch row k.

    Parameters
    ----------
    a : (batch, n, n) array, real or complex
    b : (batch, n) or (batch, n, m) array

    Returns
    -------
    x with the shape of ``b``.  A singular row gives non-finite entries in
    that row instead of an exception, so one bad design cannot sink a batch.
    """
    vector = b.ndim == 2
    rhs = b[..., None] if vector else b
    if a.shape[-1] == 0:
        x = np.zeros_like(rhs, dtype=np.result_type(a, b))
    elif a.shape[0] < _LAPACK_BELOW:
        x = _lapack(a, rhs)
    elif a.shape[-1] <= 3:
        x = _cofactor(a, rhs)
    elif a.shape[-1] == 4:
        x = _blocks(a, rhs)
    else:
        x = _eliminate(a, rhs)
    return x[..., 0] if vector else x


def solve_dominant(a: np.ndarray, b: np.ndarray, pattern=None) -> np.ndarray:
    """:func:`solve_batched` for diagonally dominant matrices (the nodal
    matrix of a network of positive resistors to known nodes): elimination
    without pivoting is stable there (Golub & Van Loan, *Matrix
    Computations*, on diagonally dominant systems, from memory; the nodal
    matrix is symmetric, so dominant by rows and by columns alike), so big
    batches skip the pivot search.  ``pattern`` (n, n) bool, where given,
    marks the entries of ``a`` that may be non-zero (the rest are exactly 0
    in every row): elimination then visits only those and their fill-in."""
    if a.shape[0] < _LAPACK_BELOW or a.shape[-1] <= 3:
        return solve_batched(a, b)
    vector = b.ndim == 2
    rhs = b[..., None] if vector else b
    x = _eliminate(a, rhs, pivot=False) if pattern is None else _eliminate_sparse(a, rhs, pattern)
    return x[..., 0] if vector else x


def _lapack(a, rhs):
    try:
        return np.linalg.solve(a, rhs)
    except np.linalg.LinAlgError:
        # Fall back row by row so only the singular rows come out non-finite.
        return _eliminate(a, rhs)


def _cofactor(a, rhs):
    """Cramer's rule by cofactors for n ≤ 3: a handful of whole-array products.

    Accurate enough here because every caller either iterates (Newton
    corrects the step) or solves a nodal matrix whose condition number is
    set by resistor ratios, far below 1/eps.
    """
    n = a.shape[-1]
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        if n == 1:
            return rhs / a[:, :1, :1]
        if n == 2:
            p, q, r, s = a[:, 0, 0, None], a[:, 0, 1, None], a[:, 1, 0, None], a[:, 1, 1, None]
            det = p * s - q * r
            b0, b1 = rhs[:, 0], rhs[:, 1]
            return np.stack([(s * b0 - q * b1) / det, (p * b1 - r * b0) / det], axis=1)
        # Entry-major copies: every product below then runs over contiguous rows.
        at = np.ascontiguousarray(a.transpose(1, 2, 0))
        m = [[at[i, j, None] for j in range(3)] for i in range(3)]
        c00 = m[1][1] * m[2][2] - m[1][2] * m[2][1]
        c01 = m[1][2] * m[2][0] - m[1][0] * m[2][2]
        c02 = m[1][0] * m[2][1] - m[1][1] * m[2][0]
        det = m[0][0] * c00 + m[0][1] * c01 + m[0][2] * c02
        inv = [
            [c00, m[0][2] * m[2][1] - m[0][1] * m[2][2], m[0][1] * m[1][2] - m[0][2] * m[1][1]],
            [c01, m[0][0] * m[2][2] - m[0][2] * m[2][0], m[0][2] * m[1][0] - m[0][0] * m[1][2]],
            [c02, m[0][1] * m[2][0] - m[0][0] * m[2][1], m[0][0] * m[1][1] - m[0][1] * m[1][0]],
        ]
        b = np.ascontiguousarray(rhs.transpose(1, 2, 0))
        x = np.stack([(inv[i][0] * b[0] + inv[i][1] * b[1] + inv[i][2] * b[2]) / det for i in range(3)])
        return x.transpose(2, 0, 1)


#: A row of :func:`_blocks` is redone with pivoting when its residual
#: exceeds this fraction of |a|·|x| + |b| (a backward error far above what
#: pivoted elimination leaves, about n·eps).
_BLOCK_RESIDUAL = 1e-11


def _blocks(a, rhs):
    """4×4 systems as 2×2 blocks: [[A, B], [C, D]], solved through A⁻¹ and
    the Schur complement S = D − C·A⁻¹·B, each 2×2 inverse in closed form
    (two transistors' junctions: each block is one transistor's).  No
    pivoting, so each row's residual is checked and a row that fails the
    check (a near-singular A, say) is solved again by pivoted elimination."""
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        at = np.ascontiguousarray(a.transpose(1, 2, 0))
        b = np.ascontiguousarray(rhs.transpose(1, 2, 0))

        def inv2(p, q, r, t):
            det = p * t - q * r
            return t / det, -q / det, -r / det, p / det

        def mul2(x, y):
            return (x[0] * y[0] + x[1] * y[2], x[0] * y[1] + x[1] * y[3],
                    x[2] * y[0] + x[3] * y[2], x[2] * y[1] + x[3] * y[3])

        blk_a, blk_b = (at[0, 0], at[0, 1], at[1, 0], at[1, 1]), (at[0, 2], at[0, 3], at[1, 2], at[1, 3])
        blk_c, blk_d = (at[2, 0], at[2, 1], at[3, 0], at[3, 1]), (at[2, 2], at[2, 3], at[3, 2], at[3, 3])
        ia = inv2(*blk_a)
        c_ia = mul2(blk_c, ia)
        c_ia_b = mul2(c_ia, blk_b)
        i_s = inv2(*(d - e for d, e in zip(blk_d, c_ia_b)))
        b_a, b_c = (b[0], b[1]), (b[2], b[3])
        # y = b_c − C·A⁻¹·b_a; x2 = S⁻¹·y; x1 = A⁻¹·(b_a − B·x2).
        y = (b_c[0] - c_ia[0] * b_a[0] - c_ia[1] * b_a[1], b_c[1] - c_ia[2] * b_a[0] - c_ia[3] * b_a[1])
        x2 = (i_s[0] * y[0] + i_s[1] * y[1], i_s[2] * y[0] + i_s[3] * y[1])
        r = (b_a[0] - blk_b[0] * x2[0] - blk_b[1] * x2[1], b_a[1] - blk_b[2] * x2[0] - blk_b[3] * x2[1])
        x = np.stack([ia[0] * r[0] + ia[1] * r[1], ia[2] * r[0] + ia[3] * r[1], x2[0], x2[1]])
        # The residual of every row, against the size of its terms.
        worst = np.zeros(x.shape[1:], dtype=float)
        for i in range(4):
            terms = [at[i, j, None] * x[j] for j in range(4)]
            res = np.abs(sum(terms) - b[i])
            scale = sum(np.abs(t) for t in terms) + np.abs(b[i])
            worst = np.maximum(worst, res / scale)
        bad = ~(worst <= _BLOCK_RESIDUAL).all(axis=0)
    x = x.transpose(2, 0, 1)
    if bad.any():
        rows = np.flatnonzero(bad)
        x[rows] = _eliminate(a[rows], rhs[rows])
    return x


def _eliminate(a, rhs, pivot=True):
    """Gaussian elimination (with partial pivoting unless told otherwise),
    vectorised over the batch."""
    n = a.shape[-1]
    dtype = np.result_type(a, rhs)
    # Entry-major layout makes every step below a contiguous whole-batch operation.
    # One copy straight into that layout (a matrix assembled entry-major is
    # then read contiguously).
    m = np.empty((n, n + rhs.shape[-1], a.shape[0]), dtype=dtype)
    m[:, :n] = a.transpose(1, 2, 0)
    m[:, n:] = rhs.transpose(1, 2, 0)
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        for k in range(n):
            if pivot and k < n - 1:
                _pivot(m, k)
            inv = 1.0 / m[k, k]
            for i in range(k + 1, n):
                factor = m[i, k] * inv
                m[i, k:] -= factor * m[k, k:]
        x = np.empty((n, m.shape[1] - n, m.shape[2]), dtype=dtype)
        for k in range(n - 1, -1, -1):
            acc = m[k, n:].copy()
            for j in range(k + 1, n):
                acc -= m[k, j] * x[j]
            x[k] = acc / m[k, k]
    return x.transpose(2, 0, 1)


def _eliminate_sparse(a, rhs, pattern):
    """Elimination without pivoting that skips the entries ``pattern`` says
    are zero (tracking fill-in): the same arithmetic as :func:`_eliminate`
    less its multiplications by exact zeros.  A DC network reduced onto its
    junctions is nearly diagonal, so most of the dense work is such.  The
    matrix is read in place as (batch,) rows, only updated entries becoming
    new arrays; the right-hand sides are copied once, entry-major, and
    reduced in place into the solution."""
    n = a.shape[-1]
    at = a.transpose(1, 2, 0)
    x = np.array(rhs.transpose(1, 2, 0), dtype=np.result_type(a, rhs))
    nz = np.array(pattern, dtype=bool)
    changed = {}

    def entry(i, j):
        return changed[i, j] if (i, j) in changed else at[i, j]

    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        for k in range(n):
            below = [i for i in range(k + 1, n) if nz[i, k]]
            if not below:
                continue
            inv = 1.0 / entry(k, k)
            cols = [j for j in range(k + 1, n) if nz[k, j]]
            for i in below:
                factor = entry(i, k) * inv
                for j in cols:
                    changed[i, j] = entry(i, j) - factor * entry(k, j)
                    nz[i, j] = True
                x[i] -= factor * x[k]
        for k in range(n - 1, -1, -1):
            for j in range(k + 1, n):
                if nz[k, j]:
                    x[k] -= entry(k, j) * x[j]
            x[k] /= entry(k, k)
    return x.transpose(2, 0, 1)


def _pivot(m, k):
    """Swap into row k, per batch row, the row with the largest |entry| in column k."""
    n = m.shape[0]
    best = k + np.argmax(np.abs(m[k:, k]), axis=0)
    for p in range(k + 1, n):
        swap = best == p
        if swap.any():
            row_k = m[k].copy()
            m[k] = np.where(swap, m[p], m[k])
            m[p] = np.where(swap, row_k, m[p])
