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
    else:
        x = _eliminate(a, rhs)
    return x[..., 0] if vector else x


def _lapack(a, rhs):
    try:
        return np.linalg.solve(a, rhs)
    except np.linalg.LinAlgError:
        # Fall back row by row so only the singular rows come out non-finite.
        return _eliminate(a, rhs)


def _eliminate(a, rhs):
    """Gaussian elimination with partial pivoting, vectorised over the batch."""
    n = a.shape[-1]
    dtype = np.result_type(a, rhs)
    # Entry-major layout makes every step below a contiguous whole-batch operation.
    m = np.concatenate([a, rhs], axis=-1).astype(dtype).transpose(1, 2, 0).copy()
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        for k in range(n):
            if k < n - 1:
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
