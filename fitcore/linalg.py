"""Small dense linear algebra, batched over trailing axes.

Every matrix here is at most 6 × 6 (a degree-5 polynomial), while the batch
holds one matrix per series and fold.  Matrices are stored entry-first —
shape (p, p, *batch) — so each step of a Python loop over the ≤ 21 entries
is one contiguous vector operation over the whole batch.  That is far faster
than LAPACK once per matrix, and lets a rank-deficient matrix be marked
rather than raise.
"""
from __future__ import annotations

import numpy as np

# A squared Cholesky pivot below this (on a unit-diagonal Gram matrix) means
# the column adds nothing the earlier ones do not already span.  Exactly
# singular matrices leave pivots near 1e-13 after rounding.
RANK_TOL = 1e-10

# Above this condition number of the scaled Gram matrix a solve through it
# keeps fewer than 8 significant digits (error ≈ condition × 1.1e-16); such
# a fit is too unstable to trust and is marked unavailable instead.
COND_LIMIT = 1e8


def hankel_cholesky(power_sums: np.ndarray, p: int):
    """Cholesky factor of the Jacobi-scaled Gram matrix G[i, j] = power_sums[i + j].

    ``power_sums``: (2p − 1, *batch), Σw·xᵏ.  Returns ``(L, scale, ok)``:
    ``L`` (p, p, *batch) lower triangular with L Lᵀ = D G D, D = diag(G)^-½;
    ``scale`` (p, *batch) the diagonal of D; ``ok`` (p, *batch) False from the
    first column that is numerically a combination of the earlier ones.  A
    failed column is dropped (unit pivot, zeros below), so every leading
    block before the first failure is exact.
    """
    diag = power_sums[0:2 * p - 1:2]
    positive = diag > 0
    scale = np.where(positive, 1.0 / np.sqrt(np.where(positive, diag, 1.0)), 0.0)
    lower = np.zeros((p, p) + power_sums.shape[1:])
    ok = np.zeros((p,) + power_sums.shape[1:], dtype=bool)
    for k in range(p):
        pivot = power_sums[2 * k] * scale[k] * scale[k] - np.sum(lower[k, :k] ** 2, axis=0)
        good = positive[k] & (pivot > RANK_TOL)
        if k:
            good &= ok[k - 1]
        ok[k] = good
        root = np.sqrt(np.where(good, pivot, 1.0))
        lower[k, k] = root
        for i in range(k + 1, p):
            value = power_sums[i + k] * scale[i] * scale[k] - np.sum(lower[i, :k] * lower[k, :k], axis=0)
            lower[i, k] = np.where(good, value / root, 0.0)
    return lower, scale, ok


def forward_solve(lower: np.ndarray, rhs: np.ndarray) -> np.ndarray:
    """Solve L z = b; ``lower`` (p, p, *batch), ``rhs`` (p, *batch)."""
    p = lower.shape[0]
    z = np.empty(np.broadcast_shapes(lower.shape[1:], rhs.shape))
    for i in range(p):
        z[i] = (rhs[i] - np.sum(lower[i, :i] * z[:i], axis=0)) / lower[i, i]
    return z


def back_solve(lower: np.ndarray, z: np.ndarray, size: int) -> np.ndarray:
    """Solve L[:size, :size]ᵀ β = z[:size]; returns (size, *batch)."""
    beta = np.empty((size,) + z.shape[1:])
    for i in range(size - 1, -1, -1):
        beta[i] = (z[i] - np.sum(lower[i + 1:size, i] * beta[i + 1:size], axis=0)) / lower[i, i]
    return beta


def triangular_inverse(lower: np.ndarray) -> np.ndarray:
    """L⁻¹ of lower-triangular ``lower`` (p, p, *batch)."""
    p = lower.shape[0]
    inverse = np.zeros_like(lower)
    for i in range(p):
        inverse[i, i] = 1.0 / lower[i, i]
        for j in range(i):
            inverse[i, j] = -np.sum(lower[i, j:i] * inverse[j:i, j], axis=0) * inverse[i, i]
    return inverse


def leading_conditions(power_sums: np.ndarray, lower: np.ndarray, scale: np.ndarray, sizes) -> np.ndarray:
    """(len(sizes), *batch) bound ‖G‖_F·‖G⁻¹‖_F on the condition of each leading block of the scaled Gram.

    ``G⁻¹ = L⁻ᵀL⁻¹``, and the inverse of a leading block of ``L`` is the
    leading block of ``L⁻¹``; both Frobenius norms grow a row at a time.
    """
    p = lower.shape[0]
    inverse = triangular_inverse(lower)
    gram_sq = np.zeros(lower.shape[2:])
    inv_sq = np.zeros(lower.shape[2:])
    by_size = {}
    for k in range(p):
        row = power_sums[k:2 * k + 1] * scale[k] * scale[:k + 1]
        gram_sq = gram_sq + 2 * np.sum(row[:-1] ** 2, axis=0) + row[-1] ** 2
        inv_sq = inv_sq + np.sum(inverse[k, :k + 1] ** 2, axis=0)
        by_size[k + 1] = np.sqrt(gram_sq) * inv_sq
    return np.stack([by_size[size] for size in sizes])
