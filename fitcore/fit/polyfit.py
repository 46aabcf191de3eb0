"""Least-squares polynomials in a mapped variable, for many series and folds at once.

The caller maps the regressor into [-1, 1] per series and centres the
response.  Every fold's training Gram matrix comes from per-block power
sums (training = all blocks but the held-out one, or the blocks before it),
is Jacobi-scaled and Cholesky-factored once.  The leading k × k block of a
Cholesky factor is the factor of the leading k × k Gram block, so one
factorisation serves every degree.  On the [-1, 1] window the monomial
basis up to degree 5 has condition ≈ 43, so Gram matrices of well-spread
prices stay near 2e3; any fit whose Gram condition passes
``kernels.COND_LIMIT`` is marked unavailable rather than reported with too
few correct digits.  The per-series work runs compiled (``kernels``).
"""
from __future__ import annotations

from dataclasses import dataclass, replace

import numpy as np

from ..compiled import readonly
from . import kernels
from .controls import PriceTie
from .folds import FoldLayout


@dataclass(frozen=True, eq=False)
class FamilyFit:
    """Polynomial fits of one chunk: S series, F folds, D degrees, P = max degree + 1; series first.

    - ``coef``: (S, F + 1, D, P) coefficients of powers of the mapped
      variable (zero past each degree), response centred; fold F = all rows.
      Without ``fold_coefficients``: (S, 1, D, P), the fit on all rows only.
    - ``ok``: (S, F + 1, D) the fit is determined and steady (full rank,
      condition under the limit; for the full fit, more rows than coefficients).
    - ``sse_test``: (S, F, D) weighted squared error on each fold's held-out rows.
    - ``w_test``: (S, F) held-out weight (row count when unweighted).
    - ``sse_full``: (S, D) weighted in-sample squared error.
    - ``w_full``, ``tss``, ``tss_test``: (S,) total weight, weighted sum of
      squares of the centred response, and the same over held-out rows.
    - ``lower``, ``scale``: (S, P, P), (S, P) the full fit's scaled Cholesky factor.
    - With controls (m of them): ``gamma`` (S, F + 1 or 1, D, m) their coefficients (0 where a fit
      left one out); ``kept`` (S,) how many the full fit kept; ``lower``, ``scale`` are then
      (S, Q, Q), (S, Q) over [1, controls…, x, …], Q = m + P (``controlled``); ``tie``: how x and the
      controls move together (``controls.PriceTie``).  Without: None.
    """

    degrees: tuple[int, ...]
    coef: np.ndarray
    ok: np.ndarray
    sse_test: np.ndarray
    w_test: np.ndarray
    sse_full: np.ndarray
    w_full: np.ndarray
    tss: np.ndarray
    tss_test: np.ndarray
    lower: np.ndarray
    scale: np.ndarray
    gamma: np.ndarray | None = None
    kept: np.ndarray | None = None
    tie: PriceTie | None = None


def fit_family(x: np.ndarray, y: np.ndarray, w: np.ndarray | None, lay: FoldLayout,
               degrees: tuple[int, ...], *, fold_coefficients: bool = False,
               controls: np.ndarray | None = None) -> FamilyFit:
    """Fit every degree on every fold of every series in ``lay``.

    ``x``, ``y``, ``w``: (N,) rows in working order (``lay.bounds`` positions,
    starting at 0); ``x`` mapped into [-1, 1], ``y`` centred per series.
    ``fold_coefficients``: keep each fold's coefficients too (the engine
    needs only the fit on all rows; writing every fold's is ~170 bytes a row).
    ``controls``: (m, N) the controls, centred per series, added to every fit's design (``controlled``).
    """
    if controls is not None:
        return _fit_with_controls(x, y, w, lay, degrees, fold_coefficients, controls)
    p = max(degrees) + 1
    n_series, n_folds, n_deg = len(lay.bounds), lay.n_folds, len(degrees)
    kept = n_folds + 1 if fold_coefficients else 1
    fit = FamilyFit(
        degrees, coef=np.empty((n_series, kept, n_deg, p)), ok=np.empty((n_series, n_folds + 1, n_deg), bool),
        sse_test=np.empty((n_series, n_folds, n_deg)), w_test=np.empty((n_series, n_folds)),
        sse_full=np.empty((n_series, n_deg)), w_full=np.empty(n_series), tss=np.empty(n_series),
        tss_test=np.empty(n_series), lower=np.empty((n_series, p, p)), scale=np.empty((n_series, p)))
    kernels.family_fit(readonly(x), readonly(y), readonly(np.empty(0) if w is None else w), readonly(lay.bounds),
                       readonly(lay.held_out.astype(np.int64)), lay.cumulative,
                       readonly(np.asarray(degrees, dtype=np.int64)), p, fit.coef, fit.ok, fit.sse_test,
                       fit.w_test, fit.sse_full, fit.w_full, fit.tss, fit.tss_test, fit.lower, fit.scale)
    return fit



def _fit_with_controls(x, y, w, lay: FoldLayout, degrees, fold_coefficients: bool, z: np.ndarray) -> FamilyFit:
    from .controlled import controlled_fit
    p = max(max(degrees) + 1, 2)  # x is always in the design's moments: its tie to the controls is measured
    m = len(z)
    q = m + p
    n_series, n_folds, n_deg = len(lay.bounds), lay.n_folds, len(degrees)
    kept = n_folds + 1 if fold_coefficients else 1
    fit = FamilyFit(
        degrees, coef=np.empty((n_series, kept, n_deg, p)), ok=np.empty((n_series, n_folds + 1, n_deg), bool),
        sse_test=np.empty((n_series, n_folds, n_deg)), w_test=np.empty((n_series, n_folds)),
        sse_full=np.empty((n_series, n_deg)), w_full=np.empty(n_series), tss=np.empty(n_series),
        tss_test=np.empty(n_series), lower=np.empty((n_series, q, q)), scale=np.empty((n_series, q)),
        gamma=np.empty((n_series, kept, n_deg, m)), kept=np.empty(n_series, np.int64),
        tie=PriceTie(np.empty(n_series), np.empty(n_series, np.int64), np.empty((n_series, m), bool)))
    controlled_fit(readonly(x), readonly(y), readonly(np.ascontiguousarray(z, dtype=np.float64)),
                   readonly(np.empty(0) if w is None else w), readonly(lay.bounds),
                   readonly(lay.held_out.astype(np.int64)), lay.cumulative,
                   readonly(np.asarray(degrees, dtype=np.int64)), p, fit.coef,
                   fit.gamma, fit.ok, fit.sse_test, fit.w_test, fit.sse_full, fit.w_full, fit.tss, fit.tss_test,
                   fit.lower, fit.scale, fit.kept, fit.tie.vif, fit.tie.tied, fit.tie.redundant)
    if p > max(degrees) + 1:  # the x column was there for ``tie`` only
        return replace(fit, coef=np.ascontiguousarray(fit.coef[..., :p - 1]))
    return fit
