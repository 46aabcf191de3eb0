"""Small dense linear algebra, batched over a leading axis.

Every matrix here is at most 6 × 6 (a degree-5 polynomial), while the batch
holds one matrix per series and fold.  Looping over the 6 × 6 entries in
Python and vectorising over the batch is far faster than calling LAPACK once
per matrix, and lets a rank-deficient matrix be marked rather than raise.
"""
from __future__ import annotations

import numpy as np

# A squared Cholesky pivot below this (on a unit-diagonal Gram matrix) means
# the column adds nothing the earlier ones do not already span.  Exactly
# singular matrices leave pivots near 1e-13 after rounding; a genuine
# direction this weak (relative singular value < 1e-5) cannot be estimated
# from data anyway.
RANK_TOL = 1e-10

# Above this condition number of the scaled Gram matrix a solve through it
# keeps fewer than 8 significant digits (error ≈ condition × 1.1e-16); such
# a fit is too unstable to trust and is marked unavailable instead.
COND_LIMIT = 1e8


def scaled_cholesky(gram: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Cholesky factor of ``D G D`` with ``D = diag(G)^-1/2`` (Jacobi scaling).

    ``gram``: (..., p, p) symmetric positive semi-definite.
    Returns ``(L, scale, ok)``: ``L`` (..., p, p) lower triangular with
    ``L Lᵀ = D G D``; ``scale`` (..., p) the diagonal of ``D``; ``ok`` (..., p)
    bool, False from the first column that is (numerically) a combination of
    the earlier ones.  A failed column is dropped (unit pivot, zero below), so
    the leading block of every size ≤ the first failure stays exact.
    """
    p = gram.shape[-1]
    diag = np.diagonal(gram, axis1=-2, axis2=-1)
    positive = diag > 0
    scale = np.where(positive, 1.0 / np.sqrt(np.where(positive, diag, 1.0)), 0.0)
    a = gram * scale[..., :, None] * scale[..., None, :]
    lower = np.zeros_like(a)
    ok = np.zeros(a.shape[:-1], dtype=bool)
    for k in range(p):
        pivot = a[..., k, k] - np.einsum("...j,...j->...", lower[..., k, :k], lower[..., k, :k])
        good = positive[..., k] & (pivot > RANK_TOL)
        if k:
            good &= ok[..., k - 1]
        ok[..., k] = good
        root = np.sqrt(np.where(good, pivot, 1.0))
        lower[..., k, k] = root
        for i in range(k + 1, p):
            value = (a[..., i, k] - np.einsum("...j,...j->...", lower[..., i, :k], lower[..., k, :k])) / root
            lower[..., i, k] = np.where(good, value, 0.0)
    return lower, scale, ok


def forward_solve(lower: np.ndarray, rhs: np.ndarray) -> np.ndarray:
    """Solve ``L z = b`` for lower-triangular ``L`` (..., p, p), ``b`` (..., p)."""
    p = lower.shape[-1]
    z = np.zeros(np.broadcast_shapes(lower.shape[:-1], rhs.shape), dtype=np.float64)
    for i in range(p):
        z[..., i] = (rhs[..., i] - np.einsum("...j,...j->...", lower[..., i, :i], z[..., :i])) / lower[..., i, i]
    return z


def back_solve(lower: np.ndarray, z: np.ndarray, size: int) -> np.ndarray:
    """Solve ``L[:size, :size]ᵀ β = z[:size]``; returns (..., size)."""
    beta = np.zeros(z.shape[:-1] + (size,), dtype=np.float64)
    for i in range(size - 1, -1, -1):
        tail = np.einsum("...j,...j->...", lower[..., i + 1:size, i], beta[..., i + 1:size])
        beta[..., i] = (z[..., i] - tail) / lower[..., i, i]
    return beta


def gram_condition(gram_scaled: np.ndarray, lower: np.ndarray, sizes) -> np.ndarray:
    """(…, len(sizes)) Frobenius-norm condition bound ‖G‖·‖G⁻¹‖ of each leading block.

    ``G⁻¹ = L⁻ᵀL⁻¹`` and the inverse of a leading block of ``L`` is the leading
    block of ``L⁻¹``, so one triangular inverse serves every size.
    """
    p = lower.shape[-1]
    inverse = forward_solve(lower[..., None, :, :], np.eye(p)).swapaxes(-1, -2)
    out = []
    for size in sizes:
        g = np.sqrt(np.sum(gram_scaled[..., :size, :size] ** 2, axis=(-1, -2)))
        out.append(g * np.sum(inverse[..., :size, :size] ** 2, axis=(-1, -2)))
    return np.stack(out, axis=-1)
